"""Time and peak memory of SenseClusterer against scikit-learn's agglomerative clustering.

Usage: python benchmarks/bench_clustering.py [--sizes 2000,10000] [--dim 768] [--noise 1.0]

Rows: ``exact`` (the upper-triangle distance kernel), ``full-square`` (the same linkage over a
condensed matrix cut from whole square blocks, as before: the accuracy and speed reference),
``two-stage`` and scikit-learn's ``AgglomerativeClustering``. ``--noise 1.0`` gives overlapping
blobs, the hard case for the two-stage approximation.

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
from scipy.cluster.hierarchy import fcluster
from sklearn.cluster import AgglomerativeClustering
from sklearn.metrics import adjusted_rand_score

from lexbuild.senses.agglomerative import AgglomerativeClusterer as SenseClusterer
from lexbuild.senses.agglomerative import _linkage
from lexbuild.senses.clustering import normalise_rows

SKLEARN_MAX = 10_000  # above this its dense n x n float64 matrix gets too large to be useful


def _data(n: int, dim: int, k: int, random_state: int, noise: float = 0.6) -> np.ndarray:
    """Blobs of contextual-embedding-like vectors: k sense directions plus noise."""
    rng = np.random.default_rng(random_state)
    centres = rng.normal(size=(k, dim))
    labels = rng.integers(0, k, size=n)
    X = centres[labels] + noise * rng.normal(size=(n, dim))
    return X.astype(np.float32)


def _full_square_condensed(Xn: np.ndarray, block_elements: int = 16_000_000) -> np.ndarray:
    """The kernel before the upper-triangle one: every block multiplied by all rows."""
    n = Xn.shape[0]
    out = np.empty(n * (n - 1) // 2, dtype=np.float64)
    block = max(1, block_elements // n)
    for start in range(0, n, block):
        stop = min(n, start + block)
        d = Xn[start:stop] @ Xn.T
        np.subtract(1.0, d, out=d)
        np.clip(d, 0.0, 2.0, out=d)
        for i in range(start, stop):
            off = n * i - i * (i + 1) // 2
            out[off : off + n - i - 1] = d[i - start, i + 1 :]
    return out


def _full_square_exact(X: np.ndarray, threshold: float) -> np.ndarray:
    Xn = normalise_rows(X)
    Z = _linkage(_full_square_condensed(Xn), "average")
    return np.asarray(fcluster(Z, t=threshold, criterion="distance"))


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
    ap.add_argument("--noise", type=float, default=0.6, help="1.0: overlapping blobs (hard)")
    ap.add_argument("--sklearn-max", type=int, default=SKLEARN_MAX)
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
        X = _data(n, args.dim, args.senses, args.random_state, args.noise)
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
            rows["full-square"] = _measure(_full_square_exact, X, args.threshold)
        m, t, mem = _measure(SenseClusterer(exact_max=1, **common).fit, X)
        rows["two-stage"] = (m.labels_, t, mem)
        if n <= args.sklearn_max:
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
