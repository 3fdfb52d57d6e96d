"""``lexbuild merge``, ``lexbuild release`` and ``lexbuild diff``."""

from __future__ import annotations

import argparse
import datetime as dt
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

__all__ = ["register"]


def _date(text: str) -> dt.date:
    try:
        return dt.date.fromisoformat(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a date as YYYY-MM-DD") from None


def _fraction(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a number") from None
    if value < 0:
        raise argparse.ArgumentTypeError(f"{text} must be >= 0")
    return value


def _positive(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a whole number") from None
    if value < 1:
        raise argparse.ArgumentTypeError(f"{text} must be >= 1")
    return value


def register(subparsers: Any) -> None:
    merge = subparsers.add_parser(
        "merge",
        help="merge an induction result into the YAML sources",
        description="Match induced senses to the existing ones (shared examples and centroid "
        "similarity, one-to-one), refresh frequencies, add new frames, example candidates and "
        "draft senses, flag unsupported senses; never changes an editor's glosses, notes, "
        "statuses, frames, examples or sense order. Prints the merge report (Markdown).",
    )
    merge.add_argument("induced", type=Path, help="induction folder written by `lexbuild induce`")
    merge.add_argument("sources", type=Path, help="sources folder (lexicon.yaml, entries/)")
    merge.add_argument("--dry-run", action="store_true", help="report only, write nothing")
    merge.add_argument(
        "--min-similarity", type=_fraction, default=0.5, metavar="S",
        help="least similarity for an induced sense to match an existing one (default 0.5)",
    )
    merge.add_argument(
        "--max-examples", type=int, default=5, metavar="N",
        help="example candidates are added while a sense has fewer than N (default 5)",
    )
    merge.add_argument(
        "--report", type=Path, metavar="DIR",
        help="also write merge-report.md and merge-report.json to DIR",
    )
    merge.add_argument("--format", choices=("markdown", "json"), default="markdown",
                       help="what to print")
    merge.set_defaults(handler=run_merge)

    release = subparsers.add_parser(
        "release",
        help="publish a numbered edition (TEI Lex-0, LMF, manifest, change log)",
        description="Check the sources (errors stop it), export TEI Lex-0 and LMF, validate both, "
        "and publish DIR/edition-N with manifest.json and changelog.md (against the previous "
        "edition in DIR). Exit 1 when checks or validation refuse the release.",
    )
    release.add_argument("sources", type=Path, help="sources folder")
    release.add_argument("--edition", type=_positive, required=True, metavar="N")
    release.add_argument("--output", type=Path, required=True, metavar="DIR",
                         help="folder holding the editions")
    release.add_argument("--date", type=_date, metavar="YYYY-MM-DD",
                         help="release date (default: release_date of lexicon.yaml)")
    release.add_argument("--no-site", action="store_true",
                         help="do not write the review site (edition-N/site)")
    add_schemas_option(release)
    add_no_cache_option(release)
    release.set_defaults(handler=run_release)

    diff = subparsers.add_parser(
        "diff",
        help="compare two source folders or released editions",
        description="Report entries, senses, glosses, statuses, frames, frequencies and examples "
        "that changed from OLD to NEW (source folders, edition folders or TEI files), and sense "
        "splits and merges seen from shared examples. Exit 0 when identical, 1 when they differ.",
    )
    diff.add_argument("old", type=Path)
    diff.add_argument("new", type=Path)
    diff.add_argument("--format", choices=("markdown", "json", "html"), default="markdown")
    diff.add_argument(
        "--tolerance", type=_fraction, default=0.0, metavar="F",
        help="ignore frequency changes of at most F times the old value (default 0)",
    )
    diff.add_argument("--output", type=Path, metavar="FILE", help="write there, not to stdout")
    diff.set_defaults(handler=run_diff)


def run_merge(args: argparse.Namespace) -> int:
    from lexbuild._atomic import atomic_write_text
    from lexbuild.editions.merge import MergeSettings, merge_induction

    report = merge_induction(
        args.induced,
        args.sources,
        settings=MergeSettings(min_similarity=args.min_similarity,
                               max_examples=args.max_examples),
        dry_run=args.dry_run,
    )
    if args.report is not None:
        atomic_write_text(args.report / "merge-report.md", report.to_markdown())
        atomic_write_text(args.report / "merge-report.json", report.to_json())
    sys.stdout.write(report.to_json() if args.format == "json" else report.to_markdown())
    return EXIT_OK


def run_release(args: argparse.Namespace) -> int:
    from lexbuild.editions.release import ReleaseRefused, release

    try:
        with build_cache(args) as cache:
            result = release(
                args.sources, edition=args.edition, output=args.output, date=args.date,
                schemas_dir=args.schemas, site=not args.no_site, cache=cache,
            )
    except ReleaseRefused as refused:
        print(f"lexbuild release: {refused.message}", file=sys.stderr)
        return EXIT_FINDINGS
    for warning in result.warnings:
        print(warning, file=sys.stderr)
    counts = result.manifest["counts"]
    print(f"edition {result.edition} published in {result.folder}")
    print(f"  {counts['entries']} entries, {counts['senses']} senses, {counts['frames']} frames, "
          f"{counts['examples']} examples")
    if result.changes is not None:
        print(f"  changes since edition {result.previous}: {len(result.changes.changes)}")
    for name, info in result.manifest["artefacts"].items():
        print(f"  {name}  sha256 {info['sha256']}")
    return EXIT_OK


def run_diff(args: argparse.Namespace) -> int:
    from lexbuild._atomic import atomic_write_text
    from lexbuild.editions.diff import diff_paths, render

    result = diff_paths(args.old, args.new, tolerance=args.tolerance)
    text = render(result, args.format)
    if args.output is not None:
        atomic_write_text(args.output, text)
    else:
        sys.stdout.write(text)
    return EXIT_FINDINGS if result else EXIT_OK
