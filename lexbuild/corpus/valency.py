"""Valency frames from verb occurrences: counted slot patterns, noise dropped, optional slots.

The pipeline, the same for one verb (``frames_for``) and for a whole corpus (``count_frames``):

1. **Count.** Each occurrence contributes its slots (``Occurrence.slots``, already in canonical
   order and without optional flags) to one raw pattern of its lemma (or of the sense given).
2. **Drop noise.** A raw pattern is kept when its count is at least ``min_count`` *and* its
   share of the verb's occurrences (all of them, dropped ones included) is at least
   ``min_share``. Parser errors and rare adjunct-like attachments mostly fall below both.
   Optionally (``significance``), the share cut-off is replaced by a binomial test against a
   noise rate, as in subcategorisation acquisition (Brent 1993; Korhonen 2002): a frequent verb
   then needs a smaller share, a rare one a larger.
3. **Optional slots.** A slot is marked optional (``obj:NP?``) when the same frame occurs with
   and without it, both above the thresholds of step 2. How it is decided, deterministically:
   the kept patterns are visited from the longest to the shortest (then by count, descending,
   then by canonical string); a pattern A absorbs the *most frequent* kept pattern B that has
   exactly A's slots minus one (ties broken by the canonical string), provided neither A nor B
   has absorbed or been absorbed yet. The merged frame is A with that one slot optional; its
   frequency is count(A) + count(B); ``slot_frequencies`` gives, per slot, how many of those
   occurrences realise it. So at most one slot per frame becomes optional: ``X? Y?`` would claim
   a pattern (neither X nor Y) that the corpus may never show, and chains (A absorbs B, which
   absorbed C) would claim the same. Set ``merge_optional=False`` to keep patterns apart.

Frames come out sorted by frequency (descending), then by canonical string, and get the ids
``frame_id(parent_id, 1..n)`` in that order. Same input, same output, bytes included.
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass

from lexbuild.corpus.argumenthood import binomial_tail
from lexbuild.corpus.occurrences import Occurrence
from lexbuild.lexicon.ids import frame_id
from lexbuild.lexicon.model import Frame, Slot, format_frame, slot_sort_key

__all__ = [
    "FrameCount",
    "FrameThresholds",
    "count_frames",
    "frames_for",
    "frames_from_patterns",
    "match_frame",
    "select_frames",
]


@dataclass(frozen=True)
class FrameThresholds:
    """Where noise ends: a raw pattern needs ``min_count`` occurrences and ``min_share``.

    Relative-frequency cut-offs of a few per cent are common practice in subcategorisation
    acquisition from parsed corpora (from memory; no single published value). The defaults (2
    occurrences, 5 % of the verb's occurrences) are ours: on the UD French treebanks they keep
    the frames tests/test_valency.py expects and drop one-off parser noise. Lower them for
    small corpora, raise ``min_share`` for parsed raw text (its argument/adjunct split is
    noisier, see lexbuild.corpus.textparse). ``Occurrence.adjuncts`` counts what was left out as
    adjuncts, to judge the split.
    """

    min_count: int = 2
    min_share: float = 0.05
    merge_optional: bool = True
    # The significance test instead of min_share (Brent 1993): a pattern is kept when the
    # binomial probability of seeing it that often, were it noise at ``noise_rate``, is below
    # ``significance``. None: the relative frequency cut-off.
    significance: float | None = None
    noise_rate: float = 0.02

    def __post_init__(self) -> None:
        if self.min_count < 1:
            raise ValueError(f"min_count must be at least 1, got {self.min_count}")
        if not 0.0 <= self.min_share <= 1.0:
            raise ValueError(f"min_share must lie in [0, 1], got {self.min_share}")
        if self.significance is not None and not 0.0 < self.significance < 1.0:
            raise ValueError(f"significance must lie in (0, 1), got {self.significance}")
        if not 0.0 < self.noise_rate < 1.0:
            raise ValueError(f"noise_rate must lie in (0, 1), got {self.noise_rate}")

    def keeps(self, count: int, total: int) -> bool:
        """Whether a pattern seen ``count`` times in ``total`` occurrences is no noise."""
        if count < self.min_count:
            return False
        if self.significance is None:
            return count / total >= self.min_share
        return binomial_tail(count, total, self.noise_rate) < self.significance


@dataclass(frozen=True, slots=True)
class FrameCount:
    """One row of a frame table: lemma, canonical frame string, count, share of the lemma."""

    lemma: str
    frame: str
    count: int
    share: float


@dataclass(frozen=True, slots=True)
class _Selected:
    slots: tuple[Slot, ...]  # canonical order, optional flags set
    frequency: int
    slot_frequencies: tuple[int, ...]

    @property
    def pattern(self) -> str:
        return format_frame(self.slots)


def _canonical(slots: Iterable[Slot]) -> tuple[Slot, ...]:
    return tuple(sorted((slot.required() for slot in slots), key=slot_sort_key))


def select_frames(
    counts: Mapping[tuple[Slot, ...], int], thresholds: FrameThresholds = FrameThresholds()
) -> tuple[list[tuple[tuple[Slot, ...], int, tuple[int, ...]]], int]:
    """Apply steps 2 and 3 to raw pattern counts of one verb (or sense).

    Returns the selected frames as ``(slots, frequency, slot_frequencies)`` in output order,
    and the total number of occurrences counted (the denominator of every share).
    """
    merged: Counter[tuple[Slot, ...]] = Counter()
    for slots, count in counts.items():
        merged[_canonical(slots)] += count
    total = sum(merged.values())
    if total == 0:
        return [], 0
    kept = {slots: count for slots, count in merged.items() if thresholds.keeps(count, total)}
    selected = (
        _merge_optional(kept)
        if thresholds.merge_optional
        else [_Selected(slots, count, (count,) * len(slots)) for slots, count in kept.items()]
    )
    selected.sort(key=lambda s: (-s.frequency, s.pattern))
    return [(s.slots, s.frequency, s.slot_frequencies) for s in selected], total


def _merge_optional(kept: dict[tuple[Slot, ...], int]) -> list[_Selected]:
    order = sorted(kept, key=lambda s: (-len(s), -kept[s], format_frame(s)))
    used: set[tuple[Slot, ...]] = set()
    result: list[_Selected] = []
    for longer in order:
        if longer in used:
            continue
        candidates = []
        for position in range(len(longer)):
            shorter = longer[:position] + longer[position + 1 :]
            if shorter in kept and shorter not in used:
                candidates.append((-kept[shorter], format_frame(shorter), position, shorter))
        if not candidates:
            continue
        _, _, position, shorter = min(candidates)
        used.update((longer, shorter))
        slots = tuple(
            slot.model_copy(update={"optional": True}) if index == position else slot
            for index, slot in enumerate(longer)
        )
        frequency = kept[longer] + kept[shorter]
        slot_frequencies = tuple(
            kept[longer] if index == position else frequency for index in range(len(longer))
        )
        result.append(_Selected(slots, frequency, slot_frequencies))
    for slots, count in kept.items():
        if slots not in used:
            result.append(_Selected(slots, count, (count,) * len(slots)))
    return result


def frames_for(
    occurrences: Sequence[Occurrence],
    *,
    parent_id: str,
    thresholds: FrameThresholds = FrameThresholds(),
) -> list[Frame]:
    """The frames of one verb or one sense, ids ``frame_id(parent_id, 1..n)``.

    Sorted by frequency (descending), then by canonical pattern string.
    """
    counts: Counter[tuple[Slot, ...]] = Counter(occurrence.slots for occurrence in occurrences)
    return frames_from_patterns(counts, parent_id=parent_id, thresholds=thresholds)


def frames_from_patterns(
    patterns: Mapping[tuple[Slot, ...], int],
    *,
    parent_id: str,
    thresholds: FrameThresholds = FrameThresholds(),
) -> list[Frame]:
    """``frames_for`` from slot patterns already counted (shard tallies add up first)."""
    selected, _ = select_frames(patterns, thresholds)
    return [
        Frame(
            id=frame_id(parent_id, number),
            pattern=format_frame(slots),
            frequency=frequency,
            slot_frequencies=list(slot_frequencies),
        )
        for number, (slots, frequency, slot_frequencies) in enumerate(selected, 1)
    ]


def count_frames(
    occurrences: Iterable[Occurrence], thresholds: FrameThresholds = FrameThresholds()
) -> dict[str, list[FrameCount]]:
    """Frame table per lemma (lemmas sorted), streaming: memory grows with distinct patterns only.

    Each row's ``count`` is the selected frame's frequency (absorbed patterns included) and its
    ``share`` that count over all the lemma's occurrences.
    """
    per_lemma: dict[str, Counter[tuple[Slot, ...]]] = {}
    for occurrence in occurrences:
        counter = per_lemma.get(occurrence.lemma)
        if counter is None:
            counter = per_lemma[occurrence.lemma] = Counter()
        counter[occurrence.slots] += 1
    table: dict[str, list[FrameCount]] = {}
    for lemma in sorted(per_lemma):
        selected, total = select_frames(per_lemma[lemma], thresholds)
        table[lemma] = [
            FrameCount(lemma, format_frame(slots), frequency, frequency / total)
            for slots, frequency, _ in selected
        ]
    return table


def match_frame(slots: Sequence[Slot], frames: Sequence[Frame]) -> Frame | None:
    """The first frame (in the given order) an occurrence's slots realise, optional slots
    present or absent; None when none fits (e.g. the occurrence's pattern was dropped as noise).
    """
    wanted = _canonical(slots)
    for frame in frames:
        required = tuple(slot for slot in frame.slots if not slot.optional)
        optional = [slot.required() for slot in frame.slots if slot.optional]
        if _canonical(required) == wanted:
            return frame
        for index in range(1, 1 << len(optional)):
            extra = [slot for bit, slot in enumerate(optional) if index >> bit & 1]
            if _canonical((*required, *extra)) == wanted:
                return frame
    return None
