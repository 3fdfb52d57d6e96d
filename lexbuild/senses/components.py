"""Components of the graph joining rows within a cosine distance, with far blocks skipped.

Average linkage never merges two sets of rows with no pair within the cut (a merge at height
h joins clusters whose mean pairwise distance is h), so the exact path and the bounded-memory
levels of ``agglomerative`` both start from these components. Finding them takes one pass over
all pairs, the costly part of both (40,000 x 768 rows: 7.0-7.1 s on two cores, printed by
benchmarks/bench_clustering.py). On enough rows, block pairs that cannot hold a close pair are
skipped on a bound that is exact arithmetic, so no close pair is ever missed:

    a . b = Pa . Pb + Ra . Rb <= Pa . Pb + |Ra| |Rb|    (Cauchy-Schwarz)

where ``P`` projects on the 64 leading singular directions of a sample of the rows (uncentred:
the subspace that holds most of their squared length, so the residuals ``R`` are short) and
the bound costs a fraction of the product. Rows are grouped by k-means on their projections
first, so that a block holds similar rows and a far block pair is far throughout. The bound
is used only where it rules out most pairs: of a sample first, then of the first blocks.
"""

from __future__ import annotations

from collections.abc import Iterator
from typing import Literal

import numpy as np
import numpy.typing as npt
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components

from lexbuild.senses.clustering import relabel

__all__ = ["CUT_SLACK", "Directions", "bounding_directions", "threshold_components"]

IntArray = npt.NDArray[np.intp]
#: Directions to bound products on (``bounding_directions``), None for no bound, or "fit" to
#: find them from the rows at hand.
Directions = npt.NDArray[np.float32] | Literal["fit"] | None

#: Elements of the similarity block computed at once (~16 MB of float32): fixes the rows per
#: block, which are also the units the bound skips.
BLOCK_ELEMENTS = 4_000_000
# Pairs this far above the cut still join components: float32 products of unit rows round
# differently in other block shapes (up to ~4e-7), and one join too many is always safe.
CUT_SLACK = 1e-5
# The bound is tried only where the rows make this many blocks at least (and have more than
# twice the projection's columns): fewer, larger blocks each mix several k-means groups, and on
# 5,000-10,000 blob rows (7-25 blocks) the sample showed it would skip nothing, after 0.1-0.25 s
# of directions and grouping (bench_clustering.py's component search; at 20,000 rows, 100
# blocks, it lets 29% of the block pairs through).
_BOUND_MIN_BLOCKS = 64
_PROJECTION_DIM = 64
# k-means groups that order the rows before blocking.
_GROUPS = 64
# Margin for float32 rounding of the bound's terms (64-term products of vectors of length <= 1
# round by well under 1e-5; an estimate, not measured): a larger margin only skips fewer blocks.
_BOUND_SLACK = 1e-4
# Rows sampled to choose the directions and to judge the bound, and the share of the sample's
# pairs it may keep at most to be used.
_BOUND_SAMPLE = 1000
_BOUND_MAX_KEPT = 0.5
# Blocks of rows visited before the bound is judged on the blocks themselves.
_BOUND_TRIAL_BLOCKS = 8


