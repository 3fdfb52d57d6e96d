"""HDBSCAN (Campello, Moulavi and Sander 2013) from scikit-learn, registered as ``hdbscan``.

Density-based: clusters are the dense regions that persist across density levels, so the number
of senses is not fixed by a cut. It runs on the cosine distances of the occurrence vectors
(``metric="precomputed"``). The calibrated parameter is ``cluster_selection_epsilon``: clusters
closer than this cosine distance are not split further (0 keeps HDBSCAN's own selection).
The smallest cluster HDBSCAN may report is the smallest sense induction keeps
(``max(min_cluster_size, min_cluster_share * n)``, at least 2). Points HDBSCAN leaves as noise
are given to the cluster of nearest centroid: a sense covers every occurrence of its verb.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

import numpy as np
import numpy.typing as npt

from lexbuild.errors import InductionError
from lexbuild.senses.agglomerative import condensed_cosine
from lexbuild.senses.clustering import (
    ClustererSpec,
    attach_noise,
    check_common,
    fitted,
    merge_small_clusters,
    normalise_rows,
)
from lexbuild.senses.settings import InductionSettings

__all__ = ["EPSILONS", "SPEC", "HdbscanClusterer"]

IntArray = npt.NDArray[np.intp]

#: Values of ``cluster_selection_epsilon`` (cosine distances) swept by calibration.
EPSILONS: tuple[float, ...] = (0.0, 0.05, 0.1, 0.15, 0.2, 0.25, 0.3, 0.35, 0.4, 0.5, 0.6)
#: Used when no value is given and calibration is impossible (measured: see README).
DEFAULT_EPSILON = 0.0


class HdbscanClusterer:
    """HDBSCAN on cosine distances, scikit-learn style (see the module docstring)."""

    labels_: IntArray
    n_clusters_: int
    centroids_: npt.NDArray[np.float64]

    def __init__(
        self,
        cluster_selection_epsilon: float = DEFAULT_EPSILON,
        min_cluster_size: int = 3,
        min_cluster_share: float = 0.05,
        min_samples: int | None = None,
    ) -> None:
        self.cluster_selection_epsilon = cluster_selection_epsilon
        self.min_cluster_size = min_cluster_size
        self.min_cluster_share = min_cluster_share
        self.min_samples = min_samples

    def get_params(self, deep: bool = True) -> dict[str, Any]:
        return {
            "cluster_selection_epsilon": self.cluster_selection_epsilon,
            "min_cluster_size": self.min_cluster_size,
            "min_cluster_share": self.min_cluster_share,
            "min_samples": self.min_samples,
        }

    def _labels(self, Xn: npt.NDArray[np.float32], distances: Any, epsilon: float) -> IntArray:
        from sklearn.cluster import HDBSCAN

        if not math.isfinite(epsilon) or epsilon < 0:
            raise InductionError(f"cluster_selection_epsilon must be >= 0, got {epsilon}")
        n = Xn.shape[0]
        smallest = max(2, self.min_cluster_size, math.ceil(self.min_cluster_share * n))
        if n <= smallest:
            return np.zeros(n, dtype=np.intp)
        raw = HDBSCAN(
            min_cluster_size=smallest,
            min_samples=self.min_samples,
            cluster_selection_epsilon=float(epsilon),
            metric="precomputed",
            allow_single_cluster=True,  # one sense is a valid answer for a verb
            copy=True,
        ).fit_predict(distances)
        labels = attach_noise(Xn, raw)
        return merge_small_clusters(Xn, labels, self.min_cluster_size, self.min_cluster_share)

    def _distances(self, Xn: npt.NDArray[np.float32]) -> npt.NDArray[np.float64]:
        from scipy.spatial.distance import squareform

        return np.asarray(squareform(condensed_cosine(Xn)))

    def fit(self, X: Any, y: Any = None) -> HdbscanClusterer:
        check_common(self.get_params())
        Xn = normalise_rows(X)
        fitted(self, Xn, self._labels(Xn, self._distances(Xn), self.cluster_selection_epsilon))
        return self

    def sweep(self, X: Any, values: Sequence[float]) -> list[IntArray]:
        """Labels for each epsilon; the distance matrix is computed once."""
        check_common(self.get_params())
        Xn = normalise_rows(X)
        distances = self._distances(Xn)
        return [self._labels(Xn, distances, float(v)) for v in values]


def _make(settings: InductionSettings, epsilon: float) -> HdbscanClusterer:
    return HdbscanClusterer(
        cluster_selection_epsilon=epsilon,
        min_cluster_size=settings.min_cluster_size,
        min_cluster_share=settings.min_cluster_share,
    )


SPEC = ClustererSpec(
    name="hdbscan",
    parameter="cluster_selection_epsilon",
    description="HDBSCAN (scikit-learn) on cosine distances",
    default=lambda settings: DEFAULT_EPSILON,
    grid=lambda settings: EPSILONS,
    make=_make,
    params=lambda settings: {
        "min_cluster_size": settings.min_cluster_size,
        "min_cluster_share": settings.min_cluster_share,
    },
)
