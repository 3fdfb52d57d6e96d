"""Time and peak memory of SenseClusterer against scikit-learn, and the two-stage path's fidelity.

Usage:
    python benchmarks/bench_clustering.py [--sizes 2000,10000] [--dim 768] [--noise 1.0]
    python benchmarks/bench_clustering.py --real [--real-max 12000]

Rows: ``exact`` (the clusterer's exact path: rows split into the components of the graph of
pairs within the cut unless one holds over 80% of them, each clustered on the upper-triangle
float32 distance kernel), ``one tree`` (the same without the split: the cost on data that makes
one large component, as real occurrence vectors do, see ``--real``), ``full-square`` (the same
linkage over a condensed matrix cut from whole square blocks, as before: the accuracy and speed
reference), ``two-stage`` (the bounded-memory path: exact by levels for average linkage, no
tree over more than ``refine_max`` rows or pieces), ``approximation`` (that path's fallback
alone: k-means micro-clusters and subtrees) and scikit-learn's
``AgglomerativeClustering``. ``--noise 1.0`` gives overlapping blobs, the hard case for any
shortcut; ``--refine-max`` forces the two-stage path to levels at sizes where exact is still
computable (``n/5`` is the share the default ``refine_max`` of 8,000 has at 40,000 points).
After the timed rows, the two-stage path is compared with exact (ARI) at every threshold of
``--thresholds``.

``--real`` takes real occurrence vectors instead: the embedded default representation
(static-syntactic) of every occurrence of the most frequent verbs of the shared French
treebanks (Sequoia train/dev/test, GSD dev/test), pooled up to ``--real-max`` rows, then the
ten most frequent verbs one by one (two-stage forced with ``refine_max = n/5`` and
``n_micro = n/20``). Per cut it also runs the exact path on the rows in three other orders:
float32 products round differently in other blocks, and how far exact then is from itself is
the floor for any comparison with one exact run. It times one tree with distances in float64
and in float32, and compares the approximation alone (k-means micro-clusters and subtrees:
Ward's two-stage path, and average linkage's fallback) with exact.

Peak memory is measured with tracemalloc (numpy registers its buffers there) in a second run of
each row, the time in a first run without it; fastcluster's internal C++ allocations are not
traced (they are O(n) for average linkage). The machine is shared: the load average is printed
with the results.
"""

from __future__ import annotations

import argparse
import os
import sys
import time
import tracemalloc
from collections.abc import Callable
from pathlib import Path
from typing import Any

import numpy as np
from scipy.cluster.hierarchy import fcluster
from sklearn.cluster import AgglomerativeClustering
from sklearn.metrics import adjusted_rand_score

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))  # this checkout's lexbuild, not an installed one

from lexbuild.senses import agglomerative  # noqa: E402
from lexbuild.senses.agglomerative import DEFAULT_THRESHOLDS, _linkage  # noqa: E402
from lexbuild.senses.agglomerative import AgglomerativeClusterer as SenseClusterer  # noqa: E402
from lexbuild.senses.clustering import blas_threads, normalise_rows, relabel  # noqa: E402

UD_FILES = (
    "fr_sequoia-ud-train.conllu",
    "fr_sequoia-ud-dev.conllu",
    "fr_sequoia-ud-test.conllu",
    "fr_gsd-ud-dev.conllu",
    "fr_gsd-ud-test.conllu",
)
NO_MERGE: dict[str, Any] = {"min_cluster_size": 1, "min_cluster_share": 0.0}
#: Other row orders the exact path is run in (``--real``): its own spread under reordering.
REORDERINGS = 3
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


def _one_tree_exact(X: np.ndarray, threshold: float) -> np.ndarray:
    """The exact path without the split into components: what data with one large component
    (real occurrence vectors, see ``--real``) costs."""
    saved = agglomerative._SPLIT_MIN_ROWS
    agglomerative._SPLIT_MIN_ROWS = X.shape[0] + 1
    try:
        return SenseClusterer(threshold=threshold, exact_max=X.shape[0], **NO_MERGE).fit(X).labels_
    finally:
        agglomerative._SPLIT_MIN_ROWS = saved


