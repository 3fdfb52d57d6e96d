"""SenseClusterer: exact path equals scipy, two-stage path tracks the exact one."""

from __future__ import annotations

from typing import Any

import numpy as np
import pytest
from scipy.cluster.hierarchy import fcluster, linkage
from scipy.spatial.distance import pdist
from sklearn.metrics import adjusted_rand_score

from lexbuild.errors import InductionError
from lexbuild.senses.agglomerative import AgglomerativeClusterer as SenseClusterer
from lexbuild.senses.agglomerative import condensed_cosine
from lexbuild.senses.clustering import assign_to_centroids

NO_MERGE: dict[str, Any] = {"min_cluster_size": 1, "min_cluster_share": 0.0}


def _blobs(
    n_per: int, k: int, dim: int, spread: float, random_state: int
) -> tuple[np.ndarray, np.ndarray]:
    """Well-separated directions: orthogonal-ish centres plus small noise."""
    rng = np.random.default_rng(random_state)
    centres = rng.normal(size=(k, dim))
    X = np.repeat(centres, n_per, axis=0) + spread * rng.normal(size=(k * n_per, dim))
    y = np.repeat(np.arange(k), n_per)
    perm = rng.permutation(len(y))
    return X[perm], y[perm]


def test_condensed_matches_scipy_pdist() -> None:
    # Reference: scipy.spatial.distance.pdist(X, "cosine").
    rng = np.random.default_rng(1)
    X = rng.normal(size=(57, 9))
    Xn = (X / np.linalg.norm(X, axis=1, keepdims=True)).astype(np.float32)
    np.testing.assert_allclose(condensed_cosine(Xn), pdist(X, "cosine"), atol=1e-6)


@pytest.mark.parametrize("block_elements", [1, 40, 57 * 3, 10_000])
def test_condensed_blocks_of_every_size_match_scipy_pdist(
    block_elements: int, monkeypatch: pytest.MonkeyPatch
) -> None:
    # Reference: scipy.spatial.distance.pdist(X, "cosine"). Blocks of one row, of rows growing
    # as fewer columns remain, and one block for all rows must give the same condensed vector.
    from lexbuild.senses import agglomerative

    monkeypatch.setattr(agglomerative, "_BLOCK_ELEMENTS", block_elements)
    rng = np.random.default_rng(2)
    X = rng.normal(size=(57, 9))
    Xn = (X / np.linalg.norm(X, axis=1, keepdims=True)).astype(np.float32)
    np.testing.assert_allclose(condensed_cosine(Xn), pdist(X, "cosine"), atol=1e-6)


def test_rows_normalised_in_chunks_equal_one_float64_pass(monkeypatch: pytest.MonkeyPatch) -> None:
    # Chunking bounds memory only: each row is still divided by its float64 norm.
    from lexbuild.senses import clustering

    monkeypatch.setattr(clustering, "_NORMALISE_ROWS", 3)
    rng = np.random.default_rng(3)
    X = rng.normal(size=(11, 5)).astype(np.float32)
    whole = X.astype(np.float64)
    expected = (whole / np.linalg.norm(whole, axis=1, keepdims=True)).astype(np.float32)
    assert np.array_equal(clustering.normalise_rows(X), expected)
    X[9] = 0.0  # a zero row in the last chunk is still reported
    with pytest.raises(InductionError, match="1 all-zero rows"):
        clustering.normalise_rows(X)


@pytest.mark.parametrize("random_state", [0, 1, 2])
@pytest.mark.parametrize("threshold", [0.3, 0.6, 0.9, 1.0, 1.1])
def test_exact_path_equals_scipy_average(random_state: int, threshold: float) -> None:
    # Reference: scipy.cluster.hierarchy.linkage(pdist(X, "cosine"), "average") cut by
    # fcluster(criterion="distance"); compared as partitions (ARI == 1).
    rng = np.random.default_rng(random_state)
    X = rng.normal(size=(120, 16))
    expected = fcluster(linkage(pdist(X, "cosine"), "average"), t=threshold, criterion="distance")
    model = SenseClusterer(threshold=threshold, **NO_MERGE).fit(X)
    assert adjusted_rand_score(expected, model.labels_) == 1.0
    assert model.n_clusters_ == len(set(expected))


