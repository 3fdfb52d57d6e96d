"""Choosing the embedded default's weights, the cut and the assignment distance on gold senses.

The gold is whatever calibration has: curated senses of the sources (``lexbuild calibrate
--guide``) or pseudo-verbs. Pure functions over precomputed blocks
(``StaticSyntacticVectors.blocks``): a weighting is scored without encoding again.

* ``sweep_thresholds``: mean adjusted Rand index of the agglomerative cut at each threshold;
* ``search_weights``: coordinate ascent over the block weights (each weight tried on a small
  grid, the others held), judged by the best mean ARI over the thresholds;
* ``per_verb_cut``: the cut chosen per verb by the silhouette of its clustering among
  thresholds near the global one, kept only where it beats the global cut on the gold;
* ``choose_max_distance``: the assignment distance of guided induction by leave-one-sense-out
  (an occurrence of a sense with examples should go to it, one of a sense the guide does not
  know should be left to clustering).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from lexbuild.senses.evaluation import adjusted_rand

__all__ = [
    "GoldVerbBlocks",
    "WeightSearch",
    "choose_max_distance",
    "per_verb_cut",
    "search_weights",
    "sweep_thresholds",
]

Matrix = npt.NDArray[np.float32]
WEIGHT_GRID: tuple[float, ...] = (0.0, 0.5, 1.0, 2.0)


@dataclass
class GoldVerbBlocks:
    """One gold verb: its representation blocks and the gold sense of each row (None: a row
    that is clustered with the others but not scored, as an unlabelled corpus occurrence)."""

    name: str
    blocks: dict[str, Matrix]
    gold: Sequence[str | None]


@dataclass
class WeightSearch:
    weights: dict[str, float]
    threshold: float
    ari: float
    history: list[tuple[dict[str, float], float, float]]  # weights, threshold, ARI tried


def _vectors(verb: GoldVerbBlocks, weights: Mapping[str, float]) -> Matrix:
    from lexbuild.senses.static import combine_blocks

    return combine_blocks(verb.blocks, dict(weights))


def sweep_thresholds(
    verbs: Sequence[GoldVerbBlocks],
    weights: Mapping[str, float],
    thresholds: Sequence[float],
    *,
    min_cluster_size: int = 3,
    min_cluster_share: float = 0.05,
) -> npt.NDArray[np.float64]:
    """ARI per verb (rows) and threshold (columns)."""
    from lexbuild.senses.agglomerative import AgglomerativeClusterer as SenseClusterer

    out = np.zeros((len(verbs), len(thresholds)))
    for i, verb in enumerate(verbs):
        X = _vectors(verb, weights)
        clusterer = SenseClusterer(
            min_cluster_size=min_cluster_size, min_cluster_share=min_cluster_share
        )
        scored = [r for r, sense in enumerate(verb.gold) if sense is not None]
        gold = [verb.gold[r] for r in scored]
        for j, labels in enumerate(clusterer.sweep(X, thresholds)):
            out[i, j] = adjusted_rand(gold, labels[scored].tolist())
    return out


def _best(table: npt.NDArray[np.float64], thresholds: Sequence[float]) -> tuple[float, float]:
    means = table.mean(axis=0)
    j = int(np.argmax(np.round(means, 12)))
    return float(thresholds[j]), float(means[j])


def search_weights(
    verbs: Sequence[GoldVerbBlocks],
    start: Mapping[str, float],
    thresholds: Sequence[float],
    *,
    names: Sequence[str] | None = None,
    grid: Sequence[float] = WEIGHT_GRID,
    rounds: int = 2,
) -> WeightSearch:
    """Coordinate ascent over the weights of ``names`` (default: all), from ``start``.

    A change is kept only when it raises the best mean ARI by more than 0.002 (noise on a few
    dozen verbs); ties keep the earlier weighting, so the result does not drift.
    """
    weights = dict(start)
    table = sweep_thresholds(verbs, weights, thresholds)
    threshold, score = _best(table, thresholds)
    history = [(dict(weights), threshold, score)]
    for _ in range(rounds):
        changed = False
        for name in names or list(weights):
            for value in grid:
                if value == weights[name]:
                    continue
                trial = {**weights, name: float(value)}
                if not any(trial.values()):
                    continue
                t, s = _best(sweep_thresholds(verbs, trial, thresholds), thresholds)
                history.append((dict(trial), t, s))
                if s > score + 0.002:
                    weights, threshold, score, changed = trial, t, s, True
        if not changed:
            break
    return WeightSearch(weights, threshold, score, history)


def per_verb_cut(
    X: npt.ArrayLike,
    thresholds: Sequence[float],
    *,
    min_cluster_size: int = 3,
    min_cluster_share: float = 0.05,
) -> tuple[float, npt.NDArray[np.intp]]:
    """The threshold among ``thresholds`` whose cut has the best silhouette (cosine), and its
    labels; a single cluster scores 0 (silhouette is undefined there), so a verb whose cuts all
    split badly keeps one sense."""
    from sklearn.metrics import silhouette_score

    from lexbuild.senses.agglomerative import AgglomerativeClusterer as SenseClusterer

    M = np.asarray(X, dtype=np.float32)
    clusterer = SenseClusterer(min_cluster_size=min_cluster_size,
                               min_cluster_share=min_cluster_share)
    best: tuple[float, float, npt.NDArray[np.intp]] | None = None
    for t, labels in zip(thresholds, clusterer.sweep(M, thresholds), strict=True):
        k = int(labels.max()) + 1
        score = 0.0 if k < 2 or k >= len(labels) else float(
            silhouette_score(M, labels, metric="cosine")
        )
        if best is None or score > best[1] + 1e-12:
            best = (float(t), score, labels)
    assert best is not None
    return best[0], best[2]


def choose_max_distance(
    verbs: Sequence[tuple[Matrix, Sequence[str]]],
    candidates: Sequence[float],
    *,
    method: str = "centroid",
    unknown_share: float = 0.25,
) -> tuple[float, dict[float, float]]:
    """The assignment distance that best separates known from unknown senses.

    Per verb (vectors, gold senses; every row an example of its sense), each row is predicted
    from the others: with its own sense among the anchors it should be assigned to it
    (leave-one-out), with its whole sense held out it should be left unassigned
    (leave-one-sense-out). The score of a distance weighs the second accuracy by
    ``unknown_share``, the share of occurrences expected outside the curated inventory: an
    assumption (curated inventories cover most uses), not a measured value.
    """
    from lexbuild.senses.guide import assign_to_senses

    right = {d: 0 for d in candidates}
    total_known = total_unknown = 0
    left = {d: 0 for d in candidates}
    for X, gold in verbs:
        senses = sorted(set(gold))
        if len(senses) < 2:
            continue
        number = {s: i for i, s in enumerate(senses)}
        labels = np.array([number[s] for s in gold])
        M = np.asarray(X, dtype=np.float32)
        for row in range(len(labels)):
            others = np.array([r for r in range(len(labels)) if r != row])
            if np.sum(labels[others] == labels[row]) >= 1:
                total_known += 1
                for d in candidates:
                    got, _ = assign_to_senses(M[[row]], M[others], labels[others].tolist(),
                                              len(senses), method=method, max_distance=d)
                    right[d] += int(got[0] == labels[row])
            unknown = np.array([r for r in others if labels[r] != labels[row]])
            if unknown.size:
                total_unknown += 1
                for d in candidates:
                    got, _ = assign_to_senses(M[[row]], M[unknown], labels[unknown].tolist(),
                                              len(senses), method=method, max_distance=d)
                    left[d] += int(got[0] == -1)
    scores = {
        d: (1 - unknown_share) * (right[d] / max(total_known, 1))
        + unknown_share * (left[d] / max(total_unknown, 1))
        for d in candidates
    }
    best = max(candidates, key=lambda d: (round(scores[d], 12), d))
    return float(best), scores
