"""``lexbuild check`` and ``lexbuild schema``: the sources' own commands."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import Any

from lexbuild.cli.common import EXIT_FINDINGS, EXIT_OK, add_no_cache_option, build_cache


def register(subparsers: Any) -> None:
    check = subparsers.add_parser(
        "check",
        help="run the consistency rules over a sources folder",
        description="Run the coded consistency rules (E... errors, W... warnings) over a sources "
        "folder. Exit 0 when clean, 1 when a finding counts, 2 when the folder cannot be read.",
    )
    check.add_argument(
        "sources", type=Path, nargs="?", help="folder holding lexicon.yaml and entries/"
    )
    check.add_argument("--format", choices=("text", "json"), default="text")
    check.add_argument(
        "--select", action="append", metavar="CODE", help="run only codes starting with CODE"
    )
    check.add_argument(
        "--ignore",
        action="append",
        default=[],
        metavar="CODE",
        help="skip codes starting with CODE",
    )
    check.add_argument(
        "--strict", action="store_true", help="warnings count as findings for the exit code"
    )
    check.add_argument("--list-rules", action="store_true", help="print the rule table and exit")
    add_no_cache_option(check)
    check.set_defaults(handler=run_check)

    schema = subparsers.add_parser(
        "schema",
        help="write the JSON Schemas of the YAML sources",
        description="Write the JSON Schemas (generated from the typed model) of lexicon.yaml and "
        "of one entry file, for text editors that complete and check YAML.",
    )
    schema.add_argument("--output", type=Path, default=Path("schemas"), help="folder to write to")
    schema.set_defaults(handler=run_schema)


def run_check(args: argparse.Namespace) -> int:
    from lexbuild.errors import SourceError
    from lexbuild.lexicon.build import open_build
    from lexbuild.lexicon.checks import (
        RULES,
        Severity,
        findings_json,
        findings_text,
        load_problem_findings,
    )

    if args.list_rules:
        for rule in RULES.values():
            print(f"{rule.code}  {rule.severity.value:<7}  {rule.name}: {rule.hint}")
        return EXIT_OK
    if args.sources is None:
        raise SourceError("give the sources folder to check (or --list-rules)")
    problems: list[SourceError] = []
    with build_cache(args) as cache:
        build = open_build(args.sources, cache=cache, problems=problems)
        findings = load_problem_findings(problems) + build.check(
            select=args.select, ignore=args.ignore
        )
    output = findings_json(findings) if args.format == "json" else findings_text(findings)
    sys.stdout.write(output)
    counted = {Severity.ERROR, Severity.WARNING} if args.strict else {Severity.ERROR}
    return EXIT_FINDINGS if any(f.severity in counted for f in findings) else EXIT_OK


def run_schema(args: argparse.Namespace) -> int:
    from lexbuild.lexicon.sources import write_schemas

    for path in write_schemas(args.output):
        print(path)
    return EXIT_OK
