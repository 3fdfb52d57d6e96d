"""Calibration on the editors' work: curated senses as gold, pseudo-verbs as the fallback.

Curated senses with two or more examples are gold senses whose tokens an editor has labelled.
On them, held out from one another (an example is never predicted from itself):

* the clustering threshold: each verb's occurrences (a sample of at most ``cap``, the curated
  examples included) are clustered at every threshold, and the cut is scored on the curated
  examples only (mean adjusted Rand index over verbs with two or more such senses);
* the assignment distance of guided induction (``tuning.choose_max_distance``:
  leave-one-out for known senses, leave-one-sense-out for unknown ones);
* the weights of the embedded default's parts (``tuning.search_weights``), when the
  representation has parts (``blocks``).

Where the sources have too few such senses (``min_senses``) the threshold comes from
pseudo-verbs (``calibrate.calibrate``) and the assignment distance keeps its default;
``evidence`` in ``calibration.json`` says which decided.
"""

from __future__ import annotations

import json
from collections import defaultdict
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from lexbuild._atomic import atomic_write_text
from lexbuild.corpus.occurrences import Occurrence
from lexbuild.senses.guide import (
    DEFAULT_ASSIGNER,
    DEFAULT_MAX_DISTANCE,
    Guide,
    locate_anchors,
    parse_examples,
)
from lexbuild.senses.tuning import (
    GoldVerbBlocks,
    choose_max_distance,
    search_weights,
    sweep_thresholds,
)
from lexbuild.senses.vectors import CacheStats, Representation, VectorCache, encode_cached

if TYPE_CHECKING:
    from lexbuild.senses.settings import InductionSettings

__all__ = [
    "CURATED",
    "PSEUDO_VERBS",
    "CuratedGold",
    "GuidedCalibration",
    "calibrate_guided",
    "curated_gold",
    "write_guided_calibration",
]

CURATED = "curated senses"
PSEUDO_VERBS = "pseudo-verbs"
DISTANCES: tuple[float, ...] = tuple(round(0.05 * i, 2) for i in range(6, 21))


@dataclass
class CuratedGold:
    """One verb's occurrences (a sample of the corpus, then the curated examples parsed from
    their own text) and the curated sense of each (None: an unlabelled corpus occurrence)."""

    lemma: str
    occurrences: list[Occurrence]
    senses: list[str | None]

    @property
    def labelled(self) -> list[int]:
        return [row for row, sense in enumerate(self.senses) if sense is not None]


def curated_gold(
    guide: Guide,
    occurrences: Iterable[Occurrence],
    *,
    min_examples: int = 2,
    cap: int = 400,
    parse_missing: bool = True,
    language: str = "fr",
    random_state: int = 0,
) -> list[CuratedGold]:
    """Per guided verb, its occurrences labelled with the senses that have ``min_examples``
    or more examples (found in the corpus or parsed); verbs with none are left out."""
    from lexbuild.senses.induce import sample_indices

    by_lemma: dict[str, list[Occurrence]] = defaultdict(list)
    for occ in occurrences:
        if occ.lemma in guide.senses:
            by_lemma[occ.lemma].append(occ)
    out = []
    for lemma in guide.lemmas:
        senses = [s for s in guide.for_lemma(lemma) if len(s.examples) >= min_examples]
        if not senses:
            continue
        corpus = by_lemma.get(lemma, [])
        anchors, missing = locate_anchors(senses, corpus)
        if parse_missing and missing:
            anchors += parse_examples(missing, lemma, language=language)
        counts: dict[str, int] = defaultdict(int)
        for anchor in anchors:
            counts[anchor.sense] += 1
        kept = [a for a in anchors if counts[a.sense] >= min_examples]
        if not kept:
            continue
        label = {a.index: a.sense for a in kept if a.index is not None}
        rows = sorted(set(sample_indices(len(corpus), cap, lemma, random_state).tolist())
                      | set(label))
        occs = [corpus[r] for r in rows] + [a.occurrence for a in kept if a.index is None]
        gold: list[str | None] = [label.get(r) for r in rows]
        gold += [a.sense for a in kept if a.index is None]
        out.append(CuratedGold(lemma, occs, gold))
    return out


