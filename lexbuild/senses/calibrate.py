"""Threshold calibration without gold data, on pseudo-verbs.

A pseudo-verb conflates two or three real verbs of the corpus into one artificial ambiguous verb
(pseudo-words: Gale, Church and Yarowsky 1992; Schütze 1998): its "senses" are the original
verbs, known for free. The verb's form and lemma are replaced by one placeholder so that the
representation cannot read the identity off the verb itself. The distance threshold of the
clustering is swept; each cut is scored against the original verbs; the threshold with the
best mean adjusted Rand index is recommended. ARI rather than B-cubed F1, because B-cubed F1
rewards putting every occurrence of a verb into one cluster (that baseline scores high B-cubed
F1 with an ARI of 0).

Pseudo-verbs come in three kinds: random pairs of frequent verbs, frequency-matched pairs
(neighbours in the frequency ranking, so neither verb dominates), and random triples.
"""

from __future__ import annotations

import dataclasses
import json
from collections import Counter, defaultdict
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from itertools import combinations
from pathlib import Path
from typing import Any

import numpy as np

from lexbuild._atomic import atomic_write_bytes, atomic_write_text
from lexbuild.corpus.occurrences import Argument, Occurrence
from lexbuild.errors import InductionError
from lexbuild.senses.clustering import SenseClusterer
from lexbuild.senses.evaluation import evaluate_verb
from lexbuild.senses.vectors import CacheStats, Representation, VectorCache, encode_cached

__all__ = [
    "DEFAULT_THRESHOLDS",
    "Calibration",
    "PseudoVerb",
    "ThresholdScores",
    "build_pseudo_verbs",
    "calibrate",
    "conflate",
    "read_calibration",
    "write_calibration",
]

#: Cosine distance thresholds swept by default.
DEFAULT_THRESHOLDS: tuple[float, ...] = tuple(round(0.05 * i, 2) for i in range(2, 20))


@dataclass(frozen=True)
class PseudoVerb:
    """An artificial ambiguous verb: its name and the real verbs it conflates."""

    name: str
    verbs: tuple[str, ...]
    kind: str  # "pair", "matched-pair" or "triple"


@dataclass(frozen=True)
class ThresholdScores:
    """Mean scores over all pseudo-verbs for one threshold."""

    threshold: float
    ari: float
    bcubed_f1: float
    paired_f1: float
    v_measure: float
    clusters_per_verb: float


@dataclass
class Calibration:
    representation: str
    model: str | None
    representation_settings: dict[str, Any]
    thresholds: list[ThresholdScores]
    recommended: ThresholdScores
    pseudo_verbs: list[dict[str, Any]] = field(default_factory=list)
    settings: dict[str, Any] = field(default_factory=dict)
    # Per pseudo-verb ARI at each threshold (same order as ``thresholds``).
    per_verb_ari: dict[str, list[float]] = field(default_factory=dict)
    # The layer mix chosen for a transformer with layers "auto" (transformer.choose_layers).
    layers: dict[str, Any] | None = None

    def to_json(self) -> dict[str, Any]:
        return {
            "representation": self.representation,
            "model": self.model,
            "representation_settings": self.representation_settings,
            "settings": self.settings,
            "thresholds": [dataclasses.asdict(t) for t in self.thresholds],
            "recommended": {
                "threshold": self.recommended.threshold,
                "ari": self.recommended.ari,
            },
            "pseudo_verbs": self.pseudo_verbs,
            **({"layers": self.layers} if self.layers is not None else {}),
        }


# ------------------------------------------------------------------------ pseudo-verbs


