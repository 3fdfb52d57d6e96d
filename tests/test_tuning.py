"""Tuning the embedded default on gold senses: cut, per-verb cut, assignment distance, weights
(synthetic, well-separated data whose right answer is known; metrics from scikit-learn)."""

from __future__ import annotations

import numpy as np
from sklearn.metrics import adjusted_rand_score

from lexbuild.senses.static import BLOCK_NAMES
from lexbuild.senses.tuning import (
    GoldVerbBlocks,
    choose_max_distance,
    per_verb_cut,
    search_weights,
    sweep_thresholds,
)


def _groups(k: int, n: int, dim: int, noise: float, random_state: int) -> np.ndarray:
    rng = np.random.default_rng(random_state)
    centres = np.eye(k, dim, dtype=np.float32)
    return np.concatenate([c + noise * rng.standard_normal((n, dim)) for c in centres]).astype(
        np.float32
    )


def test_per_verb_cut_finds_the_separated_groups() -> None:
    X = _groups(3, 12, 10, 0.05, 0)
    threshold, labels = per_verb_cut(X, [0.1, 0.3, 0.5, 0.7, 0.9, 1.2])
    # scikit-learn's adjusted_rand_score: the cut recovers the three groups exactly
    assert adjusted_rand_score(np.repeat([0, 1, 2], 12), labels) == 1.0
    assert 0.1 <= threshold <= 0.9


def test_assignment_distance_separates_known_from_unknown_senses() -> None:
    X = _groups(3, 6, 10, 0.05, 1)
    gold = [str(s) for s in np.repeat([0, 1, 2], 6)]
    best, scores = choose_max_distance([(X, gold)], [0.001, 0.3, 0.6, 1.5])
    # Same-sense rows lie within a few hundredths of their prototype, other senses at ~1.0.
    assert best in (0.3, 0.6)
    assert scores[best] == 1.0 and scores[1.5] < 1.0 and scores[0.001] < 1.0


def test_weight_search_drops_a_misleading_block() -> None:
    """Block 'subj' carries the senses; block 'window' carries noise with a different
    partition. The search must give the window less weight than the subject and score better
    than it started."""
    rng = np.random.default_rng(2)
    gold = [str(s) for s in np.repeat([0, 1], 15)]
    width = 8
    blocks = {name: np.zeros((30, width), np.float32) for name in BLOCK_NAMES}
    blocks["subj"] = _groups(2, 15, width, 0.1, 3)
    blocks["window"] = _groups(2, 15, width, 0.1, 4)[rng.permutation(30)]
    for name in ("subj", "window"):
        blocks[name] /= np.linalg.norm(blocks[name], axis=1, keepdims=True)
    start = {name: 1.0 for name in BLOCK_NAMES}
    verbs = [GoldVerbBlocks("v", blocks, gold)]
    grid = [0.2, 0.4, 0.6, 0.8]
    before = sweep_thresholds(verbs, start, grid).max()
    found = search_weights(verbs, start, grid, names=["subj", "window"])
    assert found.weights["window"] < found.weights["subj"]
    assert found.ari > before
    assert found.ari == 1.0
