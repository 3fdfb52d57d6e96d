"""Agglomerative clustering of occurrence vectors (average or Ward linkage), registered as
``agglomerative``.

``AgglomerativeClusterer`` follows the scikit-learn estimator shape: ``__init__`` stores
parameters, ``fit`` learns ``labels_``, ``n_clusters_`` and ``centroids_``. Up to ``exact_max``
points the full tree is built on cosine distances; beyond that a two-stage scheme (k-means
micro-clusters, then exact average linkage between them) keeps memory linear. The calibrated
parameter is the height at which the tree is cut: a cosine distance for average linkage, a Ward
height on unit vectors in euclidean space for Ward.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import numpy.typing as npt
from scipy.cluster.hierarchy import fcluster

from lexbuild.errors import InductionError
from lexbuild.senses.clustering import (
    check_common,
    fitted,
    group_sums,
    merge_small_clusters,
    normalise_rows,
    relabel,
)
from lexbuild.senses.registry import ClustererSpec
from lexbuild.senses.settings import InductionSettings

__all__ = [
    "AVERAGE_THRESHOLDS",
    "SPEC",
    "WARD_THRESHOLDS",
    "AgglomerativeClusterer",
    "condensed_cosine",
]

IntArray = npt.NDArray[np.intp]
#: Constructor defaults come from the one settings object.
_DEFAULTS = InductionSettings()

#: Cosine distances swept by calibration for average linkage.
AVERAGE_THRESHOLDS: tuple[float, ...] = tuple(round(0.05 * i, 2) for i in range(2, 20))
#: Ward heights swept for Ward linkage: they grow with the square root of cluster sizes, so the
#: grid is wider and coarser than the cosine one.
WARD_THRESHOLDS: tuple[float, ...] = (
    0.5, 1.0, 1.5, 2.0, 2.5, 3.0, 3.5, 4.0, 5.0, 6.0, 8.0, 10.0
)
#: Cut used when no threshold is given and calibration is impossible: the best mean ARI on
#: French UD pseudo-verbs (``lexbuild calibrate`` on the five French files, see README) and,
#: for the embedded default, on real polysemy (development set and demo gold, bench_guided.py).
DEFAULT_THRESHOLDS = {"average": 0.65, "ward": 3.0}

_LINKAGES = ("average", "ward")
# Rows of the similarity block computed at once: bounds the temporary to ~64 MB of float32.
_BLOCK_ELEMENTS = 16_000_000


def condensed_cosine(Xn: npt.NDArray[np.float32]) -> npt.NDArray[np.float64]:
    """Condensed cosine distances of normalised rows, filled block by block.

    Only the condensed vector (float64, as the linkage code wants) is kept. Each block of rows
    is multiplied by the rows from its own first row on, so about half of the square is computed
    (the upper triangle plus a small triangle inside each block), and the float32 temporary
    stays under ``_BLOCK_ELEMENTS`` elements: blocks grow as fewer columns remain.
    """
    n = Xn.shape[0]
    out = np.empty(n * (n - 1) // 2, dtype=np.float64)
    start = 0
    while start < n:
        stop = min(n, start + max(1, _BLOCK_ELEMENTS // (n - start)))
        d = Xn[start:stop] @ Xn[start:].T  # similarity of rows start..stop to rows start..n
        np.subtract(1.0, d, out=d)
        np.clip(d, 0.0, 2.0, out=d)
        for i in range(start, stop):
            # Offset of pair (i, i+1) in the condensed (row-major upper triangle) layout.
            off = n * i - i * (i + 1) // 2
            out[off : off + n - i - 1] = d[i - start, i - start + 1 :]
        start = stop
    return out


def _linkage(condensed: npt.NDArray[np.float64], method: str) -> npt.NDArray[np.float64]:
    """Linkage matrix from a condensed float64 vector, which may be overwritten."""
    try:
        import fastcluster  # lazily: optional, much faster
    except ImportError:  # pragma: no cover - depends on the environment
        from scipy.cluster.hierarchy import linkage as scipy_linkage

        return np.asarray(scipy_linkage(condensed, method=method))
    n = int(np.ceil(np.sqrt(condensed.size * 2)))
    wrap = getattr(fastcluster, "linkage_wrap", None)
    mthidx = getattr(fastcluster, "mthidx", None)
    if wrap is None or mthidx is None or not condensed.flags.c_contiguous:
        return np.asarray(fastcluster.linkage(condensed, method=method, preserve_input=False))
    # fastcluster.linkage() begins with np.array(X), a full copy of the condensed matrix even
    # with preserve_input=False (1.3.0); its C routine works in place, so call it directly.
    Z = np.empty((n - 1, 4))
    wrap(n, condensed, Z, mthidx[method])
    return Z


def _average_linkage_groups(
    sums: npt.NDArray[np.float64], sizes: npt.NDArray[np.float64], threshold: float
) -> IntArray:
    """Average linkage between groups of normalised points, cut at ``threshold``.

    The mean cosine distance over member pairs of groups i, j is
    ``1 - dot(sum_i, sum_j) / (n_i n_j)``, so the start matrix is exact; merges use the
    size-weighted Lance-Williams update, which is exact for average linkage.
    """
    m = sizes.size
    if m == 1:
        return np.zeros(1, dtype=np.intp)
    dist = 1.0 - (sums @ sums.T) / np.outer(sizes, sizes)
    np.clip(dist, 0.0, 2.0, out=dist)
    np.fill_diagonal(dist, np.inf)
    sizes = sizes.astype(np.float64).copy()
    owner = np.arange(m)  # group -> surviving representative
    for _ in range(m - 1):
        flat = int(np.argmin(dist))
        i, j = divmod(flat, m)
        if not dist[i, j] <= threshold:  # fcluster 'distance' joins merges of height <= t
            break
        i, j = min(i, j), max(i, j)
        ni, nj = sizes[i], sizes[j]
        merged = (ni * dist[i] + nj * dist[j]) / (ni + nj)
        dist[i, :] = merged
        dist[:, i] = merged
        dist[i, i] = np.inf
        dist[j, :] = np.inf
        dist[:, j] = np.inf
        sizes[i] = ni + nj
        owner[owner == j] = i
    return relabel(owner)


class AgglomerativeClusterer:
    """Agglomerative sense clustering on cosine distances, scikit-learn style.

    Parameters
    ----------
    threshold: distance at which the tree is cut (cosine distance; for ``linkage="ward"`` the
        Ward height on normalised vectors in euclidean space).
    linkage: ``"average"`` or ``"ward"``.
    metric: only ``"cosine"`` is supported.
    min_cluster_size, min_cluster_share: clusters smaller than
        ``max(min_cluster_size, min_cluster_share * n)`` are merged into the nearest large one.
    exact_max: largest n clustered exactly; above it the two-stage path runs.
    n_micro: number of k-means micro-clusters in the two-stage path.
    refine_max: largest two-stage cluster clustered again exactly (memory grows with its
        square: 8,000 members take 256 MB of distances).
    random_state: fixes the random numbers of the k-means stage.
    """

    labels_: IntArray
    n_clusters_: int
    centroids_: npt.NDArray[np.float64]

    def __init__(
        self,
        threshold: float = DEFAULT_THRESHOLDS["average"],
        linkage: str = "average",
        metric: str = "cosine",
        min_cluster_size: int = _DEFAULTS.min_cluster_size,
        min_cluster_share: float = _DEFAULTS.min_cluster_share,
        exact_max: int = _DEFAULTS.exact_max,
        n_micro: int = 256,
        random_state: int | None = _DEFAULTS.random_state,
        refine_max: int = 8000,
    ) -> None:
        self.threshold = threshold
        self.linkage = linkage
        self.metric = metric
        self.min_cluster_size = min_cluster_size
        self.min_cluster_share = min_cluster_share
        self.exact_max = exact_max
        self.n_micro = n_micro
        self.random_state = random_state
        self.refine_max = refine_max

    def _check_params(self) -> None:
        if self.metric != "cosine":
            raise InductionError(f"metric must be 'cosine', got {self.metric!r}")
        if self.linkage not in _LINKAGES:
            raise InductionError(f"linkage must be one of {_LINKAGES}, got {self.linkage!r}")
        if not np.isfinite(self.threshold) or self.threshold < 0:
            raise InductionError(f"threshold must be a finite number >= 0, got {self.threshold}")
        check_common(self.get_params())
        if self.exact_max < 1 or self.n_micro < 1 or self.refine_max < 1:
            raise InductionError("exact_max, n_micro and refine_max must be >= 1")

    def fit(self, X: Any, y: Any = None) -> AgglomerativeClusterer:
        """Cluster the rows of ``X``; ``y`` is ignored (scikit-learn convention)."""
        self._check_params()
        Xn = normalise_rows(X)
        n = Xn.shape[0]
        if n == 1:
            raw = np.zeros(1, dtype=np.intp)
        elif n <= self.exact_max:
            raw = self._fit_exact(Xn)
        else:
            raw = self._fit_two_stage(Xn)
        labels = relabel(raw)
        fitted(self, Xn, self._merge_small(Xn, labels))
        return self

    def fit_predict(self, X: Any, y: Any = None) -> IntArray:
        return self.fit(X).labels_

    def sweep(self, X: Any, thresholds: Any) -> list[IntArray]:
        """Labels for each threshold, as ``fit`` with that threshold would give them.

        On the exact path the tree is built once and cut at every threshold (calibration
        sweeps many); the two-stage path refits. Fitted attributes are left untouched.
        """
        cuts = [float(t) for t in thresholds]
        self._check_params()
        for t in cuts:
            if not np.isfinite(t) or t < 0:
                raise InductionError(f"threshold must be a finite number >= 0, got {t}")
        Xn = normalise_rows(X)
        n = Xn.shape[0]
        if n == 1:
            return [np.zeros(1, dtype=np.intp) for _ in cuts]
        if n > self.exact_max:
            out = []
            for t in cuts:
                clone = AgglomerativeClusterer(**{**self.get_params(), "threshold": t})
                out.append(clone.fit(Xn).labels_)
            return out
        Z = self._tree(Xn)
        return [
            self._merge_small(Xn, relabel(fcluster(Z, t=t, criterion="distance")))
            for t in cuts
        ]

    def get_params(self, deep: bool = True) -> dict[str, Any]:
        """Constructor parameters (scikit-learn convention)."""
        return {
            "threshold": self.threshold,
            "linkage": self.linkage,
            "metric": self.metric,
            "min_cluster_size": self.min_cluster_size,
            "min_cluster_share": self.min_cluster_share,
            "exact_max": self.exact_max,
            "n_micro": self.n_micro,
            "random_state": self.random_state,
            "refine_max": self.refine_max,
        }

    def _tree(self, Xn: npt.NDArray[np.float32]) -> npt.NDArray[np.float64]:
        condensed = condensed_cosine(Xn)
        if self.linkage == "ward":
            # Euclidean distance of unit vectors: ||a-b|| = sqrt(2 * cosine distance); in place.
            np.multiply(condensed, 2.0, out=condensed)
            np.sqrt(condensed, out=condensed)
        return _linkage(condensed, self.linkage)

    def _fit_exact(self, Xn: npt.NDArray[np.float32]) -> IntArray:
        Z = self._tree(Xn)
        return np.asarray(fcluster(Z, t=self.threshold, criterion="distance"), dtype=np.intp)

    def _fit_two_stage(self, Xn: npt.NDArray[np.float32]) -> IntArray:
        """k-means micro-clusters, linkage between them, then each cluster refined exactly.

        The micro-clusters glue their members together, so the two-stage clusters are coarser
        than the exact ones where the cut runs through a micro-cluster. Average and Ward
        linkage are reducible, so the exact clusters inside a union of exact clusters are found
        by clustering that union alone: each two-stage cluster of at most ``refine_max``
        members is clustered again exactly, which splits what the micro-clusters glued.
        """
        coarse = relabel(self._micro_linkage(Xn))
        labels = coarse.copy()
        next_label = int(coarse.max()) + 1
        for cluster in range(int(coarse.max()) + 1):
            members = np.flatnonzero(coarse == cluster)
            if not 2 <= members.size <= self.refine_max:
                continue
            sub = relabel(self._fit_exact(Xn[members]))
            extra = sub > 0  # sub-cluster 0 keeps the cluster's label, the others get new ones
            labels[members[extra]] = next_label + sub[extra] - 1
            next_label += int(sub.max())
        if self.linkage != "average" or next_label == 1:
            return labels
        # Parts of one exact cluster that a micro-cluster boundary put into two coarse clusters
        # join again: average linkage between the refined clusters is exact (sums and sizes).
        labels = relabel(labels)
        m = int(labels.max()) + 1
        sizes = np.bincount(labels, minlength=m).astype(np.float64)
        joined = _average_linkage_groups(group_sums(Xn, labels, m), sizes, float(self.threshold))
        return np.asarray(joined[labels], dtype=np.intp)

    def _micro_linkage(self, Xn: npt.NDArray[np.float32]) -> IntArray:
        from sklearn.cluster import KMeans, MiniBatchKMeans
        from threadpoolctl import threadpool_limits

        n = Xn.shape[0]
        k = min(self.n_micro, n)
        # One initialisation from random points, in one thread. The micro-clusters only need
        # to be tight: on overlapping 768-d blobs k-means++ initialisation was 3-6x slower than
        # random initialisation for the same inertia (within 0.1%), and BLAS threads competing
        # with another busy core made the k-means stage up to 10x slower
        # (benchmarks/bench_clustering.py).
        km: Any
        if n > 10 * k:
            km = MiniBatchKMeans(
                n_clusters=k,
                random_state=self.random_state,
                n_init=1,
                batch_size=4096,
                init="random",
            )
        else:
            km = KMeans(n_clusters=k, random_state=self.random_state, n_init=1, init="random")
        with threadpool_limits(limits=1):
            micro = relabel(km.fit_predict(Xn))
        m = int(micro.max()) + 1
        sums = group_sums(Xn, micro, m)
        sizes = np.bincount(micro, minlength=m).astype(np.float64)
        if self.linkage == "ward":
            # Ward between micro-clusters is approximated on their normalised centroids
            # (unweighted); the exact refinement that follows corrects within each cluster.
            from scipy.cluster.hierarchy import linkage as scipy_linkage

            cents = sums / np.linalg.norm(sums, axis=1, keepdims=True)
            Z = scipy_linkage(cents, method="ward")
            group = np.asarray(fcluster(Z, t=self.threshold, criterion="distance"))
        else:
            group = _average_linkage_groups(sums, sizes, float(self.threshold))
        return np.asarray(group[micro], dtype=np.intp)  # members inherit their micro's cluster

    def _merge_small(self, Xn: npt.NDArray[np.float32], labels: IntArray) -> IntArray:
        return merge_small_clusters(Xn, labels, self.min_cluster_size, self.min_cluster_share)


def _params(settings: InductionSettings) -> dict[str, Any]:
    return {
        "linkage": settings.linkage,
        "min_cluster_size": settings.min_cluster_size,
        "min_cluster_share": settings.min_cluster_share,
    }


def _make(settings: InductionSettings, threshold: float) -> AgglomerativeClusterer:
    return AgglomerativeClusterer(
        threshold=threshold,
        linkage=settings.linkage,
        min_cluster_size=settings.min_cluster_size,
        min_cluster_share=settings.min_cluster_share,
        exact_max=settings.exact_max,
        random_state=settings.random_state,
    )


def _grid(settings: InductionSettings) -> tuple[float, ...]:
    return WARD_THRESHOLDS if settings.linkage == "ward" else AVERAGE_THRESHOLDS


def _default(settings: InductionSettings) -> float:
    if settings.linkage not in DEFAULT_THRESHOLDS:
        raise InductionError(f"linkage must be one of {_LINKAGES}, got {settings.linkage!r}")
    return DEFAULT_THRESHOLDS[settings.linkage]


SPEC = ClustererSpec(
    name="agglomerative",
    parameter="distance threshold",
    description="agglomerative clustering (average or Ward linkage) cut at a distance",
    default=_default,
    grid=_grid,
    make=_make,
    params=_params,
)