def build_pseudo_verbs(
    counts: Mapping[str, int],
    *,
    pairs: int = 20,
    matched_pairs: int = 10,
    triples: int = 5,
    min_count: int = 30,
    random_state: int = 0,
) -> list[PseudoVerb]:
    """Pseudo-verbs from the verbs seen at least ``min_count`` times (fixed by random_state)."""
    frequent = sorted((lemma for lemma, n in counts.items() if n >= min_count),
                      key=lambda lemma: (-counts[lemma], lemma))
    if len(frequent) < 2:
        raise InductionError(
            f"calibration needs at least 2 verbs with {min_count}+ occurrences; the corpus has "
            f"{len(frequent)} (use a larger corpus or a lower --min-count)"
        )
    rng = np.random.default_rng(random_state)
    out: list[PseudoVerb] = []
    seen: set[tuple[str, ...]] = set()

    def take(candidates: list[tuple[str, ...]], wanted: int, kind: str) -> None:
        if wanted <= 0 or not candidates:
            return
        order = rng.permutation(len(candidates))
        taken = 0
        for index in order:
            combo = tuple(sorted(candidates[int(index)]))
            if combo in seen:
                continue
            seen.add(combo)
            out.append(PseudoVerb(f"pseudo-{len(out) + 1}", combo, kind))
            taken += 1
            if taken == wanted:
                break

    take(list(combinations(frequent, 2)), pairs, "pair")
    take([(frequent[i], frequent[i + 1]) for i in range(len(frequent) - 1)], matched_pairs,
         "matched-pair")
    if len(frequent) >= 3:
        # Random triples drawn directly: all combinations of a long list would be huge.
        candidates = [tuple(rng.choice(frequent, 3, replace=False)) for _ in range(triples * 4)]
        take([tuple(str(v) for v in c) for c in candidates], triples, "triple")
    return out


def _mask(occ: Occurrence, name: str, placeholder: str, mask: bool) -> Occurrence:
    """The occurrence under the pseudo-verb's name, its verb form hidden when ``mask``."""
    if not mask:
        return dataclasses.replace(occ, lemma=name)
    words = list(occ.words)
    lemmas = list(occ.lemmas)
    words[occ.token] = placeholder
    lemmas[occ.token] = placeholder
    text, span, arguments = occ.text, occ.char_span, occ.arguments
    if span != (-1, -1):
        start, end = span
        delta = len(placeholder) - (end - start)
        text = text[:start] + placeholder + text[end:]
        span = (start, start + len(placeholder))

        def shift(a: Argument) -> Argument:
            s, e = a.span
            if s == -1:
                return a
            s = s + delta if s >= end else s
            e = e + delta if e >= end else e
            return dataclasses.replace(a, span=(s, e))

        arguments = tuple(shift(a) for a in arguments)
    return dataclasses.replace(
        occ,
        lemma=name,
        words=tuple(words),
        lemmas=tuple(lemmas),
        text=text,
        char_span=span,
        arguments=arguments,
    )


def conflate(
    by_lemma: Mapping[str, Sequence[Occurrence]],
    pseudo: PseudoVerb,
    *,
    per_verb: int = 200,
    placeholder: str = "X",
    mask: bool = True,
    random_state: int = 0,
) -> tuple[list[Occurrence], list[str]]:
    """The pseudo-verb's occurrences (at most ``per_verb`` of each verb) and gold labels."""
    occurrences: list[Occurrence] = []
    gold: list[str] = []
    for number, verb in enumerate(pseudo.verbs):
        pool = list(by_lemma.get(verb, ()))
        if len(pool) > per_verb:
            rng = np.random.default_rng([random_state, number, len(pool)])
            keep = np.sort(rng.choice(len(pool), per_verb, replace=False))
            pool = [pool[int(i)] for i in keep]
        occurrences.extend(_mask(occ, pseudo.name, placeholder, mask) for occ in pool)
        gold.extend([verb] * len(pool))
    return occurrences, gold


# ------------------------------------------------------------------------------- sweep


