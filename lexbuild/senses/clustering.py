"""Clustering methods for sense induction: one protocol, one registry, shared helpers.

A clusterer follows the scikit-learn estimator shape: ``__init__`` stores parameters, ``fit(X)``
learns ``labels_`` (0..k-1, every row labelled), ``n_clusters_`` and ``centroids_`` (unit
vectors). ``sweep(X, values)`` gives the labels ``fit`` would give for each value of the
method's calibrated parameter, so that calibration can share work between values.

A method is one module defining a ``ClustererSpec`` named ``SPEC`` plus one line in
``CLUSTERERS`` (``lexbuild.senses.registry``, name -> module).
"""

from __future__ import annotations

import sys
from collections.abc import Iterator, Mapping, Sequence
from contextlib import contextmanager
from typing import Any, Protocol, runtime_checkable

import numpy as np
import numpy.typing as npt

from lexbuild.errors import InductionError

__all__ = [
    "Clusterer",
    "assign_to_centroids",
    "blas_threads",
    "merge_small_clusters",
    "normalise_rows",
    "relabel",
    "unit_centroids",
]

FloatArray = npt.NDArray[np.floating[Any]]
IntArray = npt.NDArray[np.intp]

# Rows normalised at once: bounds the float64 temporary (4096 x 768 x 8 bytes = 24 MiB).
_NORMALISE_ROWS = 4096


@runtime_checkable
class Clusterer(Protocol):
    """What induction and calibration need from a clustering method."""

    labels_: IntArray
    n_clusters_: int
    centroids_: npt.NDArray[np.float64]

    def fit(self, X: Any, y: Any = None) -> Any: ...

    def sweep(self, X: Any, values: Sequence[float]) -> list[IntArray]: ...


# ----------------------------------------------------------------------- shared helpers


def in_parallel_worker() -> bool:
    """Whether this process is a Dask worker (its siblings already use the other cores)."""
    distributed = sys.modules.get("distributed")  # never imported here: only looked up
    if distributed is None:
        return False
    try:
        distributed.get_worker()
    except (AttributeError, ValueError):
        return False
    return True


@contextmanager
def blas_threads() -> Iterator[None]:
    """One BLAS thread per process where workers run in parallel, the library default otherwise.

    Worker processes each starting a BLAS thread per core oversubscribe the machine: with the
    other core busy, two BLAS threads made the k-means stage up to 10x slower.
    """
    if not in_parallel_worker():
        yield
        return
    from threadpoolctl import threadpool_limits  # lazily: only inside workers

    with threadpool_limits(limits=1):
        yield


def normalise_rows(X: Any, name: str = "X") -> npt.NDArray[np.float32]:
    """Check shape and values, return L2-normalised float32 rows.

    Each row is divided by its norm in float64 and stored as float32, a chunk of rows at a time:
    the result is the same as normalising the whole array in float64, but the float64 copy never
    exceeds ``_NORMALISE_ROWS`` rows (a whole copy was 5x the input at 40,000 x 768).
    """
    try:
        arr = np.asarray(X)
        if arr.dtype.kind not in "fiub":
            arr = np.asarray(arr, dtype=np.float64)
    except (TypeError, ValueError) as exc:
        raise InductionError(f"{name} is not a numeric array: {exc}") from exc
    if arr.ndim != 2:
        raise InductionError(f"{name} must be 2-D (n_samples, n_features), got {arr.ndim}-D")
    if arr.shape[0] == 0 or arr.shape[1] == 0:
        raise InductionError(f"{name} is empty: shape {arr.shape}")
    out = np.empty(arr.shape, dtype=np.float32)
    zero_rows = 0
    for start in range(0, arr.shape[0], _NORMALISE_ROWS):
        chunk = np.asarray(arr[start : start + _NORMALISE_ROWS], dtype=np.float64)
        if not np.all(np.isfinite(chunk)):
            raise InductionError(f"{name} contains NaN or infinite values")
        norms = np.linalg.norm(chunk, axis=1)
        zero = norms == 0.0
        if zero.any():
            zero_rows += int(zero.sum())
            continue
        out[start : start + _NORMALISE_ROWS] = chunk / norms[:, None]
    if zero_rows:
        # Cosine distance is undefined for a zero vector.
        raise InductionError(f"{name} has {zero_rows} all-zero rows")
    return out


