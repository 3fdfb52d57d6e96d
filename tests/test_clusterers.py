"""The clusterer registry and the two density/exemplar methods, against scikit-learn itself.

References: ``sklearn.cluster.HDBSCAN`` with ``metric="cosine"`` and
``sklearn.cluster.AffinityPropagation`` on ``sklearn.metrics.pairwise.cosine_similarity``,
compared as partitions (adjusted Rand index 1).
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pytest
from sklearn.cluster import HDBSCAN, AffinityPropagation
from sklearn.metrics import adjusted_rand_score
from sklearn.metrics.pairwise import cosine_similarity

from lexbuild.errors import InductionError
from lexbuild.senses.affinity import AffinityPropagationClusterer
from lexbuild.senses.clustering import Clusterer
from lexbuild.senses.hdbscan import HdbscanClusterer
from lexbuild.senses.registry import CLUSTERERS, get_clusterer
from lexbuild.senses.settings import InductionSettings

NO_MERGE: dict[str, Any] = {"min_cluster_size": 1, "min_cluster_share": 0.0}


def _directions(n_per: int, k: int, dim: int, spread: float, random_state: int) -> np.ndarray:
    rng = np.random.default_rng(random_state)
    centres = rng.normal(size=(k, dim))
    X = np.repeat(centres, n_per, axis=0) + spread * rng.normal(size=(k * n_per, dim))
    return X[rng.permutation(len(X))]


@pytest.mark.parametrize("name", list(CLUSTERERS))
def test_every_registered_method_fits_and_sweeps(name: str) -> None:
    spec = get_clusterer(name)
    settings = InductionSettings()
    X = _directions(30, 3, 12, 0.3, 0)
    model = spec.make(settings, spec.default(settings)).fit(X)
    assert isinstance(model, Clusterer)
    assert model.labels_.shape == (90,) and model.labels_.min() == 0
    assert model.centroids_.shape == (model.n_clusters_, 12)
    np.testing.assert_allclose(np.linalg.norm(model.centroids_, axis=1), 1.0, atol=1e-9)
    grid = spec.grid(settings)[:4]
    swept = spec.make(settings, grid[0]).sweep(X, grid)
    for value, labels in zip(grid, swept, strict=True):
        np.testing.assert_array_equal(labels, spec.make(settings, value).fit(X).labels_)


def test_unknown_method_names_the_known_ones() -> None:
    with pytest.raises(InductionError, match="agglomerative, hdbscan, affinity-propagation"):
        get_clusterer("kmeans")


@pytest.mark.parametrize("random_state", [0, 1])
def test_hdbscan_equals_scikit_learn_on_its_clustered_points(random_state: int) -> None:
    X = _directions(40, 4, 16, 0.6, random_state)
    reference = HDBSCAN(
        min_cluster_size=5, metric="cosine", allow_single_cluster=True, copy=True
    ).fit(X)
    ours = HdbscanClusterer(min_cluster_fraction=0.0, min_cluster_size=5, min_cluster_share=0.0)
    ours.fit(X)
    kept = reference.labels_ >= 0
    assert kept.sum() > 100  # the comparison is not vacuous
    assert adjusted_rand_score(reference.labels_[kept], ours.labels_[kept]) == 1.0
    # Noise goes to the cluster of nearest centroid: every point has a sense.
    assert ours.labels_.min() == 0
    noise = np.flatnonzero(~kept)
    if noise.size:
        Xn = X / np.linalg.norm(X, axis=1, keepdims=True)
        nearest = np.argmax(Xn[noise] @ ours.centroids_.T, axis=1)
        assert (nearest == ours.labels_[noise]).mean() > 0.8  # centroids move once they join


def test_hdbscan_larger_smallest_cluster_gives_fewer_senses() -> None:
    X = _directions(40, 6, 16, 0.5, 3)
    counts = [
        len(set(labels.tolist()))
        for labels in HdbscanClusterer(min_cluster_size=2).sweep(X, [0.02, 0.2, 0.5])
    ]
    assert counts[0] >= counts[1] >= counts[2] and counts[0] > counts[2]


@pytest.mark.parametrize("preference", [-2.0, -0.5, 0.3])
def test_affinity_propagation_equals_scikit_learn(preference: float) -> None:
    X = _directions(25, 4, 10, 0.5, 7)
    S = cosine_similarity(X)
    reference = AffinityPropagation(
        affinity="precomputed", preference=preference, damping=0.9, max_iter=400,
        random_state=0,
    ).fit(S)
    ours = AffinityPropagationClusterer(preference=preference, **NO_MERGE).fit(X)
    assert adjusted_rand_score(reference.labels_, ours.labels_) == pytest.approx(1.0)


def test_affinity_preference_orders_the_number_of_senses() -> None:
    X = _directions(30, 5, 10, 0.6, 2)
    swept = AffinityPropagationClusterer(**NO_MERGE).sweep(X, [-6.0, -1.0, 0.5])
    counts = [len(set(labels.tolist())) for labels in swept]
    assert counts[0] <= counts[1] <= counts[2] and counts[0] < counts[2]


@pytest.mark.parametrize(
    "make",
    [
        lambda: HdbscanClusterer(min_cluster_fraction=-0.1),
        lambda: AffinityPropagationClusterer(damping=0.2),
        lambda: AffinityPropagationClusterer(preference=float("nan")),
    ],
)
def test_invalid_parameters_raise(make: Any) -> None:
    with pytest.raises(InductionError):
        make().fit(np.eye(4) + 0.1)