def calibrate(
    occurrences: Iterable[Occurrence],
    representation: Representation,
    *,
    thresholds: Sequence[float] = DEFAULT_THRESHOLDS,
    pairs: int = 20,
    matched_pairs: int = 10,
    triples: int = 5,
    min_count: int = 30,
    per_verb: int = 200,
    mask: bool = True,
    linkage: str = "average",
    min_cluster_size: int = 3,
    min_cluster_share: float = 0.05,
    random_state: int = 0,
    cache: VectorCache | None = None,
    stats: CacheStats | None = None,
    progress: Callable[[int], None] | None = None,
) -> Calibration:
    """Sweep ``thresholds`` on pseudo-verbs built from ``occurrences``; recommend by mean ARI.

    ``progress`` is called with 1 after each pseudo-verb is scored.
    """
    if not thresholds:
        raise InductionError("no thresholds to sweep")
    grid = sorted({round(float(t), 6) for t in thresholds})
    by_lemma: dict[str, list[Occurrence]] = defaultdict(list)
    for occ in occurrences:
        by_lemma[occ.lemma].append(occ)
    counts = Counter({lemma: len(occs) for lemma, occs in by_lemma.items()})
    pseudo_verbs = build_pseudo_verbs(
        counts, pairs=pairs, matched_pairs=matched_pairs, triples=triples,
        min_count=min_count, random_state=random_state,
    )
    placeholder = representation.placeholder
    layers = None
    if getattr(representation, "needs_layer_choice", False):
        layers = _choose_layers(
            representation, by_lemma, pseudo_verbs, grid, per_verb=per_verb,
            placeholder=placeholder, mask=mask, random_state=random_state,
            clusterer=SenseClusterer(linkage=linkage, min_cluster_size=min_cluster_size,
                                     min_cluster_share=min_cluster_share,
                                     random_state=random_state),
        )
    scores: dict[float, list[Any]] = {t: [] for t in grid}
    per_verb_ari: dict[str, list[float]] = {}
    described: list[dict[str, Any]] = []
    for pseudo in pseudo_verbs:
        occs, gold = conflate(
            by_lemma,
            pseudo,
            per_verb=per_verb,
            placeholder=placeholder,
            mask=mask,
            random_state=random_state,
        )
        X = encode_cached(representation, occs, cache, stats=stats)
        aris: list[float] = []
        clusterer = SenseClusterer(
            linkage=linkage,
            min_cluster_size=min_cluster_size,
            min_cluster_share=min_cluster_share,
            random_state=random_state,
        )
        for t, labels in zip(grid, clusterer.sweep(X, grid), strict=True):
            verb_scores = evaluate_verb(gold, labels.tolist(), pseudo.name)
            scores[t].append(verb_scores)
            aris.append(verb_scores.ari)
        per_verb_ari[pseudo.name] = aris
        described.append(
            {
                "name": pseudo.name,
                "kind": pseudo.kind,
                "verbs": list(pseudo.verbs),
                "occurrences": [gold.count(v) for v in pseudo.verbs],
            }
        )
        if progress is not None:
            progress(1)
    rows = [
        ThresholdScores(
            threshold=t,
            ari=float(np.mean([s.ari for s in scores[t]])),
            bcubed_f1=float(np.mean([s.bcubed_f1 for s in scores[t]])),
            paired_f1=float(np.mean([s.paired_f1 for s in scores[t]])),
            v_measure=float(np.mean([s.v_measure for s in scores[t]])),
            clusters_per_verb=float(np.mean([s.induced_senses for s in scores[t]])),
        )
        for t in grid
    ]
    best = max(rows, key=lambda row: (round(row.ari, 12), -row.threshold))
    return Calibration(
        representation=representation.id,
        model=representation.model,
        representation_settings=representation.settings,
        thresholds=rows,
        recommended=best,
        pseudo_verbs=described,
        settings={
            "pairs": pairs,
            "matched_pairs": matched_pairs,
            "triples": triples,
            "min_count": min_count,
            "per_verb": per_verb,
            "mask": mask,
            "linkage": linkage,
            "min_cluster_size": min_cluster_size,
            "min_cluster_share": min_cluster_share,
            "random_state": random_state,
        },
        per_verb_ari=per_verb_ari,
        layers=layers,
    )


