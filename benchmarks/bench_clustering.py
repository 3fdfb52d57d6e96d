"""Time and peak memory of SenseClusterer against scikit-learn's agglomerative clustering.

Usage: python benchmarks/bench_clustering.py [--sizes 2000,10000] [--dim 768]

Peak memory is measured with tracemalloc (numpy registers its buffers there); fastcluster's
internal C++ allocations are not traced, so its figure is a lower bound.
"""

from __future__ import annotations

import argparse
import time
import tracemalloc
from collections.abc import Callable
from typing import Any

import numpy as np
from sklearn.cluster import AgglomerativeClustering
from sklearn.metrics import adjusted_rand_score

from lexbuild.senses.agglomerative import AgglomerativeClusterer as SenseClusterer

SKLEARN_MAX = 10_000  # above this its dense n x n float64 matrix gets too large to be useful


def _data(n: int, dim: int, k: int, random_state: int) -> np.ndarray:
    """Blobs of contextual-embedding-like vectors: k sense directions plus noise."""
    rng = np.random.default_rng(random_state)
    centres = rng.normal(size=(k, dim))
    labels = rng.integers(0, k, size=n)
    X = centres[labels] + 0.6 * rng.normal(size=(n, dim))
    return X.astype(np.float32)


def _measure(fn: Callable[..., Any], *args: Any) -> tuple[Any, float, float]:
    tracemalloc.start()
    t0 = time.perf_counter()
    result = fn(*args)
    elapsed = time.perf_counter() - t0
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return result, elapsed, peak / 2**20


def main(argv: list[str] | None = None) -> None:
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--sizes", default="2000,10000", help="comma-separated n (e.g. 2000,40000)")
    ap.add_argument("--dim", type=int, default=768)
    ap.add_argument("--threshold", type=float, default=0.5)
    ap.add_argument("--senses", type=int, default=8)
    ap.add_argument("--random-state", type=int, default=0)
    ap.add_argument(
        "--exact-limit", type=int, default=40_000,
        help="largest n also clustered exactly (40k needs ~6.4 GB for the condensed matrix)",
    )
    args = ap.parse_args(argv)
    sizes = [int(s) for s in args.sizes.split(",") if s.strip()]

    header = f"{'n':>7} {'method':<12} {'time s':>8} {'peak MiB':>9} {'k':>4}  notes"
    print(header)
    print("-" * len(header))
    for n in sizes:
        X = _data(n, args.dim, args.senses, args.random_state)
        common: dict[str, Any] = {
            "threshold": args.threshold,
            "min_cluster_size": 1,
            "min_cluster_share": 0.0,
        }
        rows: dict[str, tuple[np.ndarray, float, float]] = {}
        # Two-stage always; exact where the condensed matrix fits (n <= 40k ~ 6.4 GB).
        if n <= args.exact_limit:
            m, t, mem = _measure(SenseClusterer(exact_max=n, **common).fit, X)
            rows["exact"] = (m.labels_, t, mem)
        m, t, mem = _measure(SenseClusterer(exact_max=1, **common).fit, X)
        rows["two-stage"] = (m.labels_, t, mem)
        if n <= SKLEARN_MAX:
            agg = AgglomerativeClustering(
                n_clusters=None,
                metric="cosine",
                linkage="average",
                distance_threshold=args.threshold,
            )
            labels, t, mem = _measure(agg.fit_predict, X)
            rows["sklearn"] = (np.asarray(labels), t, mem)
        for name, (labels, t, mem) in rows.items():
            notes = ""
            if name != "exact" and "exact" in rows:
                ari = adjusted_rand_score(rows["exact"][0], labels)
                et, em = rows["exact"][1], rows["exact"][2]
                notes = (
                    f"ARI vs exact {ari:.4f}; time x{t / et:.2f}, mem x{mem / max(em, 1e-9):.2f}"
                )
            k = len(set(labels.tolist()))
            print(f"{n:>7} {name:<12} {t:>8.2f} {mem:>9.1f} {k:>4}  {notes}", flush=True)


if __name__ == "__main__":
    main()