def _float64_tree(X: np.ndarray) -> np.ndarray:
    """Average-linkage tree on cosine distances computed wholly in float64 (the reference):
    the clusterer's upper-triangle kernel, on rows normalised and multiplied in float64."""
    X64 = np.asarray(X, dtype=np.float64)
    Xn = X64 / np.linalg.norm(X64, axis=1, keepdims=True)
    return _linkage(agglomerative.condensed_cosine(Xn), "average")


#: Plain runs timed per row (``--repeat``); the fastest is reported, as timeit does: on a
#: shared VM every disturbance (another job, a first touch of reclaimed memory) only adds time.
REPEAT = 1


def _measure(fn: Callable[..., Any], *args: Any) -> tuple[Any, float, float]:
    """Result and seconds of the fastest of ``REPEAT`` plain runs, peak MiB of a traced run.

    tracemalloc slows loops that make many small numpy arrays (the two-stage path at 40,000:
    4.8 s plain, 6.3 s traced), so it is kept out of the timing.
    """
    elapsed = np.inf
    for _ in range(REPEAT):
        t0 = time.perf_counter()
        result = fn(*args)
        elapsed = min(elapsed, time.perf_counter() - t0)
    tracemalloc.start()
    fn(*args)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return result, elapsed, peak / 2**20


def _load() -> str:
    one, five, fifteen = os.getloadavg()
    return f"load average {one:.2f} {five:.2f} {fifteen:.2f} ({os.cpu_count()} cores)"


def _unpermute(order: np.ndarray, labels: np.ndarray) -> np.ndarray:
    """Labels of rows taken in ``order``, put back in input order."""
    out = np.empty_like(labels)
    out[order] = labels
    return out


def real_vectors(ud: Path, real_max: int) -> tuple[np.ndarray, list[tuple[str, np.ndarray]]]:
    """Embedded-default vectors of the most frequent verbs: pooled rows and per-verb matrices."""
    from lexbuild.corpus.conllu import iter_sentences
    from lexbuild.corpus.occurrences import Occurrence, extract_occurrences, profile_for
    from lexbuild.senses.static import StaticSyntacticVectors

    french = profile_for("fr")
    by_verb: dict[str, list[Occurrence]] = {}
    for sentence in iter_sentences([ud / name for name in UD_FILES]):
        for occ in extract_occurrences(sentence, french):
            by_verb.setdefault(occ.lemma, []).append(occ)
    ranked = sorted(by_verb, key=lambda lemma: (-len(by_verb[lemma]), lemma))
    chosen: list[str] = []
    total = 0
    for lemma in ranked:
        if total + len(by_verb[lemma]) > real_max:
            break
        chosen.append(lemma)
        total += len(by_verb[lemma])
    representation = StaticSyntacticVectors()
    per_verb = [(lemma, representation.encode(by_verb[lemma])) for lemma in chosen]
    return np.vstack([m for _, m in per_verb]), per_verb


def _exact(X: np.ndarray, thresholds: list[float]) -> list[np.ndarray]:
    return SenseClusterer(exact_max=X.shape[0], **NO_MERGE).sweep(X, thresholds)


def fidelity(
    X: np.ndarray,
    thresholds: list[float],
    refine_max: int,
    n_micro: int,
    random_state: int,
    exact: list[np.ndarray] | None = None,
) -> list[tuple[float, int, int, float]]:
    """(threshold, exact k, two-stage k, ARI two-stage vs exact) for each threshold.

    ``exact``: the exact labels per threshold where the caller has them already.
    """
    exact = _exact(X, thresholds) if exact is None else exact
    two = SenseClusterer(
        exact_max=1, refine_max=refine_max, n_micro=n_micro, random_state=random_state,
        **NO_MERGE,
    ).sweep(X, thresholds)
    return [
        (t, int(e.max()) + 1, int(s.max()) + 1, adjusted_rand_score(e, s))
        for t, e, s in zip(thresholds, exact, two, strict=True)
    ]