def relabel(labels: npt.ArrayLike) -> IntArray:
    """Renumber labels 0..k-1 in order of first appearance (deterministic output)."""
    arr = np.asarray(labels)
    _, first, inverse = np.unique(arr, return_index=True, return_inverse=True)
    order = np.argsort(first, kind="stable")
    rank = np.empty_like(order)
    rank[order] = np.arange(order.size)
    return rank[inverse.ravel()].astype(np.intp)


def group_sums(X: FloatArray, labels: IntArray, k: int) -> npt.NDArray[np.float64]:
    """Row sums per label 0..k-1 (float64), by sorting and ``np.add.reduceat``.

    ``np.add.at`` on 2-D rows is unbuffered and some 50x slower at a few hundred rows. The rows
    are gathered ``_NORMALISE_ROWS`` at a time and summed in float64: a whole float64 copy of
    a 40,000 x 768 input (and its sorted copy) set the two-stage peak at twice the input.
    """
    sums = np.zeros((k, X.shape[1]), dtype=np.float64)
    if labels.size == 0:
        return sums
    order = np.argsort(labels, kind="stable")
    for start in range(0, order.size, _NORMALISE_ROWS):
        rows = order[start : start + _NORMALISE_ROWS]
        ordered = labels[rows]
        starts = np.flatnonzero(np.r_[True, ordered[1:] != ordered[:-1]])
        # A label cut by the chunk boundary is added in two parts; within a chunk each label
        # appears once in ``ordered[starts]``, so the fancy-indexed += is safe.
        sums[ordered[starts]] += np.add.reduceat(X[rows], starts, axis=0, dtype=np.float64)
    return sums


def unit_centroids(Xn: FloatArray, labels: IntArray, k: int) -> npt.NDArray[np.float64]:
    """L2-normalised mean of each cluster's (already normalised) members."""
    sums = group_sums(Xn, labels, k)
    norms = np.linalg.norm(sums, axis=1, keepdims=True)
    norms[norms == 0.0] = 1.0  # members cancelling out exactly: keep a zero centroid
    return np.asarray(sums / norms)


def merge_small_clusters(
    Xn: npt.NDArray[np.float32], labels: IntArray, min_size: int, min_share: float
) -> IntArray:
    """Clusters under ``max(min_size, min_share * n)`` go into the most similar large one."""
    n = labels.size
    k = int(labels.max()) + 1
    sizes = np.bincount(labels, minlength=k)
    floor = max(min_size, min_share * n)
    large = sizes >= floor
    if large.all():
        return labels
    if not large.any():
        # No cluster has enough support: the largest becomes the only target.
        large[int(np.argmax(sizes))] = True
    cents = unit_centroids(Xn, labels, k)
    sim = cents @ cents[large].T
    target_of_large = np.flatnonzero(large)
    mapping = np.arange(k)
    small = np.flatnonzero(~large)
    mapping[small] = target_of_large[np.argmax(sim[small], axis=1)]
    return relabel(mapping[labels])


def attach_noise(Xn: npt.NDArray[np.float32], labels: npt.ArrayLike) -> IntArray:
    """Labels with every noise point (label -1) given to the cluster of nearest centroid.

    A dictionary sense covers every occurrence of its verb, so noise is not left out; when all
    points are noise they form one cluster.
    """
    arr = np.asarray(labels, dtype=np.intp).copy()
    noise = arr < 0
    if noise.all():
        return np.zeros(arr.size, dtype=np.intp)
    if noise.any():
        kept = relabel(arr[~noise])
        k = int(kept.max()) + 1
        cents = unit_centroids(Xn[~noise], kept, k)
        arr[~noise] = kept
        arr[noise] = np.argmax(Xn[noise] @ cents.T, axis=1)
    return relabel(arr)


def fitted(
    model: Any, Xn: npt.NDArray[np.float32], labels: IntArray
) -> None:
    """Set the fitted attributes every clusterer exposes."""
    model.labels_ = labels
    model.n_clusters_ = int(labels.max()) + 1
    model.centroids_ = unit_centroids(Xn, labels, model.n_clusters_)


def check_common(params: Mapping[str, Any]) -> None:
    if params["min_cluster_size"] < 1:
        raise InductionError("min_cluster_size must be >= 1")
    if not 0.0 <= params["min_cluster_share"] <= 1.0:
        raise InductionError("min_cluster_share must lie in [0, 1]")


def assign_to_centroids(X: Any, centroids: Any) -> IntArray:
    """Label each row of ``X`` with its nearest centroid by cosine similarity.

    Used for occurrences beyond the sampling cap, which are not part of the clustering itself.
    """
    Xn = normalise_rows(X)
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
