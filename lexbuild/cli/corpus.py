"""``lexbuild frames``: counted valency frames of the verbs of a CoNLL-U corpus."""

from __future__ import annotations

import argparse
import json
import sys
from collections.abc import Iterable, Iterator, Sequence
from typing import TYPE_CHECKING, TextIO

if TYPE_CHECKING:
    from lexbuild.corpus.occurrences import Occurrence
    from lexbuild.corpus.valency import FrameCount, FrameThresholds

__all__ = ["register"]

TSV_COLUMNS = ("lemma", "frame", "count", "share")


def register(subparsers: argparse._SubParsersAction[argparse.ArgumentParser]) -> None:
    parser = subparsers.add_parser(
        "frames",
        help="count the valency frames of the verbs of a CoNLL-U corpus",
        description=(
            "Read CoNLL-U files (folders, globs, .gz and .xz included), extract every verb "
            "occurrence with its argument slots and print, per verb, the frames above the "
            "thresholds with their count and share of the verb's occurrences. A slot is "
            "marked optional ('?') when the frame occurs with and without it above the "
            "thresholds. Exit status: 0 clean, 1 when malformed sentences were skipped "
            "(--on-error skip), 2 on an input error."
        ),
    )
    parser.add_argument("corpus", nargs="+", metavar="CORPUS", help="CoNLL-U file, folder or glob")
    parser.add_argument(
        "--lemma",
        action="append",
        metavar="L",
        help=(
            "only this verb lemma (repeatable; a pronominal verb is listed under its base "
            "lemma with a refl:CLITIC[se] slot: --lemma agir for s'agir); default: every verb"
        ),
    )
    parser.add_argument(
        "--min-count", type=int, default=2, metavar="N", help="drop frames seen fewer times (2)"
    )
    parser.add_argument(
        "--min-share",
        type=float,
        default=0.05,
        metavar="P",
        help="drop frames under this share of the verb's occurrences, 0..1 (0.05)",
    )
    parser.add_argument(
        "--no-optional",
        action="store_true",
        help="keep a frame with and without a slot apart instead of marking the slot optional",
    )
    parser.add_argument(
        "--format", choices=("table", "tsv", "json"), default="table", help="output format"
    )
    parser.add_argument(
        "--language",
        default="fr",
        help="language of the corpus (BCP 47; selects the slot profile: fr, en, other) (fr)",
    )
    parser.add_argument(
        "--include-aux",
        action="store_true",
        help="also count AUX words that head their clause (never auxiliaries or copulas)",
    )
    parser.add_argument(
        "--on-error",
        choices=("raise", "skip"),
        default="raise",
        help="on a malformed sentence: stop (raise) or skip it and report it at the end",
    )
    parser.add_argument("--output", metavar="FILE", help="write here (atomically), not stdout")
    from lexbuild.distributed import add_cluster_options

    add_cluster_options(parser)
    parser.set_defaults(handler=run_frames)


def _with_progress(
    occurrences: Iterable[Occurrence], stats: dict[str, list[int]]
) -> Iterator[Occurrence]:
    """Count occurrences and adjuncts per lemma on the way; progress bar on a terminal."""
    from tqdm import tqdm

    with tqdm(
        unit=" verbs", file=sys.stderr, disable=None, mininterval=0.5, desc="occurrences"
    ) as bar:
        for occurrence in occurrences:
            counts = stats.setdefault(occurrence.lemma, [0, 0])
            counts[0] += 1
            counts[1] += occurrence.adjuncts
            bar.update()
            yield occurrence


def run_frames(args: argparse.Namespace) -> int:
    from lexbuild._atomic import atomic_write_text
    from lexbuild.corpus.occurrences import iter_occurrences
    from lexbuild.corpus.valency import FrameThresholds, count_frames
    from lexbuild.errors import CorpusError

    if args.min_count < 1 or not 0.0 <= args.min_share <= 1.0:
        raise CorpusError(
            f"--min-count must be at least 1 (got {args.min_count}) and --min-share within "
            f"0..1 (got {args.min_share})"
        )
    thresholds = FrameThresholds(
        min_count=args.min_count, min_share=args.min_share, merge_optional=not args.no_optional
    )
    if args.workers is not None or args.scheduler is not None:
        return _run_frames_distributed(args, thresholds)
    errors: list[CorpusError] = []
    stats: dict[str, list[int]] = {}
    occurrences = iter_occurrences(
        args.corpus,
        language=args.language,
        lemmas=args.lemma,
        on_error=args.on_error,
        errors=errors,
        include_auxiliaries=args.include_aux,
    )
    table = count_frames(_with_progress(occurrences, stats), thresholds)
    text = format_table(table, stats, args.format, len(errors), thresholds)
    if args.output:
        atomic_write_text(args.output, text)
    else:
        sys.stdout.write(text)
    _report_errors(errors, sys.stderr)
    return 1 if errors else 0