@pytest.mark.parametrize("threshold", [0.8, 1.2])
def test_ward_path_equals_scipy_ward(threshold: float) -> None:
    # Reference: scipy linkage(..., "ward") on L2-normalised rows in euclidean space.
    rng = np.random.default_rng(7)
    X = rng.normal(size=(80, 8))
    Xn = X / np.linalg.norm(X, axis=1, keepdims=True)
    expected = fcluster(linkage(Xn, "ward"), t=threshold, criterion="distance")
    model = SenseClusterer(threshold=threshold, linkage="ward", **NO_MERGE).fit(X)
    assert adjusted_rand_score(expected, model.labels_) == 1.0


def test_labels_numbered_by_first_appearance() -> None:
    X, _ = _blobs(20, 4, 32, 0.1, random_state=3)
    labels = SenseClusterer(threshold=0.5, **NO_MERGE).fit(X).labels_
    seen: list[int] = []
    for lab in labels:
        if lab not in seen:
            seen.append(int(lab))
    assert seen == list(range(len(seen)))


def test_centroids_are_normalised_member_means() -> None:
    X, _ = _blobs(15, 3, 24, 0.2, random_state=4)
    model = SenseClusterer(threshold=0.5, **NO_MERGE).fit(X)
    Xn = X / np.linalg.norm(X, axis=1, keepdims=True)
    for k in range(model.n_clusters_):
        mean = Xn[model.labels_ == k].mean(axis=0)
        np.testing.assert_allclose(model.centroids_[k], mean / np.linalg.norm(mean), atol=1e-5)
    np.testing.assert_array_equal(assign_to_centroids(X, model.centroids_), model.labels_)


def test_two_stage_tracks_exact_on_separated_blobs() -> None:
    X, y = _blobs(300, 6, 48, 0.15, random_state=5)
    exact = SenseClusterer(threshold=0.5, **NO_MERGE).fit(X)
    two = SenseClusterer(threshold=0.5, exact_max=500, n_micro=64, **NO_MERGE).fit(X)
    assert adjusted_rand_score(exact.labels_, two.labels_) >= 0.98
    assert adjusted_rand_score(y, two.labels_) >= 0.98


def test_two_stage_single_group_cut() -> None:
    # A threshold above every distance joins all micro-clusters.
    X, _ = _blobs(100, 3, 16, 0.2, random_state=6)
    model = SenseClusterer(threshold=2.0, exact_max=50, n_micro=20, **NO_MERGE).fit(X)
    assert model.n_clusters_ == 1


@pytest.mark.parametrize("exact_max", [20000, 1])
def test_deterministic_for_random_state(exact_max: int) -> None:
    X, _ = _blobs(100, 4, 20, 0.3, random_state=8)
    params: dict[str, Any] = {"exact_max": exact_max, "n_micro": 30, "refine_max": 100}
    a = SenseClusterer(threshold=0.6, random_state=11, **params).fit(X)
    b = SenseClusterer(threshold=0.6, random_state=11, **params).fit(X)
    np.testing.assert_array_equal(a.labels_, b.labels_)
    np.testing.assert_array_equal(a.centroids_, b.centroids_)


def test_small_clusters_merge_into_nearest_large() -> None:
    rng = np.random.default_rng(9)
    dim = 12
    a, b = np.eye(dim)[0], np.eye(dim)[1]
    near_a = a + 0.6 * np.eye(dim)[2]  # its own cluster at a tight cut, but closest to a
    X = np.vstack(
        [
            a + 0.01 * rng.normal(size=(40, dim)),
            b + 0.01 * rng.normal(size=(40, dim)),
            near_a + 0.01 * rng.normal(size=(2, dim)),
        ]
    )
    unmerged = SenseClusterer(threshold=0.1, **NO_MERGE).fit(X)
    assert unmerged.n_clusters_ == 3
    merged = SenseClusterer(threshold=0.1, min_cluster_size=3, min_cluster_share=0.0).fit(X)
    assert merged.n_clusters_ == 2
    assert set(merged.labels_[80:]) == {merged.labels_[0]}
    # Share-based floor: 5% of 82 points is 4.1, so the 2-point cluster is small too.
    shared = SenseClusterer(threshold=0.1, min_cluster_size=1, min_cluster_share=0.05).fit(X)
    assert shared.n_clusters_ == 2


