"""Every default of sense induction and calibration, defined once.

``InductionSettings`` is the single source: ``SenseInducer``, ``calibrate``, the CLI (its option
defaults are read from here) and the demo all start from ``InductionSettings()``. The defaults
of a clustering method's own calibrated parameter (its fallback value and the grid calibration
sweeps) live in that method's spec (``lexbuild.senses.clustering``), next to the method.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field, fields, replace
from typing import Any

from lexbuild.errors import InductionError

__all__ = ["CALIBRATE", "CalibrationSettings", "InductionSettings"]

#: The threshold value that asks for a calibration on the corpus before clustering.
CALIBRATE = "calibrate"


@dataclass(frozen=True)
class CalibrationSettings:
    """How pseudo-verbs are built and sampled when a threshold is calibrated."""

    pairs: int = 20
    matched_pairs: int = 10
    triples: int = 5
    min_count: int = 30  # occurrences a verb needs to enter a pseudo-verb
    per_verb: int = 200  # occurrences sampled from each verb of a pseudo-verb
    mask: bool = True  # hide the verb form behind the representation's placeholder
    thresholds: tuple[float, ...] | None = None  # None: the clusterer's own grid

    def __post_init__(self) -> None:
        if min(self.pairs, self.matched_pairs, self.triples) < 0:
            raise InductionError("pairs, matched_pairs and triples must be >= 0")
        if self.min_count < 1 or self.per_verb < 1:
            raise InductionError("min_count and per_verb must be >= 1")
        if self.thresholds is not None and not self.thresholds:
            raise InductionError("no thresholds to sweep")

    def to_json(self) -> dict[str, Any]:
        data = asdict(self)
        data["thresholds"] = None if self.thresholds is None else list(self.thresholds)
        return data


@dataclass(frozen=True)
class InductionSettings:
    """Every setting of an induction run (all recorded in ``induction.json``).

    ``threshold`` is the clusterer's calibrated parameter (the cosine distance at which
    agglomerative clustering stops merging, HDBSCAN's ``cluster_selection_epsilon``, affinity
    propagation's preference): a number, or ``"calibrate"`` to choose it on pseudo-verbs of the
    corpus first (``SenseInducer.fit``). A calibration file is given to ``SenseInducer``.
    """

    threshold: float | str = CALIBRATE
    clusterer: str = "agglomerative"
    linkage: str = "average"  # agglomerative only: "average" or "ward"
    min_cluster_size: int = 3
    min_cluster_share: float = 0.05
    cap: int = 2000  # occurrences clustered per verb; the rest go to the nearest centroid
    exact_max: int = 20000  # agglomerative: above this, the bounded-memory path runs
    min_occurrences: int = 1  # verbs seen fewer times are left out
    examples: int = 3
    example_words: tuple[int, int] = (6, 40)  # "moderate length", in words
    random_state: int = 0
    frame_min_count: int = 2
    frame_min_share: float = 0.05
    calibration: CalibrationSettings = field(default_factory=CalibrationSettings)
    # Guided induction (lexbuild.senses.guide): how occurrences go to curated senses.
    guide_assigner: str = "centroid"  # "centroid", "knn" or "propagation"
    guide_max_distance: float = 0.7  # cosine distance; farther occurrences form new senses

    def __post_init__(self) -> None:
        if isinstance(self.threshold, str):
            if self.threshold != CALIBRATE:
                raise InductionError(
                    f"threshold must be a number or {CALIBRATE!r}, got {self.threshold!r}"
                )
        elif isinstance(self.threshold, bool) or not isinstance(self.threshold, int | float):
            raise InductionError(f"threshold must be a number, got {self.threshold!r}")
        if self.cap < 2:
            raise InductionError(f"cap must be at least 2 occurrences, got {self.cap}")
        if self.examples < 0 or self.min_occurrences < 1:
            raise InductionError("examples must be >= 0 and min_occurrences >= 1")
        if self.example_words[0] > self.example_words[1]:
            raise InductionError("example_words must be (shortest, longest)")
        if self.guide_assigner not in ("centroid", "knn", "propagation"):
            raise InductionError(
                f"guide_assigner must be centroid, knn or propagation, got {self.guide_assigner!r}"
            )
        if not 0.0 <= self.guide_max_distance <= 2.0:
            raise InductionError("guide_max_distance must lie in [0, 2] (a cosine distance)")
        if self.min_cluster_size < 1 or not 0.0 <= self.min_cluster_share <= 1.0:
            raise InductionError("min_cluster_size must be >= 1, min_cluster_share in [0, 1]")

    @property
    def calibrates(self) -> bool:
        return self.threshold == CALIBRATE

    def with_threshold(self, threshold: float) -> InductionSettings:
        return replace(self, threshold=float(threshold))

    def updated(self, **changes: Any) -> InductionSettings:
        """A copy with ``changes``; an unknown name is an error (a typo is never ignored)."""
        known = {f.name for f in fields(self)}
        unknown = sorted(set(changes) - known)
        if unknown:
            raise InductionError(
                f"unknown induction setting(s) {', '.join(unknown)}; "
                f"known: {', '.join(sorted(known))}"
            )
        return replace(self, **changes)

    def to_json(self) -> dict[str, Any]:
        data = asdict(self)
        data["example_words"] = list(self.example_words)
        data["calibration"] = self.calibration.to_json()
        return data