def threshold_components(
    X: npt.NDArray[np.float32],
    cut: float,
    largest_share: float = 1.0,
    directions: Directions = "fit",
) -> IntArray | None:
    """Connected components of the graph joining rows ``i, j`` with ``1 - X_i . X_j <= cut``.

    Rows are normalised occurrence vectors, or the means of such vectors (then ``1 - a . b`` is
    the mean distance between the two groups). Only the joins between components found so far
    are kept, so memory stays O(n + block). Returns None as soon as one component holds more
    than ``largest_share`` of the rows; blocks of rows are visited in a fixed random order, so
    a component that large shows early.
    """
    n = X.shape[0]
    min_similarity = np.float32(1.0 - cut - CUT_SLACK)
    rows = max(1, BLOCK_ELEMENTS // n)
    if isinstance(directions, str):
        directions = bounding_directions(X)
    if directions is not None and (
        not _enough_blocks(n) or not _bound_pays(X, directions, float(min_similarity), rows)
    ):
        directions = None
    blocks: Iterator[tuple[int, int, list[tuple[int, int]]]]
    if directions is None:
        order = np.random.default_rng(0).permutation(n)
        blocks = _growing_blocks(n)
    else:
        order, projected, residual = _grouped_projection(X, directions)
        bound = float(min_similarity) - _BOUND_SLACK
        blocks = _bounded_blocks(projected[order], residual[order], bound, rows)
    X = X[order]
    component = np.arange(n)
    most = largest_share * n
    for a, b, spans in blocks:
        found_rows, found_cols = [], []
        for c0, c1 in spans:
            joining = X[a:b] @ X[c0:c1].T >= min_similarity
            # Most close pairs already share a component: drop them before taking indices.
            joining &= component[a:b, None] != component[None, c0:c1]
            r, c = np.nonzero(joining)
            found_rows.append(r + a)
            found_cols.append(c + c0)
        r = np.concatenate(found_rows) if found_rows else np.empty(0, dtype=np.intp)
        if r.size:
            left, right = component[r], component[np.concatenate(found_cols)]
            joins = coo_matrix((np.ones(left.size, dtype=np.int8), (left, right)), shape=(n, n))
            component = connected_components(joins, directed=False)[1][component]
            if np.bincount(component).max() > most:
                return None
    in_input_order = np.empty(n, dtype=np.intp)
    in_input_order[order] = component
    return relabel(in_input_order)


def _growing_blocks(n: int) -> Iterator[tuple[int, int, list[tuple[int, int]]]]:
    """Rows ``a:b`` with the columns ``a:n``, small first blocks growing to the size limit.

    The rows are in random order, so the first blocks sample every region and a component too
    large to be worth splitting shows at once, for little.
    """
    start, rows_wanted = 0, 32
    while start < n:
        stop = min(n, start + max(1, min(rows_wanted, BLOCK_ELEMENTS // (n - start))))
        rows_wanted *= 2
        yield start, stop, [(start, n)]
        start = stop


def _bounded_blocks(
    projected: npt.NDArray[np.float32],
    residual: npt.NDArray[np.float32],
    min_bound: float,
    rows: int,
) -> Iterator[tuple[int, int, list[tuple[int, int]]]]:
    """Blocks of ``rows`` rows with the column ranges, from the block on, the bound keeps.

    Blocks are visited in a fixed random order (a large component shows early). After
    ``_BOUND_TRIAL_BLOCKS`` blocks, if the bound kept more than ``_BOUND_MAX_KEPT`` of the
    columns it looked at, the rest are multiplied whole.
    """
    n = residual.size
    starts = np.arange(0, n, rows)
    ends = np.minimum(starts + rows, n)
    block_residual = np.maximum.reduceat(residual, starts)
    bounded = True
    multiplied, looked_at = 0, 0
    for visited, block in enumerate(np.random.default_rng(0).permutation(starts.size)):
        a, b = int(starts[block]), int(ends[block])
        if visited == _BOUND_TRIAL_BLOCKS:
            bounded = multiplied <= _BOUND_MAX_KEPT * looked_at
        if not bounded:
            yield a, b, [(a, n)]
            continue
        # Upper bound of every product between this block and each block from it on.
        bound = projected[a:b] @ projected[a:].T
        most_similar = np.maximum.reduceat(bound, starts[block:] - a, axis=1)
        most_similar += residual[a:b, None] * block_residual[None, block:]
        near = block + np.flatnonzero(most_similar.max(axis=0) >= min_bound)
        multiplied += int(np.sum(ends[near] - starts[near]))
        looked_at += n - a
        yield a, b, [(int(starts[f]), int(ends[stop - 1])) for f, stop in _runs(near)]


def _enough_blocks(n: int) -> bool:
    """Whether ``n`` rows make ``_BOUND_MIN_BLOCKS`` blocks, the least the bound pays on."""
    return n // max(1, BLOCK_ELEMENTS // n) >= _BOUND_MIN_BLOCKS


def _runs(blocks: IntArray) -> list[tuple[int, int]]:
    """Consecutive block numbers as half-open (first, stop) ranges, to multiply in one go."""
    if blocks.size == 0:
        return []
    breaks = np.flatnonzero(np.diff(blocks) != 1) + 1
    firsts = blocks[np.r_[0, breaks]]
    lasts = blocks[np.r_[breaks - 1, blocks.size - 1]]
    return [(int(f), int(s) + 1) for f, s in zip(firsts, lasts, strict=True)]


def bounding_directions(X: npt.NDArray[np.float32]) -> npt.NDArray[np.float32] | None:
    """Orthonormal directions (columns) to bound products of rows like ``X``'s on.

    The leading right singular vectors of a fixed random sample of the rows (all rows find
    nearly the same subspace at n times the cost), from the smaller of the sample's two Gram
    matrices. None where the rows are too few or too narrow for the bound to pay. Rows made
    from these (means of groups of them) can use the same directions: the bound holds for any
    orthonormal directions, which only decide how much it skips.
    """
    from scipy.linalg import eigh

    n, d = X.shape
    if not _enough_blocks(n) or d <= 2 * _PROJECTION_DIM:
        return None
    rng = np.random.default_rng(0)
    sample = X[np.sort(rng.choice(n, size=min(n, _BOUND_SAMPLE), replace=False))]
    s = sample.shape[0]
    wide = s < d  # then S S^T is the smaller matrix: its eigenvectors map to S's directions
    gram = (sample @ sample.T if wide else sample.T @ sample).astype(np.float64)
    size = gram.shape[0]
    _, vectors = eigh(gram, subset_by_index=[size - _PROJECTION_DIM, size - 1], driver="evx")
    if wide:
        vectors = sample.T.astype(np.float64) @ vectors
    # Orthonormal to rounding whichever way they came: the bound needs it.
    directions, _ = np.linalg.qr(vectors)
    return np.ascontiguousarray(directions, dtype=np.float32)


def _bound_pays(
    X: npt.NDArray[np.float32],
    directions: npt.NDArray[np.float32],
    min_similarity: float,
    block_rows: int,
) -> bool:
    """Whether the bound skips more than ``1 - _BOUND_MAX_KEPT`` of a sample's block pairs.

    The sample is grouped and blocked as the rows would be, with blocks holding as large a
    share of it as ``block_rows`` of the rows: one close pair keeps a whole block pair, so
    pairs alone promise too much (blobs of noise 1.0 cut at 0.5: 18% of the pairs kept, most
    block pairs). Where it keeps more, grouping and bounding cost more than they save.
    """
    n = X.shape[0]
    rng = np.random.default_rng(1)
    sample = X[np.sort(rng.choice(n, size=min(n, _BOUND_SAMPLE), replace=False))]
    order, projected, residual = _grouped_projection(sample, directions)
    projected, residual = projected[order], residual[order]
    bound = projected @ projected.T
    bound += residual[:, None] * residual[None, :]
    s = sample.shape[0]
    starts = np.arange(0, s, max(1, block_rows * s // n))
    most = np.maximum.reduceat(np.maximum.reduceat(bound, starts, axis=0), starts, axis=1)
    sizes = np.diff(np.r_[starts, s]).astype(np.float64)
    pairs = np.outer(sizes, sizes)
    kept = float(pairs[most >= min_similarity - _BOUND_SLACK].sum() / pairs.sum())
    return kept <= _BOUND_MAX_KEPT


def _residual_lengths(
    X: npt.NDArray[np.float32],
    projected: npt.NDArray[np.float32],
    directions: npt.NDArray[np.float32],
) -> npt.NDArray[np.float32]:
    """Length of each row's part outside the directions.

    From the explicit difference, not from ``|x|^2 - |Px|^2``, which cancels when it is small.
    """
    n, d = X.shape
    residual = np.empty(n, dtype=np.float32)
    step = max(1, BLOCK_ELEMENTS // d)
    for start in range(0, n, step):
        rest = X[start : start + step] - projected[start : start + step] @ directions.T
        residual[start : start + step] = np.linalg.norm(rest, axis=1)
    return residual


def _grouped_projection(
    X: npt.NDArray[np.float32], directions: npt.NDArray[np.float32]
) -> tuple[IntArray, npt.NDArray[np.float32], npt.NDArray[np.float32]]:
    """Row order grouped by k-means on the projections, each row's projection and residual."""
    from sklearn.cluster import KMeans
    from threadpoolctl import threadpool_limits

    projected = X @ directions
    residual = _residual_lengths(X, projected, directions)
    # One thread, like the micro-clusters: k-means' BLAS calls competing with a busy core
    # were up to 10x slower (benchmarks/bench_clustering.py).
    with threadpool_limits(limits=1):
        groups = KMeans(
            n_clusters=min(_GROUPS, X.shape[0]),
            n_init=1,
            init="random",
            max_iter=20,
            random_state=0,
        ).fit_predict(projected)
    return np.argsort(groups, kind="stable"), projected, residual