def test_no_large_cluster_keeps_the_largest() -> None:
    rng = np.random.default_rng(10)
    X = rng.normal(size=(10, 30))
    model = SenseClusterer(threshold=0.05, min_cluster_size=50).fit(X)
    assert model.n_clusters_ == 1
    assert model.labels_.tolist() == [0] * 10


def test_single_point() -> None:
    model = SenseClusterer().fit([[1.0, 2.0]])
    assert model.labels_.tolist() == [0]
    assert model.n_clusters_ == 1


def test_fit_returns_self_and_init_stores_only() -> None:
    model = SenseClusterer(threshold=0.3)
    assert not hasattr(model, "labels_")
    assert model.fit(np.eye(4) + 0.1) is model


@pytest.mark.parametrize(
    "bad",
    [np.empty((0, 3)), np.array([1.0, 2.0]), np.array([[1.0, np.nan]]), np.zeros((2, 3))],
)
def test_invalid_input_raises(bad: np.ndarray) -> None:
    with pytest.raises(InductionError):
        SenseClusterer().fit(bad)


@pytest.mark.parametrize(
    "params", [{"metric": "euclidean"}, {"linkage": "single"}, {"threshold": -1.0}]
)
def test_invalid_params_raise(params: dict[str, object]) -> None:
    with pytest.raises(InductionError):
        SenseClusterer(**params).fit(np.eye(3) + 0.1)  # type: ignore[arg-type]


def test_assign_dimension_mismatch() -> None:
    with pytest.raises(InductionError):
        assign_to_centroids(np.ones((2, 3)), np.ones((2, 4)))


def _spy(monkeypatch: pytest.MonkeyPatch, owner: Any, name: str) -> list[Any]:
    """Results of every call of ``owner.name``, which still runs (a recorder, not a mock)."""
    results: list[Any] = []
    real = getattr(owner, name)

    def recorded(*args: Any) -> Any:
        results.append(real(*args))
        return results[-1]

    monkeypatch.setattr(owner, name, recorded)
    return results


def _overlapping(n: int, dim: int, k: int, random_state: int) -> np.ndarray:
    """Blobs whose spread equals their centres' norm: cosine distance ~0.5 inside a blob, so
    a cut near 0.5 runs through the blobs (the hard case for the two-stage path)."""
    rng = np.random.default_rng(random_state)
    centres = rng.normal(size=(k, dim))
    return centres[rng.integers(0, k, size=n)] + rng.normal(size=(n, dim))


@pytest.mark.parametrize("threshold", [0.6, 0.9])
def test_group_average_merges_from_points_equal_scipy_average(threshold: float) -> None:
    # Reference: scipy.cluster.hierarchy.linkage(pdist(X, "cosine"), "average"): the same
    # heights (float32 rounding) and the same partition at a cut.
    from lexbuild.senses.agglomerative import _group_average_merges, _labels_from_merges

    rng = np.random.default_rng(12)
    X = rng.normal(size=(150, 12))
    Xn = X / np.linalg.norm(X, axis=1, keepdims=True)
    Z = linkage(pdist(X, "cosine"), "average")
    merges = _group_average_merges(Xn, np.ones(150))
    np.testing.assert_allclose(np.sort(merges[:, 2]), np.sort(Z[:, 2]), atol=1e-6)
    cut = _labels_from_merges(_group_average_merges(Xn, np.ones(150), threshold), 150)
    expected = fcluster(Z, t=threshold, criterion="distance")
    assert adjusted_rand_score(expected, cut) == 1.0


def test_rejoining_exact_nodes_gives_the_exact_cut() -> None:
    # Reference: scipy average linkage. Starting from clusters that are nodes of the exact tree
    # (its cut at 0.4), group-average linkage from their sums and sizes reproduces the cut at
    # 0.7: the reason the two-stage pieces rejoin exactly.
    from lexbuild.senses.agglomerative import _group_average_merges, _labels_from_merges
    from lexbuild.senses.clustering import group_sums, relabel

    X = _overlapping(300, 32, 3, random_state=13)
    Xn = X / np.linalg.norm(X, axis=1, keepdims=True)
    Z = linkage(pdist(X, "cosine"), "average")
    pieces = relabel(fcluster(Z, t=0.4, criterion="distance"))
    m = int(pieces.max()) + 1
    assert 20 < m < 300  # pieces really are groups, not single points
    sizes = np.bincount(pieces).astype(np.float64)
    merges = _group_average_merges(group_sums(Xn, pieces, m), sizes, stop_above=0.7)
    joined = _labels_from_merges(merges, m)[pieces]
    assert adjusted_rand_score(fcluster(Z, t=0.7, criterion="distance"), joined) == 1.0


