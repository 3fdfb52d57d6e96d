"""Example sentences of a sense, chosen for dictionary use.

Complete sentences of moderate length showing the sense's main frame, closest to the sense's
centroid first, no near-duplicates.
"""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path

from lexbuild.corpus.occurrences import Occurrence
from lexbuild.corpus.valency import match_frame
from lexbuild.lexicon.ids import example_id
from lexbuild.lexicon.model import ArgumentSpan, Example, Frame, SourceRef
from lexbuild.senses.settings import InductionSettings

__all__ = ["choose_examples", "corpus_name"]

_DEFAULTS = InductionSettings()
_TERMINAL = (".", "!", "?", "…", "»", '"', "”", ")")



def _complete(text: str) -> bool:
    stripped = text.strip()
    if not stripped:
        return False
    first = stripped[0]
    return (first.isupper() or first.isdigit() or first in "«\"“'(") and stripped.endswith(
        _TERMINAL
    )


def _word_set(occ: Occurrence) -> frozenset[str]:
    return frozenset(w.lower() for w in occ.words if any(c.isalnum() for c in w))


def _near_duplicate(a: frozenset[str], b: frozenset[str], limit: float = 0.6) -> bool:
    if not a or not b:
        return a == b
    return len(a & b) / len(a | b) >= limit


def _argument_spans(occ: Occurrence, frame: Frame | None) -> list[ArgumentSpan]:
    if frame is None:
        return []
    positions = {slot.required(): number for number, slot in enumerate(frame.slots, 1)}
    spans = []
    for argument in occ.arguments:
        number = positions.get(argument.slot.required())
        if number is not None and argument.span[0] >= 0:
            spans.append(ArgumentSpan(slot=number, span=argument.span))
    return sorted(spans, key=lambda a: a.slot)


def choose_examples(
    occurrences: Sequence[Occurrence],
    similarity: Sequence[float],
    frames: Sequence[Frame],
    parent_id: str,
    *,
    k: int = _DEFAULTS.examples,
    words: tuple[int, int] = _DEFAULTS.example_words,
) -> list[Example]:
    """Up to ``k`` examples of one sense for a dictionary.

    Ranked in tiers: (1) complete sentence, moderate length, shows the sense's main frame;
    (2) complete and moderate; (3) the rest. Within a tier, closest to the centroid first
    (``similarity``: cosine of each occurrence to it). Near-duplicates of a chosen sentence
    (same text, or Jaccard overlap of word sets 0.6 or more) are skipped. Occurrences whose
    verb cannot be located in the text are never chosen.
    """
    if k <= 0:
        return []
    main = frames[0] if frames else None
    lo, hi = words
    ranked: list[tuple[int, float, str, int, Frame | None]] = []
    for index, occ in enumerate(occurrences):
        if occ.char_span[0] < 0:
            continue
        frame = match_frame(occ.slots, frames) if frames else None
        moderate = lo <= len(occ.words) <= hi
        complete = _complete(occ.text)
        shows_main = main is not None and frame is not None and frame.id == main.id
        tier = 0 if complete and moderate and shows_main else 1 if complete and moderate else 2
        ranked.append((tier, -float(similarity[index]), occ.key, index, frame))
    ranked.sort(key=lambda item: item[:3])
    chosen: list[Example] = []
    chosen_sets: list[frozenset[str]] = []
    texts: set[str] = set()
    for _, _, _, index, frame in ranked:
        occ = occurrences[index]
        bag = _word_set(occ)
        if occ.text in texts or any(_near_duplicate(bag, other) for other in chosen_sets):
            continue
        texts.add(occ.text)
        chosen_sets.append(bag)
        chosen.append(
            Example(
                id=example_id(parent_id, len(chosen) + 1),
                text=occ.text,
                source=SourceRef(corpus=corpus_name(occ.source), sentence=occ.sentence_id),
                verb=occ.char_span,
                frame=frame.id if frame is not None else None,
                arguments=_argument_spans(occ, frame),
            )
        )
        if len(chosen) == k:
            break
    return chosen


def corpus_name(source: str) -> str:
    # The file stem, so that a corpus parsed to "<id>.conllu" is cited by its declared id
    # (compression suffixes dropped first: "<id>.conllu.gz" is "<id>" too).
    if not source:
        return ""
    name = Path(source).name
    for suffix in (".gz", ".xz"):
        name = name.removesuffix(suffix)
    return Path(name).stem
