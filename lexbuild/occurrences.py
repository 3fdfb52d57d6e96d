"""Verb occurrences: one record per verb token, with its argument slots.

The types are fixed here; the extraction from UD trees fills them. Corpus reading knows nothing
of the lexicon model except the ``Slot`` type of a frame.
"""

from __future__ import annotations

from dataclasses import dataclass

from lexbuild.model import Slot, format_frame

__all__ = ["Argument", "Occurrence"]


@dataclass(frozen=True, slots=True)
class Argument:
    """One dependent of the verb that fills a valency slot."""

    slot: Slot
    head: int  # 0-based index of the argument's head in the sentence's tokens
    lemma: str  # lemma of that head (the clause's verb for a clausal complement)
    span: tuple[int, int]  # characters [start, end) of its subtree in the sentence text; (-1, -1) unknown


@dataclass(frozen=True, slots=True)
class Occurrence:
    """One verb token in a corpus sentence."""

    lemma: str  # the verb's lemma (pronominal use is a 'refl' slot, never 'se X')
    sentence_id: str
    source: str  # corpus file
    text: str  # the sentence text
    token: int  # 0-based index of the verb in ``words``
    char_span: tuple[int, int]  # the verb's characters [start, end) in ``text``; (-1, -1) unknown
    words: tuple[str, ...]  # forms of the sentence's syntactic words, in order
    lemmas: tuple[str, ...]  # their lemmas
    arguments: tuple[Argument, ...]  # in canonical slot order (``model.slot_sort_key``)
    passive: bool = False  # a passive normalised to its active frame
    adjuncts: int = 0  # obl:mod / advmod / advcl dependents seen (not arguments)

    @property
    def slots(self) -> tuple[Slot, ...]:
        return tuple(argument.slot for argument in self.arguments)

    @property
    def frame(self) -> str:
        """The canonical frame string of this occurrence."""
        return format_frame(self.slots)

    @property
    def key(self) -> str:
        """A key unique in a corpus: '<source>#<sentence id>#<token>'."""
        return f"{self.source}#{self.sentence_id}#{self.token}"