def test_refinement_groups_partition_the_leaves_within_the_budget() -> None:
    from lexbuild.senses.agglomerative import refinement_groups

    rng = np.random.default_rng(14)
    leaf_points = rng.integers(1, 30, size=40).astype(np.float64)
    tree = linkage(rng.normal(size=(40, 5)), "average")
    group, refine = refinement_groups(tree, leaf_points, refine_max=100)
    assert all(refine) and set(group.tolist()) == set(range(len(refine)))
    loads = np.bincount(group, weights=leaf_points)
    assert loads.max() <= 100
    # Packed: no two consecutive groups would fit in the budget together.
    assert all(loads[g] + loads[g + 1] > 100 for g in range(len(loads) - 1))


@pytest.mark.parametrize("random_state", [0, 1, 2])
def test_approximation_is_faithful_on_overlapping_blobs(random_state: int) -> None:
    # Reference: the exact path (itself checked against scipy above). With a subtree budget of a
    # quarter of the points the approximation (Ward's path, and average linkage's fallback)
    # really approximates (several subtrees, pieces rejoined); cut at the blobs' own spread
    # (0.5) exact gives ~70-110 clusters.
    from lexbuild.senses.clustering import normalise_rows

    X = _overlapping(600, 64, 4, random_state)
    for threshold in (0.5, 0.6, 0.8):
        exact = SenseClusterer(threshold=threshold, **NO_MERGE).fit(X)
        approximate = SenseClusterer(
            threshold=threshold, exact_max=1, refine_max=150, n_micro=32, **NO_MERGE
        )._fit_approximate(normalise_rows(X))
        assert adjusted_rand_score(exact.labels_, approximate) >= 0.95, threshold


@pytest.mark.parametrize("random_state", [0, 1, 4])
def test_approximation_refines_every_micro_cluster_under_a_small_budget(random_state: int) -> None:
    # Three micro-clusters asked for 1,800 points with a subtree budget of 20: k-means would
    # give micro-clusters of 600-1,200 points, each too large to be clustered exactly (kept
    # whole, ARI 0.33-0.57 against exact before). They are made small enough to be refined,
    # and the separated blobs come out as exact finds them (exact: checked against scipy above).
    from lexbuild.senses.clustering import normalise_rows

    X, y = _blobs(300, 6, 48, 0.15, random_state=random_state)
    model = SenseClusterer(
        threshold=0.5, exact_max=1, refine_max=20, n_micro=3, random_state=random_state,
        **NO_MERGE,
    )
    _, _, sizes = model._micro_clusters(normalise_rows(X))
    assert sizes.max() <= 20
    exact = SenseClusterer(threshold=0.5, **NO_MERGE).fit(X)
    assert adjusted_rand_score(y, exact.labels_) == 1.0
    approximate = model._fit_approximate(normalise_rows(X))
    assert adjusted_rand_score(exact.labels_, approximate) == 1.0


def test_two_stage_ward_tracks_exact_on_separated_blobs() -> None:
    X, y = _blobs(100, 4, 32, 0.15, random_state=15)
    exact = SenseClusterer(threshold=1.0, linkage="ward", **NO_MERGE).fit(X)
    two = SenseClusterer(
        threshold=1.0, linkage="ward", exact_max=1, refine_max=120, n_micro=24, **NO_MERGE
    ).fit(X)
    assert adjusted_rand_score(y, exact.labels_) == 1.0
    assert adjusted_rand_score(exact.labels_, two.labels_) == 1.0


