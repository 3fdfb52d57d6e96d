"""lexbuild: from a parsed corpus to a published, validated, versioned valency dictionary."""

from __future__ import annotations

from lexbuild.errors import LexbuildError, SourceLocation
from lexbuild.lexicon.ids import entry_id, id_to_lemma, is_ncname, lemma_to_id
from lexbuild.lexicon.model import (
    Entry,
    Example,
    Frame,
    Lexicon,
    LexiconMeta,
    Sense,
    Slot,
    Status,
    format_frame,
    parse_frame,
)

__version__ = "0.1.0"

__all__ = [
    "Entry",
    "Example",
    "Frame",
    "LexbuildError",
    "Lexicon",
    "LexiconMeta",
    "Sense",
    "Slot",
    "SourceLocation",
    "Status",
    "__version__",
    "entry_id",
    "format_frame",
    "id_to_lemma",
    "is_ncname",
    "lemma_to_id",
    "parse_frame",
]
