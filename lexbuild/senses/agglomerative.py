"""Agglomerative clustering of occurrence vectors (average or Ward linkage), registered as
``agglomerative``.

``AgglomerativeClusterer`` follows the scikit-learn estimator shape: ``__init__`` stores
parameters, ``fit`` learns ``labels_``, ``n_clusters_`` and ``centroids_``. Up to ``exact_max``
points the full tree is built on cosine distances. Beyond that no tree is built over more than
``refine_max`` rows: average linkage stays exact by levels (clusters at lower cuts, which are
nodes of the exact tree, become the pieces of the next level); Ward, and average linkage where
the levels cannot come down to the budget, take an approximation (k-means micro-clusters, a
tree over them, exact clustering inside its subtrees, exact group-average linkage between the
pieces). The calibrated parameter is the height at which the tree is cut: a cosine distance
for average linkage, a Ward height on unit vectors in euclidean space for Ward.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import numpy.typing as npt
from scipy.cluster.hierarchy import fcluster

from lexbuild.errors import InductionError
from lexbuild.senses.clustering import (
    blas_threads,
    check_common,
    fitted,
    group_sums,
    merge_small_clusters,
    normalise_rows,
    relabel,
)
from lexbuild.senses.components import (
    CUT_SLACK,
    Directions,
    bounding_directions,
    threshold_components,
)
from lexbuild.senses.registry import ClustererSpec
from lexbuild.senses.settings import InductionSettings

__all__ = [
    "AVERAGE_THRESHOLDS",
    "SPEC",
    "WARD_THRESHOLDS",
    "AgglomerativeClusterer",
    "condensed_cosine",
    "refinement_groups",
    "threshold_components",
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
# Passes of the approximation at most: the second starts from the clusters of the first.
_MAX_PASSES = 3
# The bounded-memory exact path: levels at most before it gives way to the approximation,
# pieces sampled to choose each level's cut, and the share of the budget aimed at.
_MAX_LEVELS = 16
_LEVEL_SAMPLE = 2000
_LEVEL_SHARE = 0.5
# A level over more pieces than the second number must leave at most the first share of them
# (the real vectors of bench_clustering.py --real, counted apart: 0.54-0.86): below, passes are
# cheap (20,000 x 768 rows: about 1.5 s) and slow levels may go on.
_LEVEL_MIN_SHRINK = 0.9
_LEVEL_PATIENT_MAX = 20_000
# Micro-clusters per subtree budget at least (their mean size is then an eighth of it; on
# single verbs forced to budgets of 20-60 rows the lowest ARI against exact went from -0.02,
# when micro-clusters could exceed the budget, to 0.75: bench_clustering.py --real), and
# rounds of splitting a micro-cluster still over the budget.
_MICRO_PER_BUDGET = 8
_MAX_SPLIT_ROUNDS = 3
# Pieces rejoined at most, as a share of refine_max (their float32 matrix then takes as much
# memory as a refined subtree's condensed float64 distances).
_PIECE_SHARE = 1.0
# Rows of the similarity block computed at once: bounds the temporary to ~16 MB of float32
# (at 20,000 rows the condensed float64 matrix alone is 1.49 GiB, so every MiB counts).
_BLOCK_ELEMENTS = 4_000_000
# The exact average-linkage path splits its rows into the components of the graph of pairs
# within the cut (``threshold_components``) from this many rows on: below, one tree is cheap.
_SPLIT_MIN_ROWS = 2000
# ... and gives up splitting once one component holds more than this share of the rows: the
# trees over the parts then save less than the pass that found them cost.
_SPLIT_LARGEST_SHARE = 0.8


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


class _Forest:
    """Average-linkage trees of the parts of the rows, cut like one tree up to ``top``.

    The parts are components of the graph of pairs within ``top`` (or all rows as one part):
    the tree of all rows has no merge at or below ``top`` across two parts.
    """

    def __init__(
        self,
        parts: list[IntArray],
        trees: list[npt.NDArray[np.float64] | None],
        n: int,
        top: float,
    ) -> None:
        self.parts = parts
        self.trees = trees
        self.n = n
        self.top = top

    def heights(self) -> npt.NDArray[np.float64]:
        """Merge heights of all trees (those across parts, all above ``top``, are missing)."""
        found = [t[:, 2] for t in self.trees if t is not None]
        return np.concatenate(found) if found else np.empty(0)

    def cut(self, t: float) -> IntArray:
        """Labels of fcluster(tree, t, "distance") on the tree of all rows."""
        if t > self.top:
            raise ValueError(f"a forest split at {self.top} cannot be cut at {t}")
        labels = np.empty(self.n, dtype=np.intp)
        next_label = 0
        for members, tree in zip(self.parts, self.trees, strict=True):
            if tree is None:
                sub = np.zeros(members.size, dtype=np.intp)
            else:
                sub = relabel(fcluster(tree, t=t, criterion="distance"))
            labels[members] = next_label + sub
            next_label += int(sub.max()) + 1
        return relabel(labels)


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


def _group_average_merges(
    sums: npt.NDArray[np.float64], sizes: npt.NDArray[np.float64], stop_above: float = np.inf
) -> npt.NDArray[np.float64]:
    """Average linkage between groups of normalised points, as scipy linkage rows.

    Row ``r`` of the result merges nodes ``a`` and ``b`` (0..m-1 the groups, ``m + r`` the node
    made by row ``r``) at ``height`` into ``points`` points. The mean cosine distance over
    member pairs of groups i, j is ``1 - dot(sum_i, sum_j) / (n_i n_j)``, so the start matrix is
    exact (to float32 rounding, as in the exact path); merges use the size-weighted
    Lance-Williams update, which is exact for average linkage. Merging stops before the first
    height above ``stop_above`` (fcluster's 'distance' criterion joins merges of height <= t).
    """
    m = sizes.size
    merges = np.empty((max(m - 1, 0), 4))
    if m < 2:
        return merges
    # float32 like the exact kernel: the matrix is as large as a refined subtree's distances.
    means = (sums / sizes[:, None]).astype(np.float32)
    dist = means @ means.T
    np.subtract(1.0, dist, out=dist)
    np.clip(dist, 0.0, 2.0, out=dist)
    np.fill_diagonal(dist, np.inf)
    sizes = sizes.astype(np.float64).copy()
    node = np.arange(m)  # scipy id of the cluster held in each row
    nearest = np.argmin(dist, axis=1)
    nearest_dist = dist[np.arange(m), nearest]
    # A row whose nearest cluster merged keeps its old distance as a lower bound (average
    # linkage is reducible: a merged cluster is no nearer than the nearer of its parts) and is
    # rescanned only when it comes out on top, as in Muellner's generic algorithm.
    verified = np.ones(m, dtype=bool)
    # inf for merged-away clusters, 0 otherwise: added to a row, it hides them (cheaper than
    # writing inf down their columns).
    gone = np.zeros(m, dtype=dist.dtype)
    done = 0
    for step in range(m - 1):
        while True:
            i = int(np.argmin(nearest_dist))
            if verified[i]:
                break
            row = dist[i] + gone
            nearest[i] = int(np.argmin(row))
            nearest_dist[i] = row[nearest[i]]
            verified[i] = True
        j = int(nearest[i])
        height = float(nearest_dist[i])
        if not height <= stop_above:
            break
        i, j = min(i, j), max(i, j)
        ni, nj = float(sizes[i]), float(sizes[j])
        merges[step] = (node[i], node[j], height, ni + nj)
        done = step + 1
        # Python-float weights keep the row in float32.
        merged = dist[i] * (ni / (ni + nj))
        merged += dist[j] * (nj / (ni + nj))
        gone[j] = np.inf
        merged += gone
        merged[i] = np.inf
        dist[i, :] = merged
        dist[:, i] = merged  # the one strided write: rows rescanned later read column i
        sizes[i] = ni + nj
        node[i] = m + step
        nearest_dist[j] = np.inf
        stale = nearest == i
        stale |= nearest == j
        np.copyto(verified, False, where=stale)
        closer = merged < nearest_dist
        closer &= ~stale
        np.copyto(nearest, i, where=closer)
        np.copyto(nearest_dist, merged, where=closer)
        nearest[i] = int(np.argmin(merged))
        nearest_dist[i] = merged[nearest[i]]
        verified[i] = True
    return merges[:done]


def _members(labels: IntArray, k: int) -> list[IntArray]:
    """The rows of each label 0..k-1, in row order."""
    order = np.argsort(labels, kind="stable")
    bounds = np.searchsorted(labels[order], np.arange(k + 1))
    return [order[bounds[c] : bounds[c + 1]] for c in range(k)]


def _same_partition(a: IntArray, b: IntArray) -> bool:
    """Whether two labellings are the same partition (names aside)."""
    return bool(np.array_equal(relabel(a), relabel(b)))


def _labels_from_merges(merges: npt.NDArray[np.float64], m: int) -> IntArray:
    """Cluster of each of the ``m`` leaves after the given merges (numbered in relabel order)."""
    root = np.arange(2 * m - 1 if m > 1 else 1)
    for r, (a, b, _, _) in enumerate(merges):
        root[int(a)] = root[int(b)] = m + r
    # Follow parents to the top: node ids only grow along a path, so one pass from the last
    # node down resolves every chain.
    for x in range(root.size - 1, -1, -1):
        root[x] = root[root[x]]
    return relabel(root[:m])


def _subtree_points(merges: npt.NDArray[np.float64], leaf_points: npt.NDArray[np.float64]) -> (
    npt.NDArray[np.float64]
):
    m = leaf_points.size
    points = np.concatenate([leaf_points, np.zeros(merges.shape[0])])
    for r, (a, b, _, _) in enumerate(merges):
        points[m + r] = points[int(a)] + points[int(b)]
    return points


def refinement_groups(
    merges: npt.NDArray[np.float64],
    leaf_points: npt.NDArray[np.float64],
    refine_max: int,
    keep_whole_below: float = -np.inf,
) -> tuple[IntArray, list[bool]]:
    """Cut a full tree over micro-clusters into groups of subtrees of <= ``refine_max`` points.

    Returns the group of each leaf and, per group, whether it is small enough to be clustered
    again exactly. Subtrees are taken as large as the budget allows, whatever their height:
    exact clusters are nested in the tree, so a group that spans the whole of every exact
    cluster it touches is clustered exactly by clustering it alone (average and Ward linkage
    are reducible), and the larger the group the likelier that is. A subtree too large to refine
    is split into its two children, unless its height is at most ``keep_whole_below`` (Ward,
    which has no exact rejoining step, then keeps it as one cluster); a single micro-cluster
    too large is kept whole.
    """
    m = leaf_points.size
    points = _subtree_points(merges, leaf_points)
    group = np.zeros(m, dtype=np.intp)
    refine: list[bool] = []
    load = np.inf  # points in the group being filled
    stack = [points.size - 1]
    while stack:
        top = stack.pop()
        small = bool(points[top] <= refine_max)
        if top >= m and not small and merges[top - m, 2] > keep_whole_below:
            a, b = int(merges[top - m, 0]), int(merges[top - m, 1])
            stack.extend((b, a))  # a first: deterministic order
            continue
        leaves, pending = [], [top]
        while pending:
            x = pending.pop()
            if x < m:
                leaves.append(x)
            else:
                pending.extend((int(merges[x - m, 0]), int(merges[x - m, 1])))
        # Subtrees come in tree order, so neighbours are related: small ones share a group up
        # to the budget (a chained tree would otherwise peel off one tiny subtree per split).
        if small and refine and refine[-1] and load + points[top] <= refine_max:
            load += points[top]
        else:
            refine.append(small)
            load = points[top]
        group[leaves] = len(refine) - 1
    return group, refine


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
    exact_max: largest n clustered in one pass; above it the bounded-memory path runs.
    n_micro: number of k-means micro-clusters of the approximation.
    refine_max: rows or pieces in one tree at most on the bounded-memory path (memory grows
        with its square: 8,000 take 256 MB of distances).
    random_state: fixes the random numbers of the k-means stage.
    """

    labels_: IntArray
    n_clusters_: int
    centroids_: npt.NDArray[np.float64]
    #: Whether the labels come from the approximation (Ward beyond ``exact_max``, or average
    #: linkage where the levels could not come down to ``refine_max``) rather than the exact
    #: tree.
    approximate_: bool

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
        with blas_threads():
            exact: IntArray | None = None
            if n == 1:
                raw = np.zeros(1, dtype=np.intp)
            elif n <= self.exact_max:
                raw = self._fit_exact(Xn)
            elif self.linkage == "ward":
                raw = self._fit_approximate(Xn)
            else:
                # Found once: the levels and, where they give up, the approximation use them.
                directions = bounding_directions(Xn)
                exact = self._fit_levels(Xn, directions)
                raw = self._fit_approximate(Xn, directions) if exact is None else exact
        self.approximate_ = n > self.exact_max and exact is None
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
        with blas_threads():
            forest = self._forest(Xn, max(cuts))
        return [self._merge_small(Xn, forest.cut(t)) for t in cuts]

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

    def _forest(
        self,
        Xn: npt.NDArray[np.float32],
        top: float,
        directions: Directions = "fit",
    ) -> _Forest:
        """The tree of the rows, as trees of the components within ``top`` where that pays.

        Only average linkage splits: a Ward merge can join clusters with no pair within its
        height (two far points around a third close to their midpoint). ``directions``: as
        for ``threshold_components`` (found once by callers that split many subsets).
        """
        n = Xn.shape[0]
        component = None
        if self.linkage == "average" and n >= _SPLIT_MIN_ROWS:
            component = threshold_components(Xn, top, _SPLIT_LARGEST_SHARE, directions)
        if component is None:
            whole = np.arange(n)
            return _Forest([whole], [self._tree(Xn) if n >= 2 else None], n, np.inf)
        parts = _members(component, int(component.max()) + 1)
        trees = [self._tree(Xn[members]) if members.size >= 2 else None for members in parts]
        return _Forest(parts, trees, n, top)

    def _fit_exact(self, Xn: npt.NDArray[np.float32]) -> IntArray:
        return self._forest(Xn, float(self.threshold)).cut(float(self.threshold))

    def _fit_approximate(
        self, Xn: npt.NDArray[np.float32], directions: Directions = "fit"
    ) -> IntArray:
        """k-means micro-clusters, a tree over them, exact clustering inside its subtrees.

        The tree over the micro-clusters (average linkage from their sums, or Ward on their
        centroids) is cut into the largest subtrees of at most ``refine_max`` points
        (``refinement_groups``), each clustered again exactly. Cutting the micro tree at the
        threshold itself was not faithful where the exact cut runs through dense regions
        (overlapping blobs cut at their own spread: ARI 0.79 against exact): subtrees as large
        as the budget allows contain the whole of nearly every exact cluster they touch.

        For average linkage, the pieces of the subtrees then join again by exact group-average
        linkage (``_regroup``), and while a cluster spans two subtrees the whole scheme runs
        again with the clusters found in place of the micro-clusters: a subtree of whole
        clusters of the previous pass is close to a union of exact clusters, which it then
        reproduces exactly. With n <= ``refine_max`` this is the exact path.
        """
        micro, sums, sizes = self._micro_clusters(Xn)
        if self.linkage == "ward":
            # Ward between micro-clusters is approximated on their normalised centroids
            # (unweighted); the exact refinement that follows corrects within each subtree.
            from scipy.cluster.hierarchy import linkage as scipy_linkage

            if sizes.size > 1:
                cents = sums / np.linalg.norm(sums, axis=1, keepdims=True)
                tree = np.asarray(scipy_linkage(cents, method="ward"))
            else:
                tree = np.empty((0, 4))
            labels, _ = self._regroup(Xn, micro, tree, sizes, None, float(self.threshold))
            return labels
        if isinstance(directions, str):
            directions = bounding_directions(Xn)
        tree = _group_average_merges(sums, sizes, np.inf)
        labels, spans = self._regroup(Xn, micro, tree, sizes, directions)
        for _ in range(_MAX_PASSES - 1):
            if not spans:
                break
            m = int(labels.max()) + 1
            if m > self.refine_max:  # the tree's matrix over the clusters would pass the budget
                break
            sizes = np.bincount(labels, minlength=m).astype(np.float64)
            tree = _group_average_merges(group_sums(Xn, labels, m), sizes)
            again, spans = self._regroup(Xn, labels, tree, sizes, directions)
            if _same_partition(again, labels):
                break
            labels = again
        return labels

    def _fit_levels(
        self, Xn: npt.NDArray[np.float32], directions: Directions = "fit"
    ) -> IntArray | None:
        """Exact average-linkage clusters at the threshold, no tree larger than ``refine_max``.

        The path beyond ``exact_max`` for average linkage, exact at any n. None where the levels
        do not come down to the budget (``_Stuck``: e.g. more identical rows than the budget,
        or blobs of independent noise larger than it); the approximation then runs.
        """
        ones = np.ones(Xn.shape[0])
        if isinstance(directions, str):
            directions = bounding_directions(Xn)
        try:
            return self._clusters_between(Xn, ones, 0.0, float(self.threshold), directions, 0)
        except _Stuck:
            return None

    def _clusters_between(
        self,
        means: npt.NDArray[np.float32],
        sizes: npt.NDArray[np.float64],
        low: float,
        cut: float,
        directions: npt.NDArray[np.float32] | None,
        depth: int,
    ) -> IntArray:
        """Clusters at ``cut`` of pieces that are the clusters at ``low`` of their rows.

        Each piece is given by the mean of its unit rows and their number: the mean cosine
        distance between two pieces is ``1 - dot(mean_a, mean_b)``, exact for any size, so a
        tree over pieces that are nodes of the exact tree continues it exactly. Two sets of
        pieces with no pair within ``cut`` never merge at or below it (a merged cluster's mean
        distance to another is a weighted mean of its parts'), so the components of that graph
        are clustered apart, each in one tree when it has at most ``refine_max`` pieces. A
        component over the budget is first clustered at a lower cut (recursively): its clusters
        there are fewer pieces, exact nodes again, and the loop goes on from them.
        """
        budget = self.refine_max
        labels = np.arange(sizes.size)  # piece of each input piece
        while True:
            p = sizes.size
            if p <= budget:
                return self._within_budget(means, sizes, cut, directions)[labels]
            component = threshold_components(means, cut, budget / p, directions)
            if component is not None:
                out = np.empty(p, dtype=np.intp)
                next_label = 0
                for members in _members(component, int(component.max()) + 1):
                    sub = self._within_budget(means[members], sizes[members], cut, None, True)
                    out[members] = next_label + sub
                    next_label += int(sub.max()) + 1
                return relabel(out[labels])
            if depth >= _MAX_LEVELS:
                raise _Stuck
            low, middle = _lower_cut(means, sizes, low, cut, budget)
            inner = self._clusters_between(means, sizes, low, middle, directions, depth + 1)
            k = int(inner.max()) + 1
            if k > _LEVEL_MIN_SHRINK * p and p > _LEVEL_PATIENT_MAX:
                # Rows whose single-linkage components grow into one long before their
                # clusters do (distances all alike, as in blobs of independent noise) take
                # many such levels, each a pass over all pairs.
                raise _Stuck
            low = middle
            means, sizes = _merged_means(means, sizes, inner, k)
            labels = inner[labels]
            depth += 1

    def _within_budget(
        self,
        means: npt.NDArray[np.float32],
        sizes: npt.NDArray[np.float64],
        cut: float,
        directions: npt.NDArray[np.float32] | None,
        connected: bool = False,
    ) -> IntArray:
        """Clusters at ``cut`` of at most ``refine_max`` pieces, from exact trees.

        ``connected``: the pieces are known to make one component within ``cut``, so the
        exact path's search for components would find nothing to split.
        """
        if sizes.size == 1:
            return np.zeros(1, dtype=np.intp)
        if np.all(sizes == 1.0):  # single rows: the exact path's kernel
            if connected:
                return relabel(fcluster(self._tree(means), t=cut, criterion="distance"))
            return self._forest(means, cut, directions).cut(cut)
        merges = _group_average_merges(means * sizes[:, None], sizes, stop_above=cut)
        return _labels_from_merges(merges, sizes.size)

    def _regroup(
        self,
        Xn: npt.NDArray[np.float32],
        leaf: IntArray,
        tree: npt.NDArray[np.float64],
        leaf_sizes: npt.NDArray[np.float64],
        directions: npt.NDArray[np.float32] | None,
        keep_whole_below: float = -np.inf,
    ) -> tuple[IntArray, bool]:
        """Labels from exact clustering inside the subtrees of ``tree`` over the leaves.

        ``leaf`` gives each row's leaf (micro-cluster or cluster of a previous pass). Returns
        the labels and whether a cluster spans more than one subtree.
        """
        group_of_leaf, refine = refinement_groups(
            tree, leaf_sizes, self.refine_max, keep_whole_below
        )
        group = group_of_leaf[leaf]
        members_of = _members(group, len(refine))
        top = float(self.threshold)
        forests = [
            self._forest(Xn[members], top, directions) if exact and members.size >= 2 else None
            for members, exact in zip(members_of, refine, strict=True)
        ]
        rejoin = self.linkage == "average" and len(refine) > 1
        cut = self._piece_height(forests, Xn.shape[0]) if rejoin else top
        labels = np.empty(Xn.shape[0], dtype=np.intp)
        next_label = 0
        for members, forest in zip(members_of, forests, strict=True):
            sub = np.zeros(members.size, dtype=np.intp) if forest is None else forest.cut(cut)
            labels[members] = next_label + sub
            next_label += int(sub.max()) + 1
        if not rejoin:
            return labels, False
        # The pieces join by average linkage between groups of points, exact from their sums
        # and sizes: where every piece is a node of the exact tree, the result is exact.
        labels = relabel(labels)
        m = int(labels.max()) + 1
        parts = np.bincount(labels, minlength=m).astype(np.float64)
        merges = _group_average_merges(
            group_sums(Xn, labels, m), parts, stop_above=float(self.threshold)
        )
        joined = _labels_from_merges(merges, m)[labels]
        # A cluster spans subtrees when it holds rows of more than one group.
        k = int(joined.max()) + 1
        first_group = np.full(k, -1, dtype=np.intp)
        first_group[joined[::-1]] = group[::-1]
        spans = bool(np.any(first_group[joined] != group))
        return np.asarray(joined, dtype=np.intp), spans

    def _piece_height(self, forests: list[_Forest | None], n: int) -> float:
        """Height at which the subtrees are cut into pieces before they join again.

        A piece made inside one subtree is a node of the exact tree unless a point outside the
        subtree would have joined it first, which grows likelier with height; so the pieces
        are cut as low as the rejoining step allows: at most ``refine_max`` pieces (their
        float32 matrix takes as much memory as a refined subtree's condensed distances).
        """
        budget = max(1, int(self.refine_max * _PIECE_SHARE))
        # Merges missing from split forests lie above the threshold, where the cut is clamped.
        found = [f.heights() for f in forests if f is not None]
        heights = np.sort(np.concatenate(found)) if found else np.empty(0)
        unmerged = n - budget  # merges to apply before at most ``budget`` pieces remain
        if unmerged <= 0:
            return min(-1.0, float(self.threshold))
        if unmerged > heights.size:
            return float(self.threshold)
        return min(float(heights[unmerged - 1]), float(self.threshold))

    def _micro_clusters(
        self, Xn: npt.NDArray[np.float32]
    ) -> tuple[IntArray, npt.NDArray[np.float64], npt.NDArray[np.float64]]:
        """k-means micro-cluster of each row, and each micro-cluster's row sum and size."""
        from threadpoolctl import threadpool_limits

        n = Xn.shape[0]
        # At least enough micro-clusters to average a fraction of the subtree budget: a
        # micro-cluster over the budget cannot be refined and would stay one piece.
        k = min(n, max(self.n_micro, self._parts_under_budget(n)))
        # One thread: BLAS threads competing with another busy core made the k-means stage up
        # to 10x slower (benchmarks/bench_clustering.py).
        with threadpool_limits(limits=1):
            micro = relabel(self._k_means(k, n).fit_predict(Xn))
            micro = self._split_oversized(Xn, micro)
        m = int(micro.max()) + 1
        sizes = np.bincount(micro, minlength=m).astype(np.float64)
        return micro, group_sums(Xn, micro, m), sizes

    def _k_means(self, k: int, n: int) -> Any:
        """k-means for ``k`` clusters of ``n`` rows, from random points, one initialisation.

        The micro-clusters only need to be tight: on overlapping 768-d blobs k-means++
        initialisation was 3-6x slower than random initialisation for the same inertia (within
        0.1%) (benchmarks/bench_clustering.py). Mini-batches from ten rows per cluster on.
        """
        from sklearn.cluster import KMeans, MiniBatchKMeans

        if n > 10 * k:
            return MiniBatchKMeans(
                n_clusters=k,
                random_state=self.random_state,
                n_init=1,
                batch_size=4096,
                init="random",
            )
        return KMeans(n_clusters=k, random_state=self.random_state, n_init=1, init="random")

    def _parts_under_budget(self, rows: int) -> int:
        """Micro-clusters for ``rows`` rows so that they average 1/_MICRO_PER_BUDGET of it."""
        return -(-_MICRO_PER_BUDGET * rows // self.refine_max)

    def _split_oversized(self, Xn: npt.NDArray[np.float32], micro: IntArray) -> IntArray:
        """Micro-clusters over ``refine_max`` rows split by k-means until none is.

        k-means sizes vary: with few micro-clusters per budget one of them can hold more rows
        than a subtree may, and would then never be clustered exactly (kept whole as a piece).
        """
        for _ in range(_MAX_SPLIT_ROUNDS):
            oversized = np.flatnonzero(np.bincount(micro) > self.refine_max)
            if oversized.size == 0:
                break
            next_label = int(micro.max()) + 1
            for label in oversized:
                rows = np.flatnonzero(micro == label)
                parts = min(self._parts_under_budget(rows.size), rows.size)
                sub = self._k_means(parts, rows.size).fit_predict(Xn[rows])
                # Part 0 keeps the label, the others take new ones.
                micro[rows] = np.where(sub == 0, label, next_label + sub - 1)
                next_label += int(sub.max())
        return relabel(micro)

    def _merge_small(self, Xn: npt.NDArray[np.float32], labels: IntArray) -> IntArray:
        return merge_small_clusters(Xn, labels, self.min_cluster_size, self.min_cluster_share)


class _Stuck(Exception):
    """The levels of the bounded-memory exact path did not come down to the budget."""


def _lower_cut(
    means: npt.NDArray[np.float32],
    sizes: npt.NDArray[np.float64],
    low: float,
    cut: float,
    budget: int,
) -> tuple[float, float]:
    """A cut between ``low`` and ``cut`` whose components should fit the budget.

    Read off the single-linkage tree of a fixed random sample of the pieces: the height at
    which its largest component first holds ``_LEVEL_SHARE`` of the budget's share of the
    sample. A sample is sparser than the whole, so its components form later; the share keeps
    the guess low, and a guess still too high costs one more level, not a wrong result. Where
    the tree gives no cut in between, the middle one, if some sampled pair joins below it.
    Returns the low cut too, raised where all pieces were sampled and none join below it.
    """
    from scipy.cluster.hierarchy import linkage as scipy_linkage

    p = sizes.size
    sample = np.random.default_rng(0).choice(p, size=min(p, _LEVEL_SAMPLE), replace=False)
    sample.sort()
    s = sample.size
    similar = means[sample] @ means[sample].T
    distances = 1.0 - similar[np.triu_indices(s, 1)].astype(np.float64)
    tree = np.asarray(scipy_linkage(np.clip(distances, 0.0, 2.0), method="single"))
    wanted = max(2.0, _LEVEL_SHARE * budget / p * s)
    over = np.flatnonzero(tree[:, 3] >= wanted)
    guess = float(tree[over[0], 2]) if over.size else cut
    if low < guess < cut:
        return low, guess
    heights = tree[:, 2]
    while True:
        guess = (low + cut) / 2
        if np.any((heights > low) & (heights <= guess)) or guess - low < CUT_SLACK:
            return low, guess
        if s < p:
            # No two sampled pieces join in between: the sample shows no level to make there
            # (a pass over all pieces at that cut found nothing to merge on blobs of noise).
            raise _Stuck
        low = guess  # all pieces were sampled: nothing merges up to the middle, for certain


def _merged_means(
    means: npt.NDArray[np.float32], sizes: npt.NDArray[np.float64], labels: IntArray, k: int
) -> tuple[npt.NDArray[np.float32], npt.NDArray[np.float64]]:
    """Mean row and row count of each label's pieces."""
    merged_sizes = np.bincount(labels, weights=sizes, minlength=k).astype(np.float64)
    weighted = means if np.all(sizes == 1.0) else means * sizes[:, None].astype(np.float32)
    sums = group_sums(weighted, labels, k)
    sums /= merged_sizes[:, None]
    return sums.astype(np.float32), merged_sizes


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
