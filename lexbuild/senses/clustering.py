"""Sense induction by agglomerative clustering of contextual embeddings.

``SenseClusterer`` follows the scikit-learn estimator shape: ``__init__`` stores parameters,
``fit`` learns ``labels_``, ``n_clusters_`` and ``centroids_``. Up to ``exact_max`` points the
full average-linkage tree is built on cosine distances; beyond that a two-stage scheme
(k-means micro-clusters, then exact average linkage between them) keeps memory linear.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import numpy.typing as npt
from scipy.cluster.hierarchy import fcluster

from lexbuild.errors import InductionError

FloatArray = npt.NDArray[np.floating[Any]]
IntArray = npt.NDArray[np.intp]

_LINKAGES = ("average", "ward")
# Rows of the similarity block computed at once: bounds the temporary to ~64 MB of float32.
_BLOCK_ELEMENTS = 16_000_000


def _validate(X: Any, name: str = "X") -> npt.NDArray[np.float32]:
    """Check shape and values, return L2-normalised float32 rows."""
    try:
        arr = np.asarray(X, dtype=np.float64)
    except (TypeError, ValueError) as exc:
        raise InductionError(f"{name} is not a numeric array: {exc}") from exc
    if arr.ndim != 2:
        raise InductionError(f"{name} must be 2-D (n_samples, n_features), got {arr.ndim}-D")
    if arr.shape[0] == 0 or arr.shape[1] == 0:
        raise InductionError(f"{name} is empty: shape {arr.shape}")
    if not np.all(np.isfinite(arr)):
        raise InductionError(f"{name} contains NaN or infinite values")
    norms = np.linalg.norm(arr, axis=1)
    if np.any(norms == 0.0):
        # Cosine distance is undefined for a zero vector.
        raise InductionError(f"{name} has {int(np.sum(norms == 0.0))} all-zero rows")
    # Normalise in float64 then store float32: halves memory for the products that follow.
    return (arr / norms[:, None]).astype(np.float32)


def _relabel(labels: npt.ArrayLike) -> IntArray:
    """Renumber labels 0..k-1 in order of first appearance (deterministic output)."""
    arr = np.asarray(labels)
    _, first, inverse = np.unique(arr, return_index=True, return_inverse=True)
    order = np.argsort(first, kind="stable")
    rank = np.empty_like(order)
    rank[order] = np.arange(order.size)
    return rank[inverse.ravel()].astype(np.intp)


def _group_sums(X: FloatArray, labels: IntArray, k: int) -> npt.NDArray[np.float64]:
    """Row sums per label 0..k-1 (float64), by sorting and ``np.add.reduceat``.

    ``np.add.at`` on 2-D rows is unbuffered and some 50x slower at a few hundred rows.
    """
    sums = np.zeros((k, X.shape[1]), dtype=np.float64)
    if labels.size == 0:
        return sums
    order = np.argsort(labels, kind="stable")
    ordered = labels[order]
    starts = np.flatnonzero(np.r_[True, ordered[1:] != ordered[:-1]])
    sums[ordered[starts]] = np.add.reduceat(np.asarray(X, dtype=np.float64)[order], starts, axis=0)
    return sums


def _centroids(Xn: FloatArray, labels: IntArray, k: int) -> npt.NDArray[np.float64]:
    """L2-normalised mean of each cluster's (already normalised) members."""
    sums = _group_sums(Xn, labels, k)
    norms = np.linalg.norm(sums, axis=1, keepdims=True)
    norms[norms == 0.0] = 1.0  # members cancelling out exactly: keep a zero centroid
    return np.asarray(sums / norms)


