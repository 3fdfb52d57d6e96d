"""Hypothesis strategies: random lexicons that pass ``lexbuild check`` without errors.

Text is deliberately hostile: accents, apostrophes (ASCII and typographic), right-to-left
scripts and bidi controls, emoji beyond the Basic Multilingual Plane, ``<``, ``&``, ``>`` and
quotes, tabs and newlines. Only characters XML 1.0 forbids (and the C1 controls the checks
refuse) are left out. Ids follow ``lexbuild.lexicon.ids``; every sense has frames and examples, verb
spans cover the lemma, PP slots have a marker, approved senses have a gloss.

    from tests.strategies import lexicons
    @given(lexicons())
    def test_something(lexicon): ...
"""

from __future__ import annotations

import datetime as dt
import unicodedata

from hypothesis import strategies as st

from lexbuild.lexicon import ids
from lexbuild.lexicon.model import (
    NEEDS_MARKER,
    ArgumentSpan,
    Corpus,
    Editor,
    Entry,
    Example,
    Frame,
    Function,
    Lexicon,
    LexiconMeta,
    Realisation,
    Sense,
    Slot,
    SourceRef,
    Status,
    format_frame,
)

__all__ = [
    "NASTY_SNIPPETS",
    "entries",
    "frames",
    "lemmas",
    "lexicons",
    "metas",
    "nasty_text",
    "slots",
]

#: Pieces that break naive XML or text handling, mixed into every generated text.
NASTY_SNIPPETS = (
    "<",
    ">",
    "&",
    "&amp;",
    '"',
    "'",
    "’",
    "]]>",
    "<!--",
    "é",
    "e\u0301",  # e + combining acute (NFD)
    "שלום",  # Hebrew
    "مرحبا",  # Arabic
    "\u200f",  # right-to-left mark
    "\u202e",  # right-to-left override
    "😀",  # beyond the BMP
    "🇫🇷",
    "\t",
    "\n",
    "  ",
    "ﬁ",
    "ß",
    "İ",
    "\u00a0",
    "\ufeff",
)

_characters = st.characters(
    # letters, marks, numbers, punctuation, symbols, spaces; no controls (Cc), surrogates (Cs),
    # private use (Co) or unassigned code points (Cn, which hold U+FFFE and U+FFFF)
    categories=("L", "M", "N", "P", "S", "Zs"),
)


def nasty_text(min_size: int = 0, max_size: int = 6) -> st.SearchStrategy[str]:
    """Short texts made of random characters and hostile snippets."""
    piece = st.one_of(st.sampled_from(NASTY_SNIPPETS), st.text(_characters, min_size=1, max_size=4))
    return st.lists(piece, min_size=min_size, max_size=max_size).map("".join)


_word = (
    st.text(st.characters(categories=("Ll", "Lu", "Lo", "Nd")), min_size=1, max_size=8)
    .map(lambda word: unicodedata.normalize("NFC", word))
    .filter(lambda word: bool(word) and all(char.isalnum() for char in word))
)


@st.composite
def lemmas(draw: st.DrawFn) -> str:
    """A lemma whose every word is letters or digits, maybe with a clitic: ``s'en aller``."""
    words = draw(st.lists(_word, min_size=1, max_size=2))
    clitic = draw(st.sampled_from(["", "se ", "s'", "s’"]))
    return clitic + " ".join(words)


def _markers() -> st.SearchStrategy[str]:
    word = st.text(
        st.one_of(
            st.characters(categories=("L", "N")), st.sampled_from(["'", "’", "&", "<", '"', "-"])
        ),
        min_size=1,
        max_size=5,
    )
    return st.lists(word, min_size=1, max_size=3).map(" ".join)


@st.composite
def slots(draw: st.DrawFn) -> Slot:
    realisation = draw(st.sampled_from(list(Realisation)))
    needs = realisation in NEEDS_MARKER
    marker = draw(_markers()) if needs else draw(st.one_of(st.just(""), _markers()))
    return Slot(
        function=draw(st.sampled_from(list(Function))),
        realisation=realisation,
        marker=marker,
        optional=draw(st.booleans()),
    )


@st.composite
def frames(draw: st.DrawFn, frame_id: str | None = None) -> Frame:
    slot_list = draw(st.lists(slots(), min_size=0, max_size=4))
    frequency = draw(st.one_of(st.none(), st.integers(0, 10_000)))
    slot_frequencies = draw(
        st.one_of(
            st.none(),
            st.lists(st.integers(0, 10_000), min_size=len(slot_list), max_size=len(slot_list)),
        )
    )
    if not slot_list:
        slot_frequencies = None
    return Frame(
        id=frame_id,
        pattern=format_frame(slot_list),
        frequency=frequency,
        slot_frequencies=slot_frequencies,
    )