def _run_frames_distributed(args: argparse.Namespace, thresholds: FrameThresholds) -> int:
    """``frames`` with shards of the corpus read on a Dask cluster (same output)."""
    from tqdm import tqdm

    from lexbuild._atomic import atomic_write_text
    from lexbuild.corpus.conllu import resolve_paths
    from lexbuild.corpus.sharded import count_frames_sharded
    from lexbuild.distributed import executor_from_args

    resolve_paths(args.corpus)  # a missing file is reported before a cluster starts
    bar = tqdm(unit=" shards", file=sys.stderr, disable=None, desc="frames")

    def advance(n: int) -> None:
        bar.update(n)  # fed by Dask: a shard's task finished on a worker

    with bar, executor_from_args(args, on_done=advance) as executor:
        assert executor is not None
        table, stats, errors = count_frames_sharded(
            args.corpus,
            executor,
            thresholds,
            language=args.language,
            lemmas=args.lemma,
            on_error=args.on_error,
            include_auxiliaries=args.include_aux,
        )
    text = format_table(table, stats, args.format, len(errors), thresholds)
    if args.output:
        atomic_write_text(args.output, text)
    else:
        sys.stdout.write(text)
    _report_errors(errors, sys.stderr)
    return 1 if errors else 0


def format_table(
    table: dict[str, list[FrameCount]],
    stats: dict[str, list[int]],
    fmt: str,
    skipped: int = 0,
    thresholds: FrameThresholds | None = None,
) -> str:
    """The frame table as ``tsv`` (lemma, frame, count, share), ``json`` or ``table`` text."""
    rows = [row for lemma in sorted(table) for row in table[lemma]]
    if fmt == "tsv":
        lines = ["\t".join(TSV_COLUMNS)]
        lines.extend(f"{r.lemma}\t{r.frame}\t{r.count}\t{r.share:.4f}" for r in rows)
        return "\n".join(lines) + "\n"
    if fmt == "json":
        document = {
            "thresholds": (
                {"min_count": thresholds.min_count, "min_share": thresholds.min_share}
                if thresholds
                else None
            ),
            "skipped_sentences": skipped,
            "verbs": [
                {
                    "lemma": lemma,
                    "occurrences": stats.get(lemma, [0, 0])[0],
                    # Adjuncts per occurrence: what the argument/adjunct split leaves out.
                    "adjuncts_per_occurrence": round(
                        stats.get(lemma, [0, 0])[1] / max(stats.get(lemma, [1, 0])[0], 1), 4
                    ),
                    "frames": [
                        {"frame": r.frame, "count": r.count, "share": round(r.share, 4)}
                        for r in table[lemma]
                    ],
                }
                for lemma in sorted(table)
            ],
        }
        return json.dumps(document, ensure_ascii=False, indent=2) + "\n"
    # A table for people: one block per verb.
    out: list[str] = []
    width = max((len(r.frame) for r in rows), default=5)
    for lemma in sorted(table):
        total = stats.get(lemma, [0, 0])[0]
        out.append(f"{lemma} ({total} occurrences)")
        if not table[lemma]:
            out.append("  (no frame above the thresholds)")
        for r in table[lemma]:
            out.append(f"  {r.frame:<{width}}  {r.count:>7}  {r.share:6.1%}")
    return "\n".join(out) + ("\n" if out else "")


def _report_errors(errors: Sequence[object], stream: TextIO) -> None:
    if not errors:
        return
    print(f"lexbuild frames: skipped {len(errors)} malformed sentence(s):", file=stream)
    for error in errors[:20]:
        print(f"  {error}", file=stream)
    if len(errors) > 20:
        print(f"  ... and {len(errors) - 20} more", file=stream)