def condensed_cosine(Xn: npt.NDArray[np.float32]) -> npt.NDArray[np.float64]:
    """Condensed cosine distances of normalised rows, filled block by block.

    Only the condensed vector (float64, as the linkage code wants) is kept; each block of the
    square matrix is a bounded float32 temporary, so no full n x n matrix ever exists.
    """
    n = Xn.shape[0]
    out = np.empty(n * (n - 1) // 2, dtype=np.float64)
    block = max(1, _BLOCK_ELEMENTS // max(n, 1))
    for start in range(0, n, block):
        stop = min(n, start + block)
        d = Xn[start:stop] @ Xn.T  # similarity block, float32
        np.subtract(1.0, d, out=d)
        np.clip(d, 0.0, 2.0, out=d)
        for i in range(start, stop):
            # Offset of pair (i, i+1) in the condensed (row-major upper triangle) layout.
            off = n * i - i * (i + 1) // 2
            out[off : off + n - i - 1] = d[i - start, i + 1 :]
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
    return _relabel(owner)


class SenseClusterer:
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
    random_state: fixes the random numbers of the k-means stage.
    """

    labels_: IntArray
    n_clusters_: int
    centroids_: npt.NDArray[np.float64]

    def __init__(
        self,
        threshold: float = 0.5,
        linkage: str = "average",
        metric: str = "cosine",
        min_cluster_size: int = 3,
        min_cluster_share: float = 0.05,
        exact_max: int = 20000,
        n_micro: int = 256,
        random_state: int | None = 0,
    ) -> None:
        self.threshold = threshold
        self.linkage = linkage
        self.metric = metric
        self.min_cluster_size = min_cluster_size
        self.min_cluster_share = min_cluster_share
        self.exact_max = exact_max
        self.n_micro = n_micro
        self.random_state = random_state

    def _check_params(self) -> None:
        if self.metric != "cosine":
            raise InductionError(f"metric must be 'cosine', got {self.metric!r}")
        if self.linkage not in _LINKAGES:
            raise InductionError(f"linkage must be one of {_LINKAGES}, got {self.linkage!r}")
        if not np.isfinite(self.threshold) or self.threshold < 0:
            raise InductionError(f"threshold must be a finite number >= 0, got {self.threshold}")
        if self.min_cluster_size < 1:
            raise InductionError("min_cluster_size must be >= 1")
        if not 0.0 <= self.min_cluster_share <= 1.0:
            raise InductionError("min_cluster_share must lie in [0, 1]")
        if self.exact_max < 1 or self.n_micro < 1:
            raise InductionError("exact_max and n_micro must be >= 1")

    def fit(self, X: Any, y: Any = None) -> SenseClusterer:
        """Cluster the rows of ``X``; ``y`` is ignored (scikit-learn convention)."""
        self._check_params()
        Xn = _validate(X)
        n = Xn.shape[0]
        if n == 1:
            raw = np.zeros(1, dtype=np.intp)
        elif n <= self.exact_max:
            raw = self._fit_exact(Xn)
        else:
            raw = self._fit_two_stage(Xn)
        labels = _relabel(raw)
        labels = self._merge_small(Xn, labels)
        self.labels_ = labels
        self.n_clusters_ = int(labels.max()) + 1
        self.centroids_ = _centroids(Xn, labels, self.n_clusters_)
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
        Xn = _validate(X)
        n = Xn.shape[0]
        if n == 1:
            return [np.zeros(1, dtype=np.intp) for _ in cuts]
        if n > self.exact_max:
            out = []
            for t in cuts:
                clone = SenseClusterer(**{**self.get_params(), "threshold": t})
                out.append(clone.fit(Xn).labels_)
            return out
        Z = self._tree(Xn)
        return [
            self._merge_small(Xn, _relabel(fcluster(Z, t=t, criterion="distance")))
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
        from sklearn.cluster import KMeans, MiniBatchKMeans

        n = Xn.shape[0]
        k = min(self.n_micro, n)
        # MiniBatchKMeans scales to many points; plain KMeans is fine for modest n. One
        # initialisation: the micro-clusters only need to be tight, not optimal, and on
        # static vectors of UD French verbs n_init=3 was 5x slower with no better agreement
        # with the exact partition (benchmarks/bench_clustering.py).
        km: Any
        if n > 10 * k:
            km = MiniBatchKMeans(
                n_clusters=k, random_state=self.random_state, n_init=1, batch_size=4096
            )
        else:
            km = KMeans(n_clusters=k, random_state=self.random_state, n_init=1)
        micro = _relabel(km.fit_predict(Xn))
        m = int(micro.max()) + 1
        sums = _group_sums(Xn, micro, m)
        sizes = np.bincount(micro, minlength=m).astype(np.float64)
        if self.linkage == "ward":
            # Ward between micro-clusters is approximated on their normalised centroids
            # (unweighted); only the average linkage path is exact.
            from scipy.cluster.hierarchy import linkage as scipy_linkage

            cents = sums / np.linalg.norm(sums, axis=1, keepdims=True)
            Z = scipy_linkage(cents, method="ward")
            group = np.asarray(fcluster(Z, t=self.threshold, criterion="distance"))
        else:
            group = _average_linkage_groups(sums, sizes, float(self.threshold))
        return np.asarray(group[micro], dtype=np.intp)  # members inherit their micro's cluster

    def _merge_small(self, Xn: npt.NDArray[np.float32], labels: IntArray) -> IntArray:
        n = labels.size
        k = int(labels.max()) + 1
        sizes = np.bincount(labels, minlength=k)
        floor = max(self.min_cluster_size, self.min_cluster_share * n)
        large = sizes >= floor
        if large.all():
            return labels
        if not large.any():
            # No cluster has enough support: the largest becomes the only target.
            large[int(np.argmax(sizes))] = True
        cents = _centroids(Xn, labels, k)
        sim = cents @ cents[large].T
        target_of_large = np.flatnonzero(large)
        mapping = np.arange(k)
        small = np.flatnonzero(~large)
        mapping[small] = target_of_large[np.argmax(sim[small], axis=1)]
        return _relabel(mapping[labels])


def assign_to_centroids(X: Any, centroids: Any) -> IntArray:
    """Label each row of ``X`` with its nearest centroid by cosine similarity.

    Used for occurrences beyond the sampling cap, which are not part of the clustering itself.
    """
    Xn = _validate(X)
    C = np.asarray(centroids, dtype=np.float64)
    if C.ndim != 2 or C.shape[0] == 0:
        raise InductionError("centroids must be a non-empty 2-D array")
    if C.shape[1] != Xn.shape[1]:
        raise InductionError(
            f"dimension mismatch: X has {Xn.shape[1]} features, centroids {C.shape[1]}"
        )
    norms = np.linalg.norm(C, axis=1, keepdims=True)
    norms[norms == 0.0] = 1.0
    return np.asarray(np.argmax(Xn @ (C / norms).T, axis=1), dtype=np.intp)
