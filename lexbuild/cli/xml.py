"""``lexbuild export`` and ``lexbuild validate``: publish the sources in a registered format
(``lexbuild.formats.registry``: TEI Lex-0, LMF, OntoLex-Lemon), check published files.

``export`` refuses to write anything while the sources have check errors or the export does not
validate (published schemas + the lexicon's extra schemas); each validation problem is shown
with the YAML file and line of the entry it comes from. The file is written atomically.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import Any

from lexbuild.cli.common import (
    EXIT_FINDINGS,
    EXIT_OK,
    add_no_cache_option,
    add_schemas_option,
    build_cache,
)
from lexbuild.formats.registry import FORMAT_MODULES


def register(subparsers: Any) -> None:
    export = subparsers.add_parser(
        "export",
        help="write the sources as TEI Lex-0, LMF or OntoLex-Lemon, validated",
        description="Check the sources, export them as TEI Lex-0, LMF rev. 16 or OntoLex-Lemon "
        "(Turtle), validate the result against the published schemas (and the lexicon's extra "
        "schemas; OntoLex-Lemon: the project's SHACL shapes), then write it "
        "atomically. Exit 0 when written, 1 when check errors or validation problems stopped "
        "the export (nothing is written), 2 on a usage or I/O error.",
    )
    export.add_argument("sources", type=Path, help="folder holding lexicon.yaml and entries/")
    export.add_argument("--format", choices=tuple(FORMAT_MODULES), required=True)
    export.add_argument("--output", type=Path, required=True, help="file to write")
    add_schemas_option(export)
    export.add_argument(
        "--change",
        action="append",
        default=[],
        metavar="TEXT",
        help="a change-log line for the TEI header (repeatable)",
    )
    add_no_cache_option(export)
    export.set_defaults(handler=run_export)

    validate = subparsers.add_parser(
        "validate",
        help="validate TEI Lex-0, LMF or OntoLex-Lemon files",
        description="Recognise each file's format (TEI Lex-0 or LMF rev. 16 by the root "
        "element, OntoLex-Lemon by the .ttl ending) and validate it against the published "
        "schemas (OntoLex-Lemon: the project's SHACL shapes). With --sources, the lexicon's "
        "extra schemas apply too and problems are traced back to the YAML file and line. "
        "Exit 0 when every file is valid, 1 when a problem was found, 2 on a usage or I/O "
        "error.",
    )
    validate.add_argument("files", type=Path, nargs="+", metavar="FILE")
    add_schemas_option(validate)
    validate.add_argument(
        "--sources", type=Path, default=None, help="the sources folder the files come from"
    )
    validate.add_argument("--format", choices=("text", "json"), default="text")
    add_no_cache_option(validate)
    validate.set_defaults(handler=run_validate)


def run_export(args: argparse.Namespace) -> int:
    from lexbuild._atomic import atomic_write_bytes
    from lexbuild.errors import SourceError
    from lexbuild.formats.registry import ValidationContext, get_format
    from lexbuild.formats.validate import findings_text as xml_findings_text
    from lexbuild.lexicon.build import open_build
    from lexbuild.lexicon.checks import findings_text, has_errors, load_problem_findings

    problems: list[SourceError] = []
    with build_cache(args) as cache:
        build = open_build(args.sources, cache=cache, problems=problems)
        findings = load_problem_findings(problems) + build.check()
        if has_errors(findings):
            errors = [finding for finding in findings if finding.severity.value == "error"]
            sys.stdout.write(findings_text(errors))
            print(f"lexbuild export: nothing written to {args.output}", file=sys.stderr)
            return EXIT_FINDINGS
        output_format = get_format(args.format)
        data, document = build.write(output_format, changes=args.change)
        problems_found = build.validate(
            output_format,
            data,
            document,
            ValidationContext(
                schemas_dir=args.schemas,
                extra_schemas=tuple(build.meta.extra_schemas),
                name=f"{args.output} (not written)",
                source_map=build.source_map,
                base_dir=build.root,
            ),
        )
    if problems_found:
        sys.stdout.write(xml_findings_text(problems_found))
        print(f"lexbuild export: nothing written to {args.output}", file=sys.stderr)
        return EXIT_FINDINGS
    atomic_write_bytes(args.output, data)
    print(f"{args.output}: {output_format.title} export of {len(build.items)} entries, valid")
    return EXIT_OK


def run_validate(args: argparse.Namespace) -> int:
    from lexbuild.formats.validate import XmlFinding, findings_json, findings_text

    source_map = None
    extra_schemas: list[Any] = []
    base_dir = None
    if args.sources is not None:
        from lexbuild.lexicon.sources import load_lexicon

        loaded = load_lexicon(args.sources)
        source_map = loaded.source_map
        extra_schemas = list(loaded.lexicon.meta.extra_schemas)
        base_dir = loaded.root
    findings: list[XmlFinding] = []
    with build_cache(args) as cache:
        for path in args.files:
            findings += _validate_file(path, args, cache, source_map, extra_schemas, base_dir)
    if args.format == "json":
        sys.stdout.write(findings_json(findings))
    else:
        sys.stdout.write(findings_text(findings))
    return EXIT_FINDINGS if findings else EXIT_OK


def _validate_file(
    path: Path,
    args: argparse.Namespace,
    cache: Any,
    source_map: Any,
    extra_schemas: list[Any],
    base_dir: Any,
) -> list[Any]:
    from lexbuild.errors import UnsafeXMLError
    from lexbuild.formats.registry import ValidationContext, format_for_file
    from lexbuild.formats.xmlsafe import DEFAULT_MAX_BYTES

    output_format = format_for_file(path)
    size = path.stat().st_size
    if size > DEFAULT_MAX_BYTES:
        raise UnsafeXMLError(f"{path}: {size} bytes is over the limit of {DEFAULT_MAX_BYTES} bytes")
    data = path.read_bytes()
    if cache is not None and output_format.name in ("tei", "lmf"):
        from lexbuild.formats.validate import validate_cached
        from lexbuild.lexicon.build_cache import code_fingerprint

        return validate_cached(
            data,
            cache=cache,
            fingerprint=code_fingerprint(),
            schemas_dir=args.schemas,
            extra_schemas=extra_schemas,
            name=str(path),
            source_map=source_map,
            base_dir=base_dir,
        )
    return output_format.validate(
        data,
        ValidationContext(
            schemas_dir=args.schemas,
            extra_schemas=tuple(extra_schemas),
            name=str(path),
            source_map=source_map,
            base_dir=base_dir,
        ),
    )
