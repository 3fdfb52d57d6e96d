"""``lexbuild evaluate`` (induced senses against gold) and ``lexbuild calibrate`` (thresholds)."""

from __future__ import annotations

import argparse
import dataclasses
import sys
from pathlib import Path
from typing import Any

from lexbuild.cli.induce import (
    DEFAULTS,
    add_clusterer_options,
    add_guide_options,
    add_representation_options,
    open_cache,
    representation_from_args,
    settings_from_args,
    update_bar,
)
from lexbuild.senses.registry import CLUSTERERS

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


def _is_induction_folder(path: Path) -> bool:
    return path.name == "assignments.tsv" or (path / "assignments.tsv").is_file()


def _induce_for_gold(args: argparse.Namespace, gold: dict[tuple[str, int], str]) -> Any:
    """Assignments of the gold verbs of a corpus, induced now with the options given."""
    from lexbuild.corpus.conllu import resolve_paths
    from lexbuild.corpus.occurrences import iter_occurrences
    from lexbuild.errors import InductionError
    from lexbuild.senses.inducer import SenseInducer
    from lexbuild.senses.settings import CALIBRATE

    files = resolve_paths([args.induced])
    if not files:
        raise InductionError(
            f"{args.induced} is neither an induction folder (assignments.tsv) nor a CoNLL-U "
            "corpus"
        )
    occurrences = list(iter_occurrences(files, language=args.language))
    lemmas = sorted({o.lemma for o in occurrences if (o.sentence_id, o.token + 1) in gold})
    if not lemmas:
        raise InductionError(f"no verb occurrence of {args.induced} has a gold sense")
    settings = settings_from_args(
        args, threshold=CALIBRATE if args.threshold is None else args.threshold
    )
    inducer = SenseInducer(
        representation_from_args(args), settings=settings, cache=open_cache(args)
    ).fit(occurrences, lemmas=lemmas, corpus=[str(f) for f in files])
    print(
        f"lexbuild evaluate: induced {len(lemmas)} verbs with {settings.clusterer}, "
        f"threshold {inducer.threshold_.value:g} ({inducer.threshold_.source})",
        file=sys.stderr,
    )
    return {
        (a.sent_id, a.token): (a.lemma, a.sense) for a in inducer.result_.assignments
    }


def run_evaluate(args: argparse.Namespace) -> int:
    import json

    from lexbuild._atomic import atomic_write_text
    from lexbuild.errors import InductionError
    from lexbuild.senses.evaluation import evaluate, report_json, report_markdown
    from lexbuild.senses.induction_folder import read_assignments

    gold = _read_gold(args.gold)
    if not gold:
        raise InductionError(
            f"{args.gold}: no gold sense found (Sense=... in the MISC column of verb tokens, "
            "or TSV rows sent_id, token, sense)"
        )
    induced = Path(args.induced)
    if _is_induction_folder(induced):
        folder = induced.parent if induced.name == "assignments.tsv" else induced
        manifest = folder / "induction.json"
        if args.clusterer is not None and manifest.is_file():
            made_with = json.loads(manifest.read_text(encoding="utf-8")).get(
                "clusterer", "agglomerative"
            )
            if made_with != args.clusterer:
                raise InductionError(
                    f"{folder} was induced with {made_with}, not {args.clusterer}; give a "
                    "corpus instead of the folder to induce with another clusterer"
                )
        assignments = read_assignments(induced)
    else:
        assignments = _induce_for_gold(args, gold)
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

    from lexbuild._atomic import atomic_write_text
    from lexbuild.corpus.conllu import resolve_paths
    from lexbuild.corpus.occurrences import iter_occurrences
    from lexbuild.errors import InductionError
    from lexbuild.senses.calibrate import (
        best_clusterer,
        compare_clusterers,
        comparison_markdown,
        write_calibration,
    )
    from lexbuild.senses.reservoir import sample_corpus

    files = resolve_paths(args.corpus)
    if not files:
        raise InductionError(f"no CoNLL-U file found in {' '.join(args.corpus)}")
    thresholds = None
    if args.thresholds:
        try:
            thresholds = tuple(float(x) for x in args.thresholds.split(",") if x.strip())
        except ValueError:
            raise InductionError(
                f"--thresholds {args.thresholds!r}: expected numbers separated by commas"
            ) from None
    names = list(dict.fromkeys([args.clusterer, *(args.compare or [])]))
    if "all" in names:
        names = list(CLUSTERERS)
    if thresholds is not None and len(names) > 1:
        raise InductionError("--thresholds applies to one clusterer; compare without it")
    settings = settings_from_args(args)
    settings = settings.updated(
        calibration=dataclasses.replace(
            settings.calibration,
            pairs=args.pairs,
            matched_pairs=args.matched_pairs,
            triples=args.triples,
            min_count=args.min_count,
            per_verb=args.per_verb,
            mask=not args.no_mask,
            thresholds=thresholds,
        )
    )
    representation = representation_from_args(args)
    cache = open_cache(args)
    if args.guide:
        if args.workers is not None or args.scheduler is not None:
            raise InductionError("--guide runs in one process for now: drop --workers/--scheduler")
        occurrences = list(iter_occurrences(files, language=args.language))
        return _calibrate_guided(args, occurrences, representation, settings, cache, thresholds)
    options = settings.calibration
    # Pseudo-verbs take at most per_verb occurrences of a verb: read the corpus into one
    # reservoir of that size per verb (memory constant in corpus size), keep the frequencies.
    sample = sample_corpus(
        iter_occurrences(files, language=args.language), options.per_verb,
        settings.random_state,
    )
    occurrences = [occ for _lemma, occs in sample.iter_samples() for occ in occs]
    total = (options.pairs + options.matched_pairs + options.triples) * len(names)
    from lexbuild.distributed import executor_from_args

    with (
        tqdm(total=total, desc="pseudo-verbs", file=sys.stderr, disable=None) as bar,
        executor_from_args(args) as executor,
    ):
        calibrations = compare_clusterers(
            occurrences,
            representation,
            names,
            settings,
            cache=cache,
            progress=lambda n: update_bar(bar, n),
            executor=executor,
            counts=sample.counts,
        )
    best_name = best_clusterer(calibrations)
    calibration = calibrations[best_name]
    path = write_calibration(calibration, args.output, plot=not args.no_plot)
    if len(names) > 1:
        atomic_write_text(Path(args.output) / "comparison.md", comparison_markdown(calibrations))
        sys.stdout.write(comparison_markdown(calibrations))
    best = calibration.recommended
    print(
        f"recommended threshold {best.threshold:g} ({best_name}, {calibration.parameter}): "
        f"mean ARI {best.ari:.3f}, {best.clusters_per_verb:.1f} clusters per pseudo-verb, "
        f"{len(calibration.pseudo_verbs)} pseudo-verbs -> {path}"
    )
    return 0


