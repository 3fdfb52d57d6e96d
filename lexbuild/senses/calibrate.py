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
from lexbuild.errors import InductionError, SourceLocation
from lexbuild.senses.evaluation import evaluate_verb
from lexbuild.senses.executor import Executor, InProcessExecutor
from lexbuild.senses.registry import get_clusterer
from lexbuild.senses.settings import CalibrationSettings, InductionSettings
from lexbuild.senses.vectors import CacheStats, Representation, VectorCache, encode_cached

__all__ = [
    "Calibration",
    "PseudoVerb",
    "ThresholdScores",
    "best_clusterer",
    "build_pseudo_verbs",
    "calibrate",
    "compare_clusterers",
    "comparison_markdown",
    "conflate",
    "read_calibration",
    "write_calibration",
]

#: Defaults come from the one settings object.
_DEFAULTS = InductionSettings()
_OPTIONS = _DEFAULTS.calibration


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
    clusterer: str = "agglomerative"
    parameter: str = "distance threshold"
    # The layer mix chosen for a transformer with layers "auto" (transformer.choose_layers).
    layers: dict[str, Any] | None = None

    def to_json(self) -> dict[str, Any]:
        return {
            "clusterer": self.clusterer,
            "parameter": self.parameter,
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
    pairs: int = _OPTIONS.pairs,
    matched_pairs: int = _OPTIONS.matched_pairs,
    triples: int = _OPTIONS.triples,
    min_count: int = _OPTIONS.min_count,
    random_state: int = _DEFAULTS.random_state,
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
    per_verb: int = _OPTIONS.per_verb,
    placeholder: str = "X",
    mask: bool = _OPTIONS.mask,
    random_state: int = _DEFAULTS.random_state,
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


@dataclass
class _Scored:
    """One pseudo-verb, conflated and encoded once, scored by every method compared."""

    pseudo: PseudoVerb
    vectors: np.ndarray
    gold: list[str]


def _pseudo_verb_vectors(
    occurrences: Iterable[Occurrence],
    representation: Representation,
    settings: InductionSettings,
    cache: VectorCache | None,
    stats: CacheStats | None,
    executor: Executor | None = None,
    counts: Mapping[str, int] | None = None,
) -> tuple[list[_Scored], dict[str, Any] | None]:
    options = settings.calibration
    by_lemma: dict[str, list[Occurrence]] = defaultdict(list)
    for occ in occurrences:
        by_lemma[occ.lemma].append(occ)
    # ``counts``: each verb's frequency in the whole corpus when ``occurrences`` is a sample
    # (pseudo-verbs are matched by frequency, which a capped sample would flatten).
    counts = Counter(counts) if counts is not None else Counter(
        {lemma: len(occs) for lemma, occs in by_lemma.items()}
    )
    pseudo_verbs = build_pseudo_verbs(
        counts, pairs=options.pairs, matched_pairs=options.matched_pairs,
        triples=options.triples, min_count=options.min_count,
        random_state=settings.random_state,
    )
    layers = None
    if getattr(representation, "needs_layer_choice", False):
        spec = get_clusterer(settings.clusterer)
        grid = sorted({round(float(t), 6) for t in (options.thresholds or spec.grid(settings))})
        layers = _choose_layers(
            representation, by_lemma, pseudo_verbs, grid,
            clusterer=spec.make(settings, grid[0]), per_verb=options.per_verb,
            placeholder=representation.placeholder, mask=options.mask,
            random_state=settings.random_state,
        )
    conflated = [
        (pseudo, *conflate(
            by_lemma,
            pseudo,
            per_verb=options.per_verb,
            placeholder=representation.placeholder,
            mask=options.mask,
            random_state=settings.random_state,
        ))
        for pseudo in pseudo_verbs
    ]
    if executor is None:
        out = [_Scored(pseudo, encode_cached(representation, occs, cache, stats=stats), gold)
               for pseudo, occs, gold in conflated]
        return out, layers
    # On workers: one task per pseudo-verb; each worker writes its own cache shard, merged
    # into the main file afterwards (as in distributed induction).
    from lexbuild.senses.distributed_induce import _portable
    from lexbuild.senses.vectors import merge_vector_shards

    folder = None if cache is None else str(cache.path)
    portable = _portable(representation)
    tasks = (_EncodeTask(occs, portable, folder) for _pseudo, occs, _gold in conflated)
    out = []
    try:
        for (pseudo, _occs, gold), (vectors, task_stats) in zip(
            conflated, executor.map(_encode_pseudo_verb, tasks), strict=True
        ):
            out.append(_Scored(pseudo, vectors, gold))
            if stats is not None:
                stats.hits += task_stats.hits
                stats.computed += task_stats.computed
    finally:
        if folder is not None:
            merge_vector_shards(folder)
    return out, layers


@dataclass(frozen=True)
class _EncodeTask:
    occurrences: list[Occurrence]
    representation: Representation
    cache: str | None


def _encode_pseudo_verb(task: _EncodeTask) -> tuple[np.ndarray, CacheStats]:
    """A pseudo-verb's vectors, through the worker's cache shard (a worker task)."""
    from lexbuild.senses.vectors import WorkerVectorCache

    stats = CacheStats()
    cache = WorkerVectorCache(task.cache) if task.cache is not None else None
    try:
        vectors = encode_cached(
            task.representation, task.occurrences, cache, stats=stats  # type: ignore[arg-type]
        )
    finally:
        if cache is not None:
            cache.close()
    return vectors, stats


@dataclass(frozen=True)
class _SweepTask:
    item: _Scored
    settings: InductionSettings
    grid: tuple[float, ...]


def _sweep_pseudo_verb(task: _SweepTask) -> list[Any]:
    """The pseudo-verb's scores at each value of the grid (a pure function: a worker task)."""
    spec = get_clusterer(task.settings.clusterer)
    clusterer = spec.make(task.settings, task.grid[0])
    item = task.item
    return [
        evaluate_verb(item.gold, labels.tolist(), item.pseudo.name)
        for labels in clusterer.sweep(item.vectors, list(task.grid))
    ]


def _sweep(
    scored: Sequence[_Scored],
    representation: Representation,
    settings: InductionSettings,
    progress: Callable[[int], None] | None,
    layers: dict[str, Any] | None = None,
    executor: Executor | None = None,
) -> Calibration:
    spec = get_clusterer(settings.clusterer)
    values = settings.calibration.thresholds or spec.grid(settings)
    grid = sorted({round(float(t), 6) for t in values})
    scores: dict[float, list[Any]] = {t: [] for t in grid}
    per_verb_ari: dict[str, list[float]] = {}
    described: list[dict[str, Any]] = []
    tasks = (_SweepTask(item, settings, tuple(grid)) for item in scored)
    swept = (executor or InProcessExecutor()).map(_sweep_pseudo_verb, tasks)
    for item, per_threshold in zip(scored, swept, strict=True):
        pseudo, gold = item.pseudo, item.gold
        aris: list[float] = []
        for t, verb_scores in zip(grid, per_threshold, strict=True):
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
    options = settings.calibration
    return Calibration(
        representation=representation.id,
        model=representation.model,
        representation_settings=representation.settings,
        thresholds=rows,
        recommended=best,
        pseudo_verbs=described,
        settings={
            "pairs": options.pairs,
            "matched_pairs": options.matched_pairs,
            "triples": options.triples,
            "min_count": options.min_count,
            "per_verb": options.per_verb,
            "mask": options.mask,
            "random_state": settings.random_state,
            "clusterer": spec.name,
            **spec.params(settings),
        },
        per_verb_ari=per_verb_ari,
        clusterer=spec.name,
        parameter=spec.parameter,
        layers=layers,
    )


def _settings(
    settings: InductionSettings | None, thresholds: Sequence[float] | None, options: dict[str, Any]
) -> InductionSettings:
    settings = settings or InductionSettings()
    if thresholds is not None:
        options["thresholds"] = tuple(float(t) for t in thresholds)
    if options:
        known = {f.name for f in dataclasses.fields(CalibrationSettings)}
        unknown = sorted(set(options) - known)
        if unknown:
            raise InductionError(f"unknown calibration setting(s): {', '.join(unknown)}")
        settings = settings.updated(
            calibration=dataclasses.replace(settings.calibration, **options)
        )
    return settings


def calibrate(
    occurrences: Iterable[Occurrence],
    representation: Representation,
    settings: InductionSettings | None = None,
    *,
    thresholds: Sequence[float] | None = None,
    cache: VectorCache | None = None,
    stats: CacheStats | None = None,
    progress: Callable[[int], None] | None = None,
    executor: Executor | None = None,
    counts: Mapping[str, int] | None = None,
    **options: Any,
) -> Calibration:
    """Sweep the clusterer's parameter on pseudo-verbs built from ``occurrences``.

    The clusterer, its parameters and ``random_state`` come from ``settings`` (the same that
    induction uses), pseudo-verb options from ``settings.calibration`` (``options`` override
    them: ``pairs=10``, ``per_verb=80`` ...). The value with the best mean ARI is recommended.
    ``progress`` is called with 1 after each pseudo-verb is scored. ``executor`` (a Dask
    cluster): each pseudo-verb encoded and swept in a task of its own, the same result.
    ``counts``: the verbs' corpus frequencies when ``occurrences`` is a per-verb sample.
    """
    settings = _settings(settings, thresholds, options)
    scored, layers = _pseudo_verb_vectors(
        occurrences, representation, settings, cache, stats, executor, counts
    )
    return _sweep(scored, representation, settings, progress, layers, executor)


def compare_clusterers(
    occurrences: Iterable[Occurrence],
    representation: Representation,
    clusterers: Sequence[str],
    settings: InductionSettings | None = None,
    *,
    cache: VectorCache | None = None,
    stats: CacheStats | None = None,
    progress: Callable[[int], None] | None = None,
    executor: Executor | None = None,
    counts: Mapping[str, int] | None = None,
    **options: Any,
) -> dict[str, Calibration]:
    """``calibrate`` for each of ``clusterers`` on the same pseudo-verbs and the same vectors.

    With several methods, each sweeps its own grid (``settings.calibration.thresholds`` is
    used only when one method is calibrated).
    """
    settings = _settings(settings, None, options)
    if len(clusterers) > 1:
        settings = settings.updated(
            calibration=dataclasses.replace(settings.calibration, thresholds=None)
        )
    for name in clusterers:
        get_clusterer(name)  # an unknown name fails before any encoding
    scored, layers = _pseudo_verb_vectors(
        occurrences, representation, settings, cache, stats, executor, counts
    )
    return {
        name: _sweep(
            scored, representation, settings.updated(clusterer=name), progress, layers, executor
        )
        for name in clusterers
    }


def best_clusterer(calibrations: dict[str, Calibration]) -> str:
    """The method whose recommended value has the best mean ARI (ties: the first listed)."""
    names = list(calibrations)
    return max(names, key=lambda n: (round(calibrations[n].recommended.ari, 12), -names.index(n)))


def _choose_layers(
    representation: Representation,
    by_lemma: Mapping[str, Sequence[Occurrence]],
    pseudo_verbs: Sequence[PseudoVerb],
    grid: Sequence[float],
    *,
    clusterer: Any,
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


def comparison_markdown(calibrations: dict[str, Calibration]) -> str:
    """A table of each method's recommended value and its mean scores, best first."""
    best = best_clusterer(calibrations)
    lines = [
        "| clusterer | parameter | recommended | mean ARI | B-cubed F1 | V-measure | "
        "clusters per pseudo-verb |",
        "|---|---|---|---|---|---|---|",
    ]
    ranked = sorted(calibrations, key=lambda n: -calibrations[n].recommended.ari)
    for name in ranked:
        c = calibrations[name]
        r = c.recommended
        mark = " (best)" if name == best else ""
        lines.append(
            f"| {name}{mark} | {c.parameter} | {r.threshold:g} | {r.ari:.3f} | "
            f"{r.bcubed_f1:.3f} | {r.v_measure:.3f} | {r.clusters_per_verb:.1f} |"
        )
    return "\n".join(lines) + "\n"


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
    axes.set_xlabel(f"{calibration.clusterer}: {calibration.parameter}")
    axes.set_ylabel("mean score over pseudo-verbs")
    axes.set_ylim(-0.05, 1.05)
    twin = axes.twinx()
    twin.plot(xs, [row.clusters_per_verb for row in calibration.thresholds], color="black",
              linewidth=0.8, linestyle=":", label="clusters per verb")
    twin.set_ylabel("clusters per verb")
    axes.set_title(f"Calibration: {calibration.representation}, {calibration.clusterer}")
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
    from lexbuild._readers import load_json

    data = load_json(file, InductionError)
    try:
        float(data["recommended"]["threshold"])
        str(data["representation"])
    except (KeyError, TypeError, ValueError):
        raise InductionError(
            "missing 'recommended.threshold' or 'representation'; write it with "
            "'lexbuild calibrate'",
            SourceLocation(str(file)),
        ) from None
    return dict(data)
