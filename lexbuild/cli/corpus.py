"""``lexbuild frames``: counted valency frames of the verbs of a CoNLL-U corpus."""

from __future__ import annotations

import argparse
import json
import sys
from collections.abc import Iterable, Iterator, Sequence
from typing import TYPE_CHECKING, Any, TextIO

if TYPE_CHECKING:
    from lexbuild.corpus.argumenthood import Decision, Verdict
    from lexbuild.corpus.occurrences import Occurrence
    from lexbuild.corpus.valency import FrameCount, FrameThresholds

__all__ = ["register"]

TSV_COLUMNS = ("lemma", "frame", "count", "share")
EXPLAIN_COLUMNS = (
    "lemma",
    "slot",
    "verdict",
    "score",
    "tokens",
    "verb_tokens",
    "expected",
    "g2",
    "p_value",
    "evidence",
)


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
        "--significance",
        type=float,
        default=None,
        metavar="ALPHA",
        help=(
            "keep a frame when a binomial test rejects, at this level, that it is noise at "
            "--noise-rate (Brent 1993), instead of the --min-share cut-off"
        ),
    )
    parser.add_argument(
        "--noise-rate",
        type=float,
        default=0.02,
        metavar="P",
        help="rate at which a frame a verb does not take is seen anyway, 0..1 (0.02)",
    )
    parser.add_argument(
        "--obliques",
        choices=("evidence", "labels"),
        default="evidence",
        help=(
            "how prepositional phrases are told arguments or adjuncts: from evidence over the "
            "whole corpus (association of verb and preposition, class of the noun, position, "
            "the labels as far as the corpus earns trust; reads the corpus twice) or from the "
            "obl:arg/obl:mod labels alone (evidence)"
        ),
    )
    parser.add_argument(
        "--explain",
        action="store_true",
        help=(
            "also show, per verb and oblique slot, the decision: verdict, score and each piece "
            "of evidence (with --format tsv: that table instead of the frames)"
        ),
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
    from lexbuild.corpus.argumenthood import count_obliques
    from lexbuild.corpus.occurrences import iter_occurrences
    from lexbuild.corpus.valency import FrameThresholds, count_frames
    from lexbuild.errors import CorpusError

    if args.min_count < 1 or not 0.0 <= args.min_share <= 1.0:
        raise CorpusError(
            f"--min-count must be at least 1 (got {args.min_count}) and --min-share within "
            f"0..1 (got {args.min_share})"
        )
    if args.significance is not None and not 0.0 < args.significance < 1.0:
        raise CorpusError(f"--significance must lie within 0..1, got {args.significance}")
    if not 0.0 < args.noise_rate < 1.0:
        raise CorpusError(f"--noise-rate must lie within 0..1, got {args.noise_rate}")
    thresholds = FrameThresholds(
        min_count=args.min_count,
        min_share=args.min_share,
        merge_optional=not args.no_optional,
        significance=args.significance,
        noise_rate=args.noise_rate,
    )
    if args.workers is not None or args.scheduler is not None:
        return _run_frames_distributed(args, thresholds)
    errors: list[CorpusError] = []
    stats: dict[str, list[int]] = {}
    decision = None
    if args.obliques == "evidence":
        decision = count_obliques(
            args.corpus,
            language=args.language,
            on_error=args.on_error,
            include_auxiliaries=args.include_aux,
        ).decide()
    occurrences = iter_occurrences(
        args.corpus,
        language=args.language,
        lemmas=args.lemma,
        on_error=args.on_error,
        errors=errors,
        include_auxiliaries=args.include_aux,
        obliques=args.obliques,
        decision=decision,
    )
    table = count_frames(_with_progress(occurrences, stats), thresholds)
    explained = decision if args.explain else None
    return _write_frames(args, table, stats, errors, thresholds, explained)


def _write_frames(
    args: argparse.Namespace, table: dict[str, list[FrameCount]], stats: Any,
    errors: list[Any], thresholds: Any, explained: Decision | None,
) -> int:
    """The frames table (or the decision's TSV with --explain) to --output or stdout."""
    from lexbuild._atomic import atomic_write_text

    if explained is not None and args.format == "tsv":
        text = format_decision_tsv(explained, set(table))
    else:
        text = format_table(table, stats, args.format, len(errors), thresholds, explained)
    if args.output:
        atomic_write_text(args.output, text)
    else:
        sys.stdout.write(text)
    _report_errors(errors, sys.stderr)
    return 1 if errors else 0


def _verdicts(decision: Decision, lemma: str) -> list[Verdict]:
    """A verb's verdicts, strongest argument first."""
    rows = [v for (verb, _), v in decision.verdicts.items() if verb == lemma]
    return sorted(rows, key=lambda v: (-v.score, v.slot))


def format_decision_tsv(decision: Decision, lemmas: set[str]) -> str:
    """The argument/adjunct decision per verb and oblique slot, one TSV row each."""
    lines = [f"# label_trust={decision.label_trust:.4f}", "\t".join(EXPLAIN_COLUMNS)]
    for lemma in sorted(lemmas):
        for v in _verdicts(decision, lemma):
            lines.append(
                "\t".join(
                    (
                        v.verb,
                        v.slot,
                        "argument" if v.argument else "adjunct",
                        f"{v.score:.3f}",
                        str(v.tokens),
                        str(v.verb_tokens),
                        f"{v.expected:.3f}",
                        f"{v.g2:.3f}",
                        f"{v.p_value:.4g}",
                        v.explain(),
                    )
                )
            )
    return "\n".join(lines) + "\n"


def _verdict_json(v: Verdict) -> dict[str, object]:
    return {
        "slot": v.slot,
        "argument": v.argument,
        "score": round(v.score, 4),
        "tokens": v.tokens,
        "expected": round(v.expected, 4),
        "g2": round(v.g2, 4),
        "p_value": float(f"{v.p_value:.4g}"),
        "evidence": {name: round(value, 4) for name, value in v.evidence},
    }


def _run_frames_distributed(args: argparse.Namespace, thresholds: FrameThresholds) -> int:
    """``frames`` with shards of the corpus read on a Dask cluster (same output)."""
    from tqdm import tqdm

    from lexbuild.corpus.conllu import resolve_paths
    from lexbuild.corpus.sharded import count_frames_sharded
    from lexbuild.distributed import executor_from_args

    resolve_paths(args.corpus)  # a missing file is reported before a cluster starts
    bar = tqdm(unit=" shards", file=sys.stderr, disable=None, desc="frames")
    decisions: list[Decision] = []  # the first pass's, with obliques from evidence

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
            obliques=args.obliques,
            on_decision=decisions.append,
        )
    explained = decisions[0] if args.explain and decisions else None
    return _write_frames(args, table, stats, errors, thresholds, explained)