def _choose_layers(
    representation: Representation,
    by_lemma: Mapping[str, Sequence[Occurrence]],
    pseudo_verbs: Sequence[PseudoVerb],
    grid: Sequence[float],
    *,
    clusterer: SenseClusterer,
    **conflation: Any,
) -> dict[str, Any]:
    """The transformer's layer mix, scored on the same pseudo-verbs and thresholds."""
    from lexbuild.senses.transformer import TransformerEncoder, choose_layers

    assert isinstance(representation, TransformerEncoder)
    samples = [conflate(by_lemma, pseudo, **conflation) for pseudo in pseudo_verbs]

    def sweep(X: Any, gold: Sequence[str]) -> list[float]:
        return [evaluate_verb(list(gold), labels.tolist(), "layers").ari
                for labels in clusterer.sweep(X, grid)]

    return choose_layers(representation, samples, sweep, grid).to_json()


# ------------------------------------------------------------------------------ output


def _plot(calibration: Calibration) -> bytes:
    import io

    import matplotlib

    matplotlib.use("Agg")
    from matplotlib.figure import Figure

    xs = [row.threshold for row in calibration.thresholds]
    figure = Figure(figsize=(7, 4.5), dpi=100)
    axes = figure.add_subplot(1, 1, 1)
    for name, label in (
        ("ari", "adjusted Rand index"),
        ("bcubed_f1", "B-cubed F1"),
        ("paired_f1", "paired F1"),
        ("v_measure", "V-measure"),
    ):
        axes.plot(xs, [getattr(row, name) for row in calibration.thresholds], marker="o",
                  markersize=3, label=label)
    axes.axvline(calibration.recommended.threshold, color="grey", linestyle="--",
                 label=f"recommended {calibration.recommended.threshold:g}")
    axes.set_xlabel("distance threshold (cosine)")
    axes.set_ylabel("mean score over pseudo-verbs")
    axes.set_ylim(-0.05, 1.05)
    twin = axes.twinx()
    twin.plot(xs, [row.clusters_per_verb for row in calibration.thresholds], color="black",
              linewidth=0.8, linestyle=":", label="clusters per verb")
    twin.set_ylabel("clusters per verb")
    axes.set_title(f"Threshold calibration: {calibration.representation}")
    lines = axes.get_legend_handles_labels()
    twin_lines = twin.get_legend_handles_labels()
    axes.legend(lines[0] + twin_lines[0], lines[1] + twin_lines[1], fontsize=8, loc="best")
    figure.tight_layout()
    buffer = io.BytesIO()
    # No software or date stamps: the same calibration gives the same bytes.
    figure.savefig(buffer, format="png", metadata={"Software": None})
    return buffer.getvalue()


def write_calibration(calibration: Calibration, folder: str | Path, *, plot: bool = True) -> Path:
    """Write ``calibration.json`` (and ``calibration.png`` when ``plot``) into ``folder``."""
    target = Path(folder)
    target.mkdir(parents=True, exist_ok=True)
    path = target / "calibration.json"
    atomic_write_text(
        path, json.dumps(calibration.to_json(), indent=2, ensure_ascii=False, sort_keys=True) + "\n"
    )
    if plot:
        atomic_write_bytes(target / "calibration.png", _plot(calibration))
    return path


def read_calibration(path: str | Path) -> dict[str, Any]:
    """Read a ``calibration.json`` (or the folder holding one); checks the fields induce uses."""
    file = Path(path)
    if file.is_dir():
        file = file / "calibration.json"
    try:
        data = json.loads(file.read_text(encoding="utf-8"))
    except json.JSONDecodeError as error:
        raise InductionError(f"{file}:{error.lineno}: not valid JSON ({error.msg})") from None
    try:
        float(data["recommended"]["threshold"])
        str(data["representation"])
    except (KeyError, TypeError, ValueError):
        raise InductionError(
            f"{file}: missing 'recommended.threshold' or 'representation'; write it with "
            "'lexbuild calibrate'"
        ) from None
    return dict(data)
