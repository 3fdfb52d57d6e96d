"""Affinity propagation (Frey and Dueck 2007) from scikit-learn, registered as
``affinity-propagation``.

Occurrences exchange messages until some of them emerge as exemplars; each exemplar is a sense.
It runs on cosine similarities (``affinity="precomputed"``). The calibrated parameter is the
``preference``, the similarity each point has to itself as a candidate exemplar: the lower it
is, the fewer senses. A run that does not converge (scikit-learn then labels every point -1)
gives one sense. Damping 0.9 rather than scikit-learn's 0.5: oscillations are frequent on
near-duplicate occurrence vectors (common practice; the method's authors suggest raising the
damping when messages oscillate).
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Sequence
from typing import Any

import numpy as np
import numpy.typing as npt

from lexbuild.errors import InductionError
from lexbuild.senses.clustering import (
    attach_noise,
    check_common,
    fitted,
    merge_small_clusters,
    normalise_rows,
)
from lexbuild.senses.registry import ClustererSpec
from lexbuild.senses.settings import InductionSettings

__all__ = ["PREFERENCES", "SPEC", "AffinityPropagationClusterer"]

IntArray = npt.NDArray[np.intp]
#: Constructor defaults come from the one settings object.
_DEFAULTS = InductionSettings()

#: Preferences (cosine similarity scale, so at most 1) swept by calibration.
PREFERENCES: tuple[float, ...] = (
    -8.0, -6.0, -4.0, -3.0, -2.0, -1.5, -1.0, -0.75, -0.5, -0.25, 0.0, 0.25, 0.5
)
#: Used when no value is given and calibration is impossible (measured: see README).
DEFAULT_PREFERENCE = -2.0


class AffinityPropagationClusterer:
    """Affinity propagation on cosine similarities, scikit-learn style."""

    labels_: IntArray
    n_clusters_: int
    centroids_: npt.NDArray[np.float64]

    def __init__(
        self,
        preference: float = DEFAULT_PREFERENCE,
        damping: float = 0.9,
        max_iter: int = 400,
        min_cluster_size: int = _DEFAULTS.min_cluster_size,
        min_cluster_share: float = _DEFAULTS.min_cluster_share,
        random_state: int | None = _DEFAULTS.random_state,
    ) -> None:
        self.preference = preference
        self.damping = damping
        self.max_iter = max_iter
        self.min_cluster_size = min_cluster_size
        self.min_cluster_share = min_cluster_share
        self.random_state = random_state

    def get_params(self, deep: bool = True) -> dict[str, Any]:
        return {
            "preference": self.preference,
            "damping": self.damping,
            "max_iter": self.max_iter,
            "min_cluster_size": self.min_cluster_size,
            "min_cluster_share": self.min_cluster_share,
            "random_state": self.random_state,
        }

    def _labels(self, Xn: npt.NDArray[np.float32], preference: float) -> IntArray:
        from sklearn.cluster import AffinityPropagation
        from sklearn.exceptions import ConvergenceWarning

        if not math.isfinite(preference):
            raise InductionError(f"preference must be a finite number, got {preference}")
        n = Xn.shape[0]
        if n == 1:
            return np.zeros(1, dtype=np.intp)
        similarity = (Xn.astype(np.float64) @ Xn.T.astype(np.float64)).clip(-1.0, 1.0)
        with warnings.catch_warnings():
            # Non-convergence is handled below (one sense), not reported per verb.
            warnings.simplefilter("ignore", ConvergenceWarning)
            raw = AffinityPropagation(
                affinity="precomputed",
                preference=float(preference),
                damping=self.damping,
                max_iter=self.max_iter,
                random_state=self.random_state,
            ).fit_predict(similarity)
        labels = attach_noise(Xn, raw)
        return merge_small_clusters(Xn, labels, self.min_cluster_size, self.min_cluster_share)

    def fit(self, X: Any, y: Any = None) -> AffinityPropagationClusterer:
        check_common(self.get_params())
        if not 0.5 <= self.damping < 1.0:
            raise InductionError(f"damping must lie in [0.5, 1), got {self.damping}")
        Xn = normalise_rows(X)
        fitted(self, Xn, self._labels(Xn, self.preference))
        return self

    def sweep(self, X: Any, values: Sequence[float]) -> list[IntArray]:
        check_common(self.get_params())
        Xn = normalise_rows(X)
        return [self._labels(Xn, float(v)) for v in values]


def _make(settings: InductionSettings, preference: float) -> AffinityPropagationClusterer:
    return AffinityPropagationClusterer(
        preference=preference,
        min_cluster_size=settings.min_cluster_size,
        min_cluster_share=settings.min_cluster_share,
        random_state=settings.random_state,
    )


SPEC = ClustererSpec(
    name="affinity-propagation",
    parameter="preference",
    description="affinity propagation (scikit-learn) on cosine similarities",
    default=lambda settings: DEFAULT_PREFERENCE,
    grid=lambda settings: PREFERENCES,
    make=_make,
    params=lambda settings: {
        "min_cluster_size": settings.min_cluster_size,
        "min_cluster_share": settings.min_cluster_share,
    },
)
