"""HDBSCAN (Campello, Moulavi and Sander 2013) from scikit-learn, registered as ``hdbscan``.

Density-based: clusters are the dense regions that persist across density levels, so the number
of senses is not fixed by a cut. It runs on the cosine distances of the occurrence vectors
(``metric="precomputed"``). The calibrated parameter is the smallest cluster HDBSCAN may report,
as a fraction of the verb's occurrences (its ``min_cluster_size`` is
``max(2, min_cluster_size, ceil(fraction * n))``): HDBSCAN's main parameter, and one that scales
with the verb's frequency. ``cluster_selection_epsilon`` is left at 0: with NumPy 2 any other
value raises a TypeError inside scikit-learn 1.9 (scikit-learn issue #33219). Points HDBSCAN
leaves as noise are given to the cluster of nearest centroid: a sense covers every occurrence of
its verb.
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
    attach_noise,
    check_common,
    fitted,
    merge_small_clusters,
    normalise_rows,
)
from lexbuild.senses.registry import ClustererSpec
from lexbuild.senses.settings import InductionSettings

__all__ = ["FRACTIONS", "SPEC", "HdbscanClusterer"]

IntArray = npt.NDArray[np.intp]
#: Constructor defaults come from the one settings object.
_DEFAULTS = InductionSettings()

#: Smallest-cluster fractions swept by calibration.
FRACTIONS: tuple[float, ...] = (0.02, 0.03, 0.05, 0.075, 0.1, 0.15, 0.2, 0.25, 0.3, 0.4)
#: Used when no value is given and calibration is impossible (measured: see README).
DEFAULT_FRACTION = 0.03


class HdbscanClusterer:
    """HDBSCAN on cosine distances, scikit-learn style (see the module docstring)."""

    labels_: IntArray
    n_clusters_: int
    centroids_: npt.NDArray[np.float64]

    def __init__(
        self,
        min_cluster_fraction: float = DEFAULT_FRACTION,
        min_cluster_size: int = _DEFAULTS.min_cluster_size,
        min_cluster_share: float = _DEFAULTS.min_cluster_share,
        min_samples: int | None = None,
    ) -> None:
        self.min_cluster_fraction = min_cluster_fraction
        self.min_cluster_size = min_cluster_size
        self.min_cluster_share = min_cluster_share
        self.min_samples = min_samples

    def get_params(self, deep: bool = True) -> dict[str, Any]:
        return {
            "min_cluster_fraction": self.min_cluster_fraction,
            "min_cluster_size": self.min_cluster_size,
            "min_cluster_share": self.min_cluster_share,
            "min_samples": self.min_samples,
        }

    def _labels(self, Xn: npt.NDArray[np.float32], distances: Any, fraction: float) -> IntArray:
        from sklearn.cluster import HDBSCAN

        if not math.isfinite(fraction) or not 0.0 <= fraction <= 1.0:
            raise InductionError(f"min_cluster_fraction must lie in [0, 1], got {fraction}")
        n = Xn.shape[0]
        smallest = max(2, self.min_cluster_size, math.ceil(fraction * n))
        if n <= smallest:
            return np.zeros(n, dtype=np.intp)
        raw = HDBSCAN(
            min_cluster_size=smallest,
            min_samples=self.min_samples,
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
        fitted(self, Xn, self._labels(Xn, self._distances(Xn), self.min_cluster_fraction))
        return self

    def sweep(self, X: Any, values: Sequence[float]) -> list[IntArray]:
        """Labels for each fraction; the distance matrix is computed once."""
        check_common(self.get_params())
        Xn = normalise_rows(X)
        distances = self._distances(Xn)
        return [self._labels(Xn, distances, float(v)) for v in values]


def _make(settings: InductionSettings, fraction: float) -> HdbscanClusterer:
    return HdbscanClusterer(
        min_cluster_fraction=fraction,
        min_cluster_size=settings.min_cluster_size,
        min_cluster_share=settings.min_cluster_share,
    )


SPEC = ClustererSpec(
    name="hdbscan",
    parameter="min_cluster_fraction",
    description="HDBSCAN (scikit-learn) on cosine distances",
    default=lambda settings: DEFAULT_FRACTION,
    grid=lambda settings: FRACTIONS,
    make=_make,
    params=lambda settings: {
        "min_cluster_size": settings.min_cluster_size,
        "min_cluster_share": settings.min_cluster_share,
    },
)
