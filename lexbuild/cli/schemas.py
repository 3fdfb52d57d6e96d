"""``lexbuild schemas fetch`` and ``lexbuild schemas status``: the published schemas on disk.

``fetch`` brings TEILex0.rng, TEILex0.sch and DTD_LMF_REV_16.dtd into the per-user cache from
their pinned URLs (or ``--mirror BASE``, read as ``BASE/<file name>``), each checked against its
sha256 before it lands. ``status`` says, for each file, where the search order finds it and
whether its checksum is the published one.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import Any

from lexbuild.cli.common import EXIT_FINDINGS, EXIT_OK, add_schemas_option


def register(subparsers: Any) -> None:
    schemas = subparsers.add_parser(
        "schemas",
        help="fetch the published schemas into the per-user cache, or show where they are",
        description="The published TEI Lex-0 and LMF schemas are not shipped: `fetch` downloads "
        "them from pinned URLs (fixed commits) and checks their sha256; `status` shows what "
        "export, validate, release and demo would read.",
    )
    actions = schemas.add_subparsers(dest="schemas_action", metavar="ACTION", required=True)

    fetch = actions.add_parser(
        "fetch",
        help="download the published schemas into the per-user cache, sha256 checked",
        description="Download each published schema to a temporary file, check its sha256, then "
        "move it into the per-user cache ($XDG_CACHE_HOME/lexbuild/schemas). A file already "
        "there with the right checksum is kept. A mismatch is refused and the cache is left as "
        "it was. Exit 0 when every file is in place, 2 otherwise.",
    )
    fetch.add_argument(
        "--mirror",
        default=None,
        metavar="URL|DIR",
        help="read BASE/<file name> from this http(s) URL or folder instead of the pinned URLs "
        "(e.g. ../shared/schemas when offline)",
    )
    fetch.add_argument("--force", action="store_true", help="download even verified files")
    fetch.add_argument(
        "--target", type=Path, default=None, metavar="DIR", help="fill DIR, not the cache"
    )
    fetch.add_argument(
        "--timeout", type=float, default=30.0, metavar="SECONDS", help="per network operation"
    )
    fetch.set_defaults(handler=run_fetch)

    status = actions.add_parser(
        "status",
        help="where each published schema is found and whether its checksum is right",
        description="List each published schema in the folder the search order gives "
        "(--schemas, else $LEXBUILD_SCHEMAS, else the per-user cache): ok, altered or missing. "
        "Exit 0 when all are ok, 1 otherwise.",
    )
    add_schemas_option(status)
    status.set_defaults(handler=run_status)


def _mirror(value: str | None) -> str | Path | None:
    from lexbuild.external import is_url

    if value is None or is_url(value):
        return value
    return Path(value)


def run_fetch(args: argparse.Namespace) -> int:
    from lexbuild.external import fetch_files, pinned, user_cache

    target = args.target if args.target is not None else user_cache("schemas")
    outcomes = fetch_files(
        pinned("schemas"), target, mirror=_mirror(args.mirror), force=args.force,
        timeout=args.timeout,
    )
    for outcome in outcomes:
        what = f"fetched from {outcome.source}" if outcome.fetched else "already there, verified"
        print(f"{outcome.path}: {what}")
    return EXIT_OK


def run_status(args: argparse.Namespace) -> int:
    from lexbuild.formats.schemastore import FETCH_HINT, schema_states, schemas_origin

    origin = schemas_origin(args.schemas)
    states = schema_states(args.schemas)
    for state in states:
        detail = {
            "ok": "checksum ok",
            "altered": f"ALTERED: sha256 {state.sha256}, published {state.file.sha256}",
            "missing": "MISSING",
        }[state.state]
        print(f"{state.file.name}: {detail} ({state.path}, from {origin})")
    if all(state.state == "ok" for state in states):
        return EXIT_OK
    print(f"lexbuild schemas: {FETCH_HINT}", file=sys.stderr)
    return EXIT_FINDINGS
