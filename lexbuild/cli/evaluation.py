"""``lexbuild evaluate`` (induced senses against gold) and ``lexbuild calibrate`` (thresholds)."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import Any

from lexbuild.cli.induce import (
    add_representation_options,
    open_cache,
    representation_from_args,
    update_bar,
)

__all__ = ["register"]


def _read_gold(path: str) -> dict[tuple[str, int], str]:
    from lexbuild.corpus.conllu import resolve_paths
    from lexbuild.senses.evaluation import read_gold_conllu, read_gold_tsv

    gold = Path(path)
    if gold.is_file() and gold.suffix.lower() in (".tsv", ".txt", ".csv"):
        return read_gold_tsv(gold)
    files = resolve_paths([gold])
    if not files:
        raise FileNotFoundError(f"gold file {path} not found")
    return read_gold_conllu(files)


def run_evaluate(args: argparse.Namespace) -> int:
    from lexbuild._atomic import atomic_write_text
    from lexbuild.errors import InductionError
    from lexbuild.senses.evaluation import evaluate, report_json, report_markdown
    from lexbuild.senses.induce import read_assignments

    assignments = read_assignments(args.induced)
    gold = _read_gold(args.gold)
    if not gold:
        raise InductionError(
            f"{args.gold}: no gold sense found (Sense=... in the MISC column of verb tokens, "
            "or TSV rows sent_id, token, sense)"
        )
    report = evaluate(assignments, gold)
    if not report.n_evaluated:
        raise InductionError(
            f"no occurrence of {args.induced} has a gold sense in {args.gold}: sentence ids "
            "and token ids must match"
        )
    text = report_json(report) + "\n" if args.format == "json" else report_markdown(report)
    if args.output:
        atomic_write_text(args.output, text)
    else:
        sys.stdout.write(text)
    return 0


def run_calibrate(args: argparse.Namespace) -> int:
    from tqdm import tqdm

    from lexbuild.corpus.conllu import resolve_paths
    from lexbuild.corpus.occurrences import iter_occurrences
    from lexbuild.errors import InductionError
    from lexbuild.senses.calibrate import DEFAULT_THRESHOLDS, calibrate, write_calibration

    files = resolve_paths(args.corpus)
    if not files:
        raise InductionError(f"no CoNLL-U file found in {' '.join(args.corpus)}")
    if args.thresholds:
        try:
            thresholds = [float(x) for x in args.thresholds.split(",") if x.strip()]
        except ValueError:
            raise InductionError(
                f"--thresholds {args.thresholds!r}: expected numbers separated by commas"
            ) from None
    else:
        thresholds = list(DEFAULT_THRESHOLDS)
    representation = representation_from_args(args)
    cache = open_cache(args)
    occurrences = list(iter_occurrences(files, language=args.language))
    total = args.pairs + args.matched_pairs + args.triples
    with tqdm(total=total, desc="pseudo-verbs", file=sys.stderr, disable=None) as bar:
        calibration = calibrate(
            occurrences,
            representation,
            thresholds=thresholds,
            pairs=args.pairs,
            matched_pairs=args.matched_pairs,
            triples=args.triples,
            min_count=args.min_count,
            per_verb=args.per_verb,
            mask=not args.no_mask,
            random_state=args.random_state,
            cache=cache,
            progress=lambda n: update_bar(bar, n),
        )
    path = write_calibration(calibration, args.output, plot=not args.no_plot)
    best = calibration.recommended
    print(
        f"recommended threshold {best.threshold:g}: mean ARI {best.ari:.3f}, "
        f"{best.clusters_per_verb:.1f} clusters per pseudo-verb, "
        f"{len(calibration.pseudo_verbs)} pseudo-verbs -> {path}"
    )
    return 0


def register(subparsers: Any) -> None:
    evaluate = subparsers.add_parser(
        "evaluate",
        help="score induced senses against gold sense labels",
        description="B-cubed, paired F-score, adjusted Rand index and V-measure per verb and "
        "averaged. GOLD: CoNLL-U with Sense=... in the MISC column of verb tokens, or a TSV "
        "of sent_id, token id, sense.",
    )
    evaluate.add_argument("induced", help="induction folder (reads its assignments.tsv)")
    evaluate.add_argument("gold", help="gold CoNLL-U file or folder, or a .tsv file")
    evaluate.add_argument("--format", choices=("markdown", "json"), default="markdown")
    evaluate.add_argument("--output", "-o", help="write the report here instead of stdout")
    evaluate.set_defaults(handler=run_evaluate)

    calibrate = subparsers.add_parser(
        "calibrate",
        help="choose the clustering threshold on pseudo-verbs, without gold data",
        description="Conflate pairs and triples of frequent verbs into pseudo-verbs, sweep the "
        "distance threshold, write calibration.json and calibration.png; the threshold with "
        "the best mean adjusted Rand index is recommended.",
    )
    calibrate.add_argument("corpus", nargs="+", help="CoNLL-U files or folders")
    calibrate.add_argument("--output", "-o", required=True, help="folder to write into")
    calibrate.add_argument(
        "--thresholds", help="comma-separated thresholds (default 0.10 to 0.95 by 0.05)"
    )
    calibrate.add_argument("--pairs", type=int, default=20, help="random pairs of verbs")
    calibrate.add_argument("--matched-pairs", type=int, default=10,
                           help="pairs of verbs of similar frequency")
    calibrate.add_argument("--triples", type=int, default=5, help="random triples of verbs")
    calibrate.add_argument("--min-count", type=int, default=30,
                           help="occurrences a verb needs to enter a pseudo-verb")
    calibrate.add_argument("--per-verb", type=int, default=200,
                           help="occurrences sampled from each verb")
    calibrate.add_argument("--no-mask", action="store_true",
                           help="leave the verb form visible (tests the representation only)")
    calibrate.add_argument("--no-plot", action="store_true", help="skip calibration.png")
    calibrate.add_argument("--random-state", type=int, default=0)
    add_representation_options(calibrate)
    calibrate.set_defaults(handler=run_calibrate)