def format_table(
    table: dict[str, list[FrameCount]],
    stats: dict[str, list[int]],
    fmt: str,
    skipped: int = 0,
    thresholds: FrameThresholds | None = None,
    decision: Decision | None = None,
) -> str:
    """The frame table as ``tsv`` (lemma, frame, count, share), ``json`` or ``table`` text;
    with a ``decision``, the verdicts on each verb's obliques too (json and table)."""
    rows = [row for lemma in sorted(table) for row in table[lemma]]
    if fmt == "tsv":
        lines = ["\t".join(TSV_COLUMNS)]
        lines.extend(f"{r.lemma}\t{r.frame}\t{r.count}\t{r.share:.4f}" for r in rows)
        return "\n".join(lines) + "\n"
    if fmt == "json":
        document: dict[str, object] = {
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
                    **(
                        {"obliques": [_verdict_json(v) for v in _verdicts(decision, lemma)]}
                        if decision is not None
                        else {}
                    ),
                }
                for lemma in sorted(table)
            ],
        }
        if decision is not None:
            document["label_trust"] = round(decision.label_trust, 4)
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
        if decision is not None:
            for v in _verdicts(decision, lemma):
                verdict = "argument" if v.argument else "adjunct "
                out.append(
                    f"    {v.slot:<{width - 2}}  {verdict} {v.score:+6.2f}  {v.tokens}/"
                    f"{v.verb_tokens}  {v.explain()}"
                )
    return "\n".join(out) + ("\n" if out else "")


def _report_errors(errors: Sequence[object], stream: TextIO) -> None:
    if not errors:
        return
    print(f"lexbuild frames: skipped {len(errors)} malformed sentence(s):", file=stream)
    for error in errors[:20]:
        print(f"  {error}", file=stream)
    if len(errors) > 20:
        print(f"  ... and {len(errors) - 20} more", file=stream)