def test_one_blas_thread_inside_a_parallel_worker(monkeypatch: pytest.MonkeyPatch) -> None:
    # threadpoolctl reports the BLAS pools; inside a worker they run one thread, outside the
    # library default is left alone.
    from threadpoolctl import threadpool_info

    from lexbuild.senses import clustering

    def blas() -> list[int]:
        return [p["num_threads"] for p in threadpool_info() if p["user_api"] == "blas"]

    assert not clustering.in_parallel_worker()  # pytest is no Dask worker
    outside = blas()
    with clustering.blas_threads():
        assert blas() == outside
    monkeypatch.setattr(clustering, "in_parallel_worker", lambda: True)
    with clustering.blas_threads():
        assert blas() and set(blas()) == {1}
    assert blas() == outside


@pytest.mark.parametrize(("cut", "k"), [(0.1, 14), (0.2, 5), (0.9, 1)])
def test_threshold_components_are_the_single_linkage_clusters(
    cut: float, k: int, monkeypatch: pytest.MonkeyPatch
) -> None:
    # Reference: scipy single linkage cut at t (fcluster "distance") gives the connected
    # components of the graph of pairs within t. Small blocks make the joins span many blocks.
    from lexbuild.senses import agglomerative, components

    monkeypatch.setattr(components, "BLOCK_ELEMENTS", 300)
    X, _ = _blobs(30, 5, 16, 0.3, random_state=21)
    Xn = (X / np.linalg.norm(X, axis=1, keepdims=True)).astype(np.float32)
    expected = fcluster(linkage(pdist(Xn.astype(np.float64), "cosine"), "single"), t=cut,
                        criterion="distance")
    found = agglomerative.threshold_components(Xn, cut)
    assert found is not None
    assert adjusted_rand_score(expected, found) == 1.0
    assert len(set(expected)) == k  # (k read from scipy: the low cuts really split)


def test_threshold_components_give_up_on_one_large_component() -> None:
    from lexbuild.senses.agglomerative import threshold_components

    X, _ = _blobs(40, 2, 16, 0.1, random_state=22)
    Xn = (X / np.linalg.norm(X, axis=1, keepdims=True)).astype(np.float32)
    assert threshold_components(Xn, 1.9, largest_share=0.8) is None  # one component
    split = threshold_components(Xn, 0.3, largest_share=0.8)  # two blobs of half each
    assert split is not None and int(split.max()) == 1


@pytest.mark.parametrize("random_state", [0, 1])
@pytest.mark.parametrize("threshold", [0.3, 0.6, 1.0])
def test_exact_path_split_into_components_equals_scipy_average(
    random_state: int, threshold: float, monkeypatch: pytest.MonkeyPatch
) -> None:
    # Reference: scipy.cluster.hierarchy.linkage(pdist(X, "cosine"), "average") cut by
    # fcluster; the exact path here splits the rows into components first (a few blobs, some
    # overlapping at the higher cuts: at 0.3 they make 5-6 components, from 0.6 on one holds
    # more than 80% and the path keeps one tree), fit and sweep alike.
    from lexbuild.senses import agglomerative

    monkeypatch.setattr(agglomerative, "_SPLIT_MIN_ROWS", 2)
    X, _ = _blobs(40, 6, 16, 0.5, random_state=random_state)
    expected = fcluster(linkage(pdist(X, "cosine"), "average"), t=threshold, criterion="distance")
    model = SenseClusterer(threshold=threshold, **NO_MERGE)
    assert adjusted_rand_score(expected, model.fit(X).labels_) == 1.0
    low = fcluster(linkage(pdist(X, "cosine"), "average"), t=threshold / 2, criterion="distance")
    swept = model.sweep(X, [threshold / 2, threshold])
    assert adjusted_rand_score(low, swept[0]) == 1.0
    assert adjusted_rand_score(expected, swept[1]) == 1.0