@dataclass
class GuidedCalibration:
    representation: str
    model: str | None
    representation_settings: dict[str, Any]
    evidence: str  # CURATED or PSEUDO_VERBS: what chose the threshold
    threshold: float
    threshold_ari: float
    max_distance: float
    max_distance_evidence: str
    assigner: str = DEFAULT_ASSIGNER
    weights: dict[str, float] | None = None
    curated: dict[str, int] = field(default_factory=dict)
    thresholds: list[dict[str, float]] = field(default_factory=list)
    distances: list[dict[str, float]] = field(default_factory=list)
    pseudo: dict[str, Any] | None = None
    compat: dict[str, Any] = field(default_factory=dict)  # clusterer and its parameters

    def to_json(self) -> dict[str, Any]:
        data: dict[str, Any] = {
            **self.compat,
            "representation": self.representation,
            "model": self.model,
            "representation_settings": self.representation_settings,
            "evidence": self.evidence,
            "recommended": {"threshold": self.threshold, "ari": self.threshold_ari},
            "guided": {
                "assigner": self.assigner,
                "max_distance": self.max_distance,
                "evidence": self.max_distance_evidence,
            },
            "curated": dict(self.curated),
            "thresholds": list(self.thresholds),
            "distances": list(self.distances),
        }
        if self.weights is not None:
            data["weights"] = dict(sorted(self.weights.items()))
        if self.pseudo is not None:
            data["pseudo_verbs"] = self.pseudo
        return data


