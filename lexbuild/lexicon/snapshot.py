"""The compared view of a dictionary: what ``lexbuild diff`` compares and ``release`` counts.

A ``Snapshot`` holds, per entry id and sense id, the lemma, gloss, status, frame patterns with
their frequencies and example keys. It is built from the typed model (``snapshot``) or read
straight from a TEI Lex-0 export (``lexbuild.formats.tei.tei_snapshot``, the fast path of a
diff between two editions).
"""

from __future__ import annotations

from dataclasses import dataclass

from lexbuild.lexicon.model import Example, Lexicon, Sense

__all__ = ["EntryView", "SenseView", "Snapshot", "count_items", "example_key", "snapshot"]


@dataclass(frozen=True, slots=True)
class SenseView:
    """What the diff compares of a sense."""

    id: str
    gloss: str
    status: str
    frames: dict[str, int | None]  # canonical pattern -> frequency (first frame of a pattern)
    examples: frozenset[str]  # example keys (see ``example_key``)


@dataclass(frozen=True, slots=True)
class EntryView:
    id: str
    lemma: str
    senses: dict[str, SenseView]  # by id, in dictionary order


#: What the diff compares of a whole dictionary: entries by id, in dictionary order.
Snapshot = dict[str, EntryView]


def example_key(example: Example) -> str:
    """How an example is recognised across editions: its source, else its text."""
    if example.source is not None:
        return f"{example.source.corpus}#{example.source.sentence}"
    return f"text:{example.text}"


def _sense_view(sense: Sense) -> SenseView:
    frames: dict[str, int | None] = {}
    for frame in sense.frames:
        frames.setdefault(frame.pattern, frame.frequency)
    return SenseView(
        sense.id, sense.gloss, sense.status.value, frames,
        frozenset(example_key(example) for example in sense.examples),
    )


def snapshot(lexicon: Lexicon) -> Snapshot:
    """The compared view of a typed lexicon."""
    return {
        entry.id: EntryView(
            entry.id, entry.lemma, {sense.id: _sense_view(sense) for sense in entry.senses}
        )
        for entry in lexicon.entries
    }


def count_items(lexicon: Lexicon) -> dict[str, int]:
    """Counts of entries, senses, frames and examples (manifests and summaries)."""
    senses = [sense for entry in lexicon.entries for sense in entry.senses]
    return {
        "entries": len(lexicon.entries),
        "senses": len(senses),
        "frames": sum(len(sense.frames) for sense in senses),
        "examples": sum(len(sense.examples) for sense in senses),
    }