@pytest.mark.parametrize("random_state", [0, 1, 2])
def test_levels_equal_scipy_average_under_a_small_budget(
    random_state: int, monkeypatch: pytest.MonkeyPatch
) -> None:
    # Reference: scipy.cluster.hierarchy.linkage(pdist(X, "cosine"), "average") cut at t. With
    # 600 overlapping points and a budget of 60 no tree may hold a tenth of them, so the exact
    # clusters come from several levels of exact nodes; cut at the blobs' own spread the
    # largest exact cluster outgrows the budget.
    from lexbuild.senses import agglomerative

    levels = _spy(monkeypatch, agglomerative, "_lower_cut")
    X = _overlapping(600, 64, 4, random_state)
    Z = linkage(pdist(X.astype(np.float64), "cosine"), "average")
    for threshold in (0.5, 0.6, 0.8):
        levels.clear()
        model = SenseClusterer(threshold=threshold, exact_max=1, refine_max=60, **NO_MERGE)
        found = model.fit(X).labels_
        expected = fcluster(Z, t=threshold, criterion="distance")
        assert adjusted_rand_score(expected, found) == 1.0, threshold
        assert not model.approximate_
        assert len(levels) >= 2, threshold  # the levels really ran
        assert np.bincount(expected).max() > 60 or threshold == 0.5


@pytest.mark.filterwarnings("ignore:Number of distinct clusters")  # k-means on the copies
def test_levels_fall_back_to_the_approximation_when_they_cannot_shrink() -> None:
    # 100 copies of one row with a budget of 40: at any cut above 0 they make one component of
    # 100 rows, so no level fits and the approximation clusters them (into one cluster, as
    # exact does; the blobs as exact finds them: scipy-checked above).
    from lexbuild.senses.clustering import normalise_rows

    X, _ = _blobs(40, 3, 16, 0.1, random_state=23)
    X = np.vstack([X, np.repeat(X[:1], 100, axis=0)])
    model = SenseClusterer(threshold=0.3, exact_max=1, refine_max=40, n_micro=8, **NO_MERGE)
    assert model._fit_levels(normalise_rows(X)) is None
    exact = SenseClusterer(threshold=0.3, **NO_MERGE).fit(X).labels_
    assert adjusted_rand_score(exact, model.fit(X).labels_) == 1.0
    assert model.approximate_  # and fit says so


def test_levels_give_up_when_a_level_over_many_pieces_barely_shrinks(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    # The overlapping blobs cut at their own spread: the first level keeps 576 of 600 pieces.
    # Over few pieces the levels go on (exact: test above); counted as many, they give up
    # rather than pay pass after pass, and the approximation takes over.
    from lexbuild.senses import agglomerative
    from lexbuild.senses.clustering import normalise_rows

    X = normalise_rows(_overlapping(600, 64, 4, random_state=0))
    model = SenseClusterer(threshold=0.5, exact_max=1, refine_max=60, **NO_MERGE)
    assert model._fit_levels(X) is not None
    monkeypatch.setattr(agglomerative, "_LEVEL_PATIENT_MAX", 100)
    assert model._fit_levels(X) is None
    assert model.fit(X).approximate_


@pytest.mark.parametrize("cut", [0.3, 0.6])
def test_bounded_components_are_the_single_linkage_clusters(
    cut: float, monkeypatch: pytest.MonkeyPatch
) -> None:
    # Reference: scipy single linkage cut at t gives the components of the graph of pairs
    # within t. 4,008 rows of 200 columns in blocks of 49 rows (82 blocks) take the bound that
    # skips far blocks (checked: the grouping it needs ran, and most block pairs were skipped);
    # no close pair may be missed.
    from lexbuild.senses import components

    grouped = _spy(monkeypatch, components, "_grouped_projection")
    runs = _spy(monkeypatch, components, "_runs")
    monkeypatch.setattr(components, "BLOCK_ELEMENTS", 200_000)  # blocks of 49 rows
    X, _ = _blobs(500, 8, 200, 0.5, random_state=24)
    # A few rows halfway between two blobs join them at the higher cut only.
    X = np.vstack([X, X[:8] + X[500:508]])
    Xn = (X / np.linalg.norm(X, axis=1, keepdims=True)).astype(np.float32)
    expected = fcluster(
        linkage(pdist(Xn.astype(np.float64), "cosine"), "single"), t=cut, criterion="distance"
    )
    found = components.threshold_components(Xn, cut)
    assert grouped
    rows = components.BLOCK_ELEMENTS // len(X)
    blocks = -(-len(X) // rows)
    multiplied = sum(stop - first for spans in runs for first, stop in spans)
    assert 0 < multiplied < blocks * (blocks + 1) // 2 // 2  # most were skipped
    assert found is not None
    assert adjusted_rand_score(expected, found) == 1.0
    assert 1 < len(set(expected)) < len(expected)  # (from scipy: the cuts really split)
