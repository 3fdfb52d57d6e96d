"""The typed model and the canonical frame string."""

from __future__ import annotations

import pytest
from hypothesis import given
from hypothesis import strategies as st
from pydantic import ValidationError

from lexbuild.errors import FrameSyntaxError
from lexbuild.lexicon.model import (
    Entry,
    Frame,
    Function,
    LexiconMeta,
    Realisation,
    Sense,
    Slot,
    Status,
    format_frame,
    parse_frame,
)

markers = st.lists(
    st.text(
        alphabet=st.characters(
            blacklist_characters="[]", blacklist_categories=("Cs", "Cc", "Zs", "Zl", "Zp")
        ),
        min_size=1,
        max_size=6,
    ),
    min_size=0,
    max_size=3,
).map(" ".join)
slots = st.builds(
    Slot,
    function=st.sampled_from(list(Function)),
    realisation=st.sampled_from(list(Realisation)),
    marker=markers,
    optional=st.booleans(),
)


@given(st.lists(slots, max_size=6))
def test_string_frame_string_is_identity(slot_list: list[Slot]) -> None:
    text = format_frame(slot_list)
    assert parse_frame(text) == tuple(slot_list)
    assert format_frame(parse_frame(text)) == text
    assert Frame(pattern=text).pattern == text


def test_known_frame() -> None:
    frame = Frame(pattern="subj:EXPL refl:CLITIC[se] obl:PP[à cause de]?")
    assert [slot.function for slot in frame.slots] == [
        Function.SUBJECT,
        Function.REFLEXIVE,
        Function.OBLIQUE,
    ]
    assert frame.slots[2].marker == "à cause de"
    assert frame.slots[2].optional
    assert Frame(pattern="()").slots == ()


@pytest.mark.parametrize(
    "text",
    ["", " subj:NP", "subj:NP  obj:NP", "subj:XX", "agent:NP", "subj:NP obl:PP[de", "subj:NP,"],
)
def test_bad_frame_strings(text: str) -> None:
    with pytest.raises(FrameSyntaxError):
        parse_frame(text)


def test_slot_frequencies_must_align() -> None:
    with pytest.raises(ValidationError, match="one per slot"):
        Frame(pattern="subj:NP obj:NP", slot_frequencies=[3])


def test_unknown_fields_and_bad_ids_rejected() -> None:
    with pytest.raises(ValidationError):
        Sense.model_validate({"id": "a.s1", "colour": "red"})
    with pytest.raises(ValidationError):
        Sense.model_validate({"id": "1a"})
    with pytest.raises(ValidationError, match="status"):
        Sense.model_validate({"id": "a.s1", "status": "final"})
    assert Sense.model_validate({"id": "a.s1", "status": "approved"}).status is Status.APPROVED


def test_strict_types() -> None:
    with pytest.raises(ValidationError):
        Frame.model_validate({"pattern": "subj:NP", "frequency": "12"})
    with pytest.raises(ValidationError):
        Entry.model_validate({"id": "x", "lemma": " x"})


@pytest.mark.parametrize("tag", ["fr", "fr-CA", "en-GB", "zh-Hant-TW", "fr-x-brevenn"])
def test_bcp47_accepted(tag: str) -> None:
    # Tag shapes from BCP 47 (RFC 5646, section 2.1 syntax).
    LexiconMeta(title="t", language=tag, edition=1, release_date="2026-12-01", licence="CC-BY-4.0")


@pytest.mark.parametrize("tag", ["français", "f", "fr_FR", "fr-"])
def test_bcp47_rejected(tag: str) -> None:
    with pytest.raises(ValidationError):
        LexiconMeta(
            title="t", language=tag, edition=1, release_date="2026-12-01", licence="CC-BY-4.0"
        )