def _calibrate_guided(
    args: argparse.Namespace,
    occurrences: list[Any],
    representation: Any,
    settings: Any,
    cache: Any,
    thresholds: tuple[float, ...] | None,
) -> int:
    from tqdm import tqdm

    from lexbuild.senses.curated_calibration import calibrate_guided, write_guided_calibration
    from lexbuild.senses.guide import load_guide

    guide = load_guide(args.guide, drafts=args.guide_drafts)
    with tqdm(desc="calibrating", file=sys.stderr, disable=None) as bar:
        calibration = calibrate_guided(
            occurrences, representation, guide, settings, thresholds=thresholds,
            language=args.language, cache=cache, tune_weights=not args.keep_weights,
            progress=lambda n: update_bar(bar, n),
        )
    path = write_guided_calibration(calibration, args.output)
    curated = calibration.curated
    print(
        f"evidence: {calibration.evidence} ({curated.get('senses', 0)} curated senses with 2+ "
        f"examples in {curated.get('verbs', 0)} verbs); threshold {calibration.threshold:g} "
        f"(mean ARI {calibration.threshold_ari:.3f}), assignment distance "
        f"{calibration.max_distance:g} ({calibration.max_distance_evidence})"
        + (f", weights {calibration.weights}" if calibration.weights else "")
        + f" -> {path}"
    )
    return 0


def register(subparsers: Any) -> None:
    evaluate = subparsers.add_parser(
        "evaluate",
        help="score induced senses against gold sense labels",
        description="B-cubed, paired F-score, adjusted Rand index and V-measure per verb and "
        "averaged. GOLD: CoNLL-U with Sense=... in the MISC column of verb tokens, or a TSV "
        "of sent_id, token id, sense. INDUCED: an induction folder, or a CoNLL-U corpus whose "
        "gold verbs are induced now with --clusterer, --threshold and the representation "
        "options (to compare methods against gold).",
    )
    evaluate.add_argument(
        "induced",
        help="induction folder (reads its assignments.tsv), or CoNLL-U files to induce now",
    )
    evaluate.add_argument("gold", help="gold CoNLL-U file or folder, or a .tsv file")
    evaluate.add_argument("--format", choices=("markdown", "json"), default="markdown")
    evaluate.add_argument("--output", "-o", help="write the report here instead of stdout")
    evaluate.add_argument(
        "--threshold", type=float,
        help="corpus given: the clusterer's parameter (default: calibrate on the corpus)",
    )
    add_clusterer_options(evaluate)
    add_representation_options(evaluate)
    # No default: an induction folder records its clusterer, and a --clusterer given must
    # agree with it; for a corpus, None means the settings' default.
    evaluate.set_defaults(handler=run_evaluate, clusterer=None)

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
        "--thresholds",
        help="comma-separated values of the clusterer's parameter (default: the clusterer's "
        "own grid; agglomerative average linkage: 0.10 to 0.95 by 0.05)",
    )
    calibrate.add_argument(
        "--compare",
        action="append",
        choices=(*CLUSTERERS, "all"),
        metavar="CLUSTERER",
        help="calibrate this clusterer too, on the same pseudo-verbs (repeat; 'all' for every "
        "registered one); calibration.json is written for the best, comparison.md for all",
    )
    options = DEFAULTS.calibration
    calibrate.add_argument("--pairs", type=int, default=options.pairs,
                           help="random pairs of verbs")
    calibrate.add_argument("--matched-pairs", type=int, default=options.matched_pairs,
                           help="pairs of verbs of similar frequency")
    calibrate.add_argument("--triples", type=int, default=options.triples,
                           help="random triples of verbs")
    calibrate.add_argument("--min-count", type=int, default=options.min_count,
                           help="occurrences a verb needs to enter a pseudo-verb")
    calibrate.add_argument("--per-verb", type=int, default=options.per_verb,
                           help="occurrences sampled from each verb")
    calibrate.add_argument("--no-mask", action="store_true",
                           help="leave the verb form visible (tests the representation only)")
    calibrate.add_argument("--no-plot", action="store_true", help="skip calibration.png")
    add_guide_options(calibrate)
    calibrate.add_argument(
        "--keep-weights", action="store_true",
        help="guided: keep the representation's weights (default: choose them on the curated "
        "senses)",
    )
    add_clusterer_options(calibrate)
    add_representation_options(calibrate)
    from lexbuild.distributed import add_cluster_options

    add_cluster_options(calibrate)  # pseudo-verbs encoded and swept on the workers
    calibrate.set_defaults(handler=run_calibrate)
