"""``lexbuild preview``: the static review site of a sources folder or a released edition."""

from __future__ import annotations

import argparse
from pathlib import Path
from typing import Any

from lexbuild.cli.common import EXIT_OK

__all__ = ["register"]


def register(subparsers: Any) -> None:
    preview = subparsers.add_parser(
        "preview",
        help="write the static review site of sources or an edition",
        description="Write a static HTML site to review a dictionary: an index of entries "
        "(filter, sort), one page per entry (senses, frames, examples with their slots marked), "
        "the change log of an edition, and induction diagnostics when an induction or "
        "calibration folder is given. It opens from the file system and makes no network "
        "request; the same inputs give the same bytes.",
    )
    preview.add_argument("source", type=Path, metavar="SOURCES|EDITION",
                         help="sources folder (lexicon.yaml, entries/) or edition folder")
    preview.add_argument("--induction", type=Path, metavar="DIR",
                         help="induction folder written by `lexbuild induce`")
    preview.add_argument("--calibration", type=Path, metavar="DIR",
                         help="calibration folder written by `lexbuild calibrate`")
    preview.add_argument("--output", "-o", type=Path, required=True, metavar="SITE",
                         help="folder to write (an earlier site there is replaced)")
    preview.set_defaults(handler=run_preview)


def run_preview(args: argparse.Namespace) -> int:
    from lexbuild.review import build_site, preview_inputs, write_site

    inputs = preview_inputs(args.source, output=args.output, induction=args.induction,
                            calibration=args.calibration)
    files = build_site(inputs)
    target = write_site(files, args.output)
    print(f"{len(inputs.lexicon.entries)} entries, {len(files)} files -> "
          f"{target / 'index.html'}")
    return EXIT_OK