def component_search(X: np.ndarray, cut: float) -> str:
    """The search for components at ``cut`` with the bound that skips far blocks and without.

    The search runs in full (no early stop) both ways; the block pairs the bound let through
    are counted on the block numbers it hands to the product.
    """
    from lexbuild.senses import components

    Xn = normalise_rows(X)
    through: list[int] = []
    real_runs = components._runs

    def counted(blocks: np.ndarray) -> list[tuple[int, int]]:
        through.append(int(blocks.size))
        return real_runs(blocks)

    components._runs = counted
    try:
        with blas_threads():
            started = time.perf_counter()
            bounded = components.threshold_components(Xn, cut)
            bounded_s = time.perf_counter() - started
            started = time.perf_counter()
            plain = components.threshold_components(Xn, cut, directions=None)
            plain_s = time.perf_counter() - started
    finally:
        components._runs = real_runs
    assert bounded is not None and plain is not None
    same = adjusted_rand_score(plain, bounded)
    rows = max(1, components.BLOCK_ELEMENTS // Xn.shape[0])
    blocks = -(-Xn.shape[0] // rows)
    if len(through) == blocks:
        share = f"{sum(through) / (blocks * (blocks + 1) / 2):.0%} of the block pairs let through"
    elif through:
        share = f"bound dropped after {len(through)} of {blocks} blocks: it let too many through"
    else:
        share = "bound not used: too few blocks, or a sample showed it would skip too little"
    return (
        f"component search at t={cut}: {bounded_s:.2f} s with the bound ({share}), "
        f"{plain_s:.2f} s over all pairs (x{plain_s / bounded_s:.2f}); same components: "
        f"ARI {same:.4f}"
    )


def _approximate(model: Any, X: np.ndarray) -> np.ndarray:
    """Labels of the approximation alone, as ``fit`` would relabel them."""
    with blas_threads():
        return relabel(model._fit_approximate(normalise_rows(X)))


def approximate_fidelity(
    X: np.ndarray,
    exact: list[np.ndarray],
    thresholds: list[float],
    refine_max: int,
    n_micro: int,
    random_state: int,
) -> list[tuple[float, float]]:
    """(threshold, ARI of the approximation vs the exact labels) for each threshold."""
    out = []
    for t, e in zip(thresholds, exact, strict=True):
        model = SenseClusterer(
            threshold=t, exact_max=1, refine_max=refine_max, n_micro=n_micro,
            random_state=random_state, **NO_MERGE,
        )
        out.append((t, adjusted_rand_score(e, _approximate(model, X))))
    return out


def run_real(args: argparse.Namespace, thresholds: list[float]) -> None:
    t0 = time.perf_counter()
    X, per_verb = real_vectors(Path(args.ud), args.real_max)
    n = X.shape[0]
    print(
        f"real vectors: {n} occurrences of the {len(per_verb)} most frequent verbs, "
        f"{X.shape[1]}-d (static-syntactic), built in {time.perf_counter() - t0:.1f} s; {_load()}"
    )
    # The float32 upper-triangle kernel against the previous kernel and a float64 reference,
    # and what the same tree costs in each precision.
    started = time.perf_counter()
    Z64 = _float64_tree(X)
    float64_s = time.perf_counter() - started
    started = time.perf_counter()
    SenseClusterer(exact_max=n, **NO_MERGE)._tree(normalise_rows(X))
    float32_s = time.perf_counter() - started
    print(
        f"  one tree: distances in float64 {float64_s:.2f} s, in float32 {float32_s:.2f} s "
        f"(x{float64_s / float32_s:.1f}); {_load()}"
    )
    exact = _exact(X, thresholds)
    # The same exact path on the rows in another order: float32 products round differently in
    # other blocks, and average linkage's near-tied merges follow (the floor for any comparison
    # with one exact run, the two-stage path's included).
    reordered = []  # per order, per threshold: labels back in input order
    for k in range(REORDERINGS):
        order = np.random.default_rng(args.random_state + k).permutation(n)
        runs = SenseClusterer(exact_max=n, **NO_MERGE).sweep(X[order], thresholds)
        reordered.append([_unpermute(order, labels) for labels in runs])
    for i, (t, labels) in enumerate(zip(thresholds, exact, strict=True)):
        square = _full_square_exact(X, t)
        ref64 = fcluster(Z64, t=t, criterion="distance")
        itself = [adjusted_rand_score(runs[i], labels) for runs in reordered]
        # What the exact path's search for components costs before it gives up (or splits).
        started = time.perf_counter()
        split = agglomerative.threshold_components(
            normalise_rows(X), t, agglomerative._SPLIT_LARGEST_SHARE
        )
        search_s = time.perf_counter() - started
        parts = "gave up" if split is None else f"{int(split.max()) + 1} components"
        print(
            f"  t={t:.2f} exact k={int(labels.max()) + 1}: ARI vs full-square kernel "
            f"{adjusted_rand_score(square, labels):.4f}, vs float64 "
            f"{adjusted_rand_score(ref64, labels):.4f}, vs itself on the rows in "
            f"{REORDERINGS} other orders {min(itself):.4f}-{max(itself):.4f}; component search "
            f"{parts} in "
            f"{search_s:.2f} s"
        )
    # Time where the rows make one large component (the split gives up at once).
    cut = DEFAULT_THRESHOLDS["average"]
    _, exact_s, exact_mib = _measure(SenseClusterer(threshold=cut, exact_max=n, **NO_MERGE).fit, X)
    agg = AgglomerativeClustering(
        n_clusters=None, metric="cosine", linkage="average", distance_threshold=cut
    )
    _, sk_s, sk_mib = _measure(agg.fit_predict, X)
    print(
        f"  time at t={cut}: exact {exact_s:.2f} s {exact_mib:.0f} MiB, scikit-learn "
        f"{sk_s:.2f} s {sk_mib:.0f} MiB: exact x{sk_s / exact_s:.1f} faster; {_load()}"
    )
    refine = args.refine_max or max(2, n // 5)
    print(f"pooled, two-stage forced (refine_max={refine}, n_micro={args.n_micro}):")
    forced = SenseClusterer(
        threshold=cut, exact_max=1, refine_max=refine, n_micro=args.n_micro, **NO_MERGE
    )
    model, two_s, two_mib = _measure(forced.fit, X)
    path = "the approximation" if model.approximate_ else "exact by levels"
    print(f"  time at t={cut}: {two_s:.2f} s {two_mib:.0f} MiB ({path}); {_load()}")
    for t, ke, ks, ari in fidelity(
        X, thresholds, refine, args.n_micro, args.random_state, exact
    ):
        print(f"  t={t:.2f} exact k={ke:<4} two-stage k={ks:<4} ARI vs exact {ari:.4f}")
    # The approximation alone (Ward's path, and average linkage's where the levels cannot
    # come down to the budget): what exactness by levels replaced.
    approximate = approximate_fidelity(
        X, exact, thresholds, refine, args.n_micro, args.random_state
    )
    cells = "  ".join(f"t={t:.2f} ARI {a:.4f}" for t, a in approximate)
    print(f"  the approximation alone: {cells}")
    print("per verb, two-stage forced (refine_max=n/5, n_micro=n/20):")
    worst = 1.0
    for lemma, M in per_verb[:10]:
        m = M.shape[0]
        rows = fidelity(M, thresholds, max(2, m // 5), max(2, m // 20), args.random_state)
        worst = min([worst] + [r[3] for r in rows])
        cells = "  ".join(f"t={t:.2f} k {ke}/{ks} ARI {a:.3f}" for t, ke, ks, a in rows)
        print(f"  {lemma:<10} n={m:<4} {cells}")
    print(f"lowest per-verb ARI two-stage vs exact: {worst:.4f}")


def main(argv: list[str] | None = None) -> None:
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--sizes", default="2000,10000", help="comma-separated n (e.g. 2000,40000)")
    ap.add_argument("--dim", type=int, default=768)
    ap.add_argument("--threshold", type=float, default=0.5, help="cut of the timed rows")
    ap.add_argument(
        "--thresholds", default="0.5,0.6,0.8",
        help="cuts at which two-stage is compared with exact (ARI)",
    )
    ap.add_argument("--senses", type=int, default=8)
    ap.add_argument("--random-state", type=int, default=0)
    ap.add_argument("--noise", type=float, default=0.6, help="1.0: overlapping blobs (hard)")
    ap.add_argument("--sklearn-max", type=int, default=SKLEARN_MAX)
    ap.add_argument(
        "--exact-limit", type=int, default=40_000,
        help="largest n also clustered exactly (40k needs ~6.4 GB for the condensed matrix)",
    )
    ap.add_argument(
        "--refine-max", type=int, default=0,
        help="two-stage subtree budget (0: the clusterer's default; with --real, n/5)",
    )
    ap.add_argument("--n-micro", type=int, default=256, help="two-stage micro-clusters")
    ap.add_argument("--repeat", type=int, default=1, help="plain runs timed per row (fastest)")
    ap.add_argument("--real", action="store_true", help="real occurrence vectors (see above)")
    ap.add_argument("--real-max", type=int, default=12_000, help="pooled real rows at most")
    ap.add_argument("--ud", default=str(ROOT.parent / "shared" / "corpora" / "ud"))
    args = ap.parse_args(argv)
    global REPEAT
    REPEAT = max(1, args.repeat)
    thresholds = [float(t) for t in args.thresholds.split(",") if t.strip()]
    if args.real:
        run_real(args, thresholds)
        return
    sizes = [int(s) for s in args.sizes.split(",") if s.strip()]
    two_stage: dict[str, Any] = {"n_micro": args.n_micro, "random_state": args.random_state}
    if args.refine_max:
        two_stage["refine_max"] = args.refine_max

    print(_load())
    header = f"{'n':>7} {'method':<12} {'time s':>8} {'peak MiB':>9} {'k':>4}  notes"
    print(header)
    print("-" * len(header))
    for n in sizes:
        X = _data(n, args.dim, args.senses, args.random_state, args.noise)
        common: dict[str, Any] = {"threshold": args.threshold, **NO_MERGE}
        rows: dict[str, tuple[np.ndarray, float, float]] = {}
        # Two-stage always; exact where the condensed matrix fits (n <= 40k ~ 6.4 GB).
        if n <= args.exact_limit:
            m, t, mem = _measure(SenseClusterer(exact_max=n, **common).fit, X)
            rows["exact"] = (m.labels_, t, mem)
            rows["one tree"] = _measure(_one_tree_exact, X, args.threshold)
            rows["full-square"] = _measure(_full_square_exact, X, args.threshold)
        m, t, mem = _measure(SenseClusterer(exact_max=1, **common, **two_stage).fit, X)
        rows["two-stage"] = (m.labels_, t, mem)
        path = "the approximation" if m.approximate_ else "exact by levels"
        # The approximation alone (Ward's path; average linkage's where the levels give up).
        alone = SenseClusterer(exact_max=1, **common, **two_stage)
        rows["approximation"] = _measure(_approximate, alone, X)
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
            if name == "two-stage":
                notes = "; ".join(part for part in (notes, path) if part)
            k = len(set(labels.tolist()))
            print(f"{n:>7} {name:<12} {t:>8.2f} {mem:>9.1f} {k:>4}  {notes}", flush=True)
        print(f"{n:>7} {component_search(X, args.threshold)}", flush=True)
        if n <= args.exact_limit and len(thresholds) > 0:
            refine = two_stage.get("refine_max", SenseClusterer().refine_max)
            for t, ke, ks, ari in fidelity(
                X, thresholds, refine, args.n_micro, args.random_state
            ):
                print(
                    f"{n:>7} fidelity t={t:.2f}: exact k={ke}, two-stage k={ks} "
                    f"(refine_max={refine}), ARI vs exact {ari:.4f}", flush=True,
                )
        print(_load(), flush=True)


if __name__ == "__main__":
    main()
