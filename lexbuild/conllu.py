"""CoNLL-U reading (streaming) and writing.

Types are fixed here so that every stage can rely on them; the reader fills them.
"""

from __future__ import annotations

from dataclasses import dataclass, field

__all__ = ["Sentence", "Token"]


@dataclass(frozen=True, slots=True)
class Token:
    """One syntactic word (CoNLL-U line with an integer ID)."""

    id: int
    form: str
    lemma: str
    upos: str
    xpos: str
    feats: str  # raw FEATS column ('_' when empty)
    head: int  # 0 for the root
    deprel: str  # full relation with subtype, e.g. 'obl:arg'
    deps: str
    misc: str
    line: int = 0  # 1-based line in the file it came from


@dataclass(frozen=True, slots=True)
class Sentence:
    """One sentence: its syntactic words (multiword-token ranges and empty nodes set apart)."""

    id: str  # sent_id, or '<file stem>-<n>' when the file gives none
    text: str  # '# text', or the forms joined following SpaceAfter=No
    tokens: tuple[Token, ...]
    source: str = ""  # the file it came from
    line: int = 0  # 1-based line of its first line in that file
    metadata: tuple[tuple[str, str], ...] = ()  # '# key = value' comments, in order
    multiword: tuple[tuple[int, int, str, str], ...] = ()  # (first id, last id, form, misc)
    empty_nodes: tuple[str, ...] = field(default=())  # raw lines of empty nodes (8.1 ...)