@st.composite
def _example(
    draw: st.DrawFn, lemma: str, example_id: str, frame_list: list[Frame], corpora: list[str]
) -> Example:
    left = draw(nasty_text(max_size=4))
    left = left + " " if left else ""
    right = draw(st.sampled_from([" ", ".", ", ", "!", " « ", "\n"])) + draw(nasty_text())
    right = draw(st.sampled_from([right, ""]))
    text = left + lemma + right
    verb = (len(left), len(left) + len(lemma))
    frame = draw(st.one_of(st.none(), st.sampled_from(frame_list)))
    slot_count = len(frame.slots) if frame is not None else 3
    arguments = []
    if slot_count:
        for _ in range(draw(st.integers(0, 3))):
            start = draw(st.integers(0, len(text) - 1))
            end = draw(st.integers(start + 1, len(text)))
            arguments.append(ArgumentSpan(slot=draw(st.integers(1, slot_count)), span=(start, end)))
    source = draw(
        st.one_of(
            st.none(),
            st.builds(
                SourceRef,
                corpus=st.sampled_from(corpora) if corpora else nasty_text(1),
                sentence=nasty_text(1),
            ),
        )
    )
    return Example(
        id=example_id,
        text=text,
        source=source,
        verb=verb,
        frame=frame.id if frame is not None else None,
        arguments=arguments,
    )


@st.composite
def _sense(draw: st.DrawFn, lemma: str, sense_identifier: str, corpora: list[str]) -> Sense:
    count = draw(st.integers(1, 3))
    frame_list: list[Frame] = []
    seen: set[str] = set()
    for number in range(1, count + 1):
        frame = draw(frames(ids.frame_id(sense_identifier, number)))
        if frame.pattern not in seen:
            seen.add(frame.pattern)
            frame_list.append(frame)
    examples = [
        draw(_example(lemma, ids.example_id(sense_identifier, number), frame_list, corpora))
        for number in range(1, draw(st.integers(1, 3)) + 1)
    ]
    status = draw(st.sampled_from(list(Status)))
    gloss = draw(nasty_text())
    if status is Status.APPROVED and not gloss.strip():
        gloss = "glose " + gloss
    return Sense(
        id=sense_identifier,
        gloss=gloss,
        status=status,
        frames=frame_list,
        examples=examples,
        note=draw(st.one_of(st.none(), nasty_text())),
        flags=draw(st.lists(nasty_text(1), max_size=2)),
    )


@st.composite
def entries(draw: st.DrawFn, lemma: str, corpora: list[str] = []) -> Entry:  # noqa: B006
    homograph = draw(st.one_of(st.none(), st.integers(2, 3)))
    entry_identifier = ids.entry_id(lemma, homograph)
    senses = [
        draw(_sense(lemma, ids.sense_id(entry_identifier, number), corpora))
        for number in range(1, draw(st.integers(1, 3)) + 1)
    ]
    return Entry(
        id=entry_identifier,
        lemma=lemma,
        pos=draw(st.sampled_from(["VERB", "AUX"])),
        homograph=homograph,
        senses=senses,
        note=draw(st.one_of(st.none(), nasty_text())),
    )


@st.composite
def metas(draw: st.DrawFn) -> LexiconMeta:
    editor_count = draw(st.integers(0, 2))
    corpus_count = draw(st.integers(0, 2))
    return LexiconMeta(
        title=draw(nasty_text(1)),
        language=draw(st.sampled_from(["fr", "fr-CA", "en", "ar", "he", "zh-Hant", "br"])),
        edition=draw(st.integers(1, 99)),
        release_date=draw(st.dates(dt.date(1990, 1, 1), dt.date(2100, 12, 31))),
        licence=draw(nasty_text(1)),
        editors=[
            Editor(id=f"ed{number}", name=draw(nasty_text(1))) for number in range(editor_count)
        ],
        publisher=draw(nasty_text()),
        description=draw(nasty_text()),
        corpora=[
            Corpus(
                id=f"corpus{number}",
                title=draw(nasty_text(1)),
                path=draw(st.one_of(st.none(), nasty_text(1))),
                licence=draw(st.one_of(st.none(), nasty_text(1))),
            )
            for number in range(corpus_count)
        ],
    )


@st.composite
def lexicons(draw: st.DrawFn, max_entries: int = 4) -> Lexicon:
    """A lexicon that ``lexbuild check`` accepts (warnings allowed, no errors)."""
    meta = draw(metas())
    corpora = [corpus.id for corpus in meta.corpora]
    lemma_list = draw(
        st.lists(lemmas(), min_size=1, max_size=max_entries, unique_by=ids.lemma_to_id)
    )
    entry_list = [draw(entries(lemma, corpora)) for lemma in lemma_list]
    unique: dict[str, Entry] = {entry.id: entry for entry in entry_list}
    return Lexicon(meta=meta, entries=list(unique.values()))