def calibrate_guided(
    occurrences: Sequence[Occurrence],
    representation: Representation,
    guide: Guide,
    settings: InductionSettings | None = None,
    *,
    thresholds: Sequence[float] | None = None,
    min_senses: int = 6,
    tune_weights: bool = True,
    parse_missing: bool = True,
    language: str = "fr",
    cache: VectorCache | None = None,
    stats: CacheStats | None = None,
    progress: Callable[[int], None] | None = None,
) -> GuidedCalibration:
    """Calibrate on the curated senses of ``guide``; fall back to pseudo-verbs (module doc).

    The clusterer, its parameters and ``random_state`` come from ``settings`` (as for
    ``calibrate``); only agglomerative clustering is tuned on curated senses, another
    clusterer is calibrated on pseudo-verbs.
    """
    from lexbuild.senses.calibrate import calibrate
    from lexbuild.senses.registry import get_clusterer
    from lexbuild.senses.settings import InductionSettings

    settings = settings or InductionSettings()
    spec = get_clusterer(settings.clusterer)
    grid = sorted({round(float(t), 6) for t in (thresholds or spec.grid(settings))})
    compat = {"clusterer": spec.name, "settings": spec.params(settings)}
    gold = curated_gold(guide, occurrences, parse_missing=parse_missing, language=language,
                        random_state=settings.random_state)
    multi = [g for g in gold if len({g.senses[r] for r in g.labelled}) >= 2]
    n_senses = sum(len({g.senses[r] for r in g.labelled}) for g in multi)
    counts = {
        "verbs": len(multi),
        "senses": n_senses,
        "examples": sum(len(g.labelled) for g in multi),
    }
    weights: dict[str, float] | None = None
    threshold_rows: list[dict[str, float]] = []
    distance_rows: list[dict[str, float]] = []
    max_distance, distance_evidence = DEFAULT_MAX_DISTANCE, "default"
    if n_senses >= min_senses and spec.name == "agglomerative":
        blocks_of = getattr(representation, "blocks", None)
        start = dict(getattr(representation, "weights", {}) or {})
        verbs = []
        for g in multi:
            if callable(blocks_of) and start:
                verbs.append(GoldVerbBlocks(g.lemma, blocks_of(g.occurrences), g.senses))
        if verbs and len(verbs) == len(multi):
            if tune_weights:
                search = search_weights(verbs, start, grid, rounds=1)
                weights = search.weights
            else:
                weights = start
            table = sweep_thresholds(verbs, weights, grid)
            vectors = [
                _labelled(_combine(v, weights), g) for v, g in zip(verbs, multi, strict=True)
            ]
        else:
            matrices = [encode_cached(representation, g.occurrences, cache, stats=stats)
                        for g in multi]
            table = _sweep_plain(matrices, [g.senses for g in multi], grid, spec, settings)
            vectors = [_labelled(X, g) for X, g in zip(matrices, multi, strict=True)]
        means = table.mean(axis=0)
        best = int(np.argmax(np.round(means, 12)))
        threshold, threshold_ari = float(grid[best]), float(means[best])
        threshold_rows = [{"threshold": t, "ari": float(m)} for t, m in zip(grid, means,
                                                                             strict=True)]
        max_distance, scores = choose_max_distance(vectors, DISTANCES)
        distance_evidence = CURATED
        distance_rows = [{"max_distance": d, "score": s} for d, s in scores.items()]
        settings_used = representation.settings
        if weights is not None and "weights" in settings_used:
            # The settings induce must run with for this calibration to apply.
            settings_used = {**settings_used, "weights": dict(sorted(weights.items()))}
        return GuidedCalibration(
            representation=representation.id,
            model=representation.model,
            representation_settings=settings_used,
            evidence=CURATED,
            threshold=threshold,
            threshold_ari=threshold_ari,
            max_distance=max_distance,
            max_distance_evidence=distance_evidence,
            weights=weights,
            curated=counts,
            thresholds=threshold_rows,
            distances=distance_rows,
            compat=compat,
        )
    pseudo = calibrate(
        occurrences, representation, settings, thresholds=grid, cache=cache, stats=stats,
        progress=progress,
    )
    return GuidedCalibration(
        representation=representation.id,
        model=representation.model,
        representation_settings=representation.settings,
        evidence=PSEUDO_VERBS,
        threshold=pseudo.recommended.threshold,
        threshold_ari=pseudo.recommended.ari,
        max_distance=max_distance,
        max_distance_evidence=distance_evidence,
        curated=counts,
        thresholds=[{"threshold": r.threshold, "ari": r.ari} for r in pseudo.thresholds],
        pseudo=pseudo.to_json(),
        compat=compat,
    )


def _labelled(X: Any, gold: CuratedGold) -> tuple[Any, list[str]]:
    rows = gold.labelled
    return X[rows], [str(gold.senses[r]) for r in rows]


def _combine(verb: GoldVerbBlocks, weights: dict[str, float]) -> Any:
    from lexbuild.senses.static import combine_blocks

    return combine_blocks(verb.blocks, weights)


def _sweep_plain(
    matrices: Sequence[Any],
    golds: Sequence[Sequence[str | None]],
    grid: Sequence[float],
    spec: Any,
    settings: InductionSettings,
) -> Any:
    from lexbuild.senses.evaluation import adjusted_rand

    table = np.zeros((len(matrices), len(grid)))
    for i, (X, gold) in enumerate(zip(matrices, golds, strict=True)):
        rows = [r for r, sense in enumerate(gold) if sense is not None]
        for j, labels in enumerate(spec.make(settings, grid[0]).sweep(X, grid)):
            table[i, j] = adjusted_rand([gold[r] for r in rows], labels[rows].tolist())
    return table


def write_guided_calibration(calibration: GuidedCalibration, folder: str | Path) -> Path:
    """Write ``calibration.json`` into ``folder`` (readable by ``read_calibration``)."""
    target = Path(folder)
    target.mkdir(parents=True, exist_ok=True)
    path = target / "calibration.json"
    atomic_write_text(
        path,
        json.dumps(calibration.to_json(), indent=2, ensure_ascii=False, sort_keys=True) + "\n",
    )
    return path
