"""Identifiers: the lemma -> NCName mapping is reversible and always yields an NCName."""

from __future__ import annotations

import unicodedata

import pytest
from hypothesis import given
from hypothesis import strategies as st
from lxml import etree

from lexbuild.errors import IdentifierError
from lexbuild.lexicon.ids import (
    entry_id,
    id_to_lemma,
    is_ncname,
    lemma_to_id,
    next_free_id,
    sense_id,
)


@pytest.mark.parametrize(
    ("lemma", "expected"),
    [
        ("douter", "douter"),
        ("s'en aller", "s.0027en_aller"),
        ("s’en aller", "s.2019en_aller"),
        ("se rendre compte", "se_rendre_compte"),
        ("1er", "_1er"),
        ("😀", "_.u01f600"),
        ("forêt", "forêt"),
        ("à", "à"),
        ("porte-parole", "porte-parole"),
    ],
)
def test_known_mappings(lemma: str, expected: str) -> None:
    assert lemma_to_id(lemma) == expected
    assert id_to_lemma(expected) == lemma


def test_ids_parse_as_xml_ids() -> None:
    # libxml2 checks that xml:id values are NCNames while parsing (../shared/encoding/NOTES.md).
    for lemma in ["s'en aller", "1er", "_x", " a", "a.b", "x:y", "😀", "-ment"]:
        identifier = lemma_to_id(lemma)
        etree.fromstring(f'<a xml:id="{identifier}"/>'.encode())


def test_not_ncnames() -> None:
    # Cross-checked with libxml2 (through lxml), which refuses a non-NCName xml:id while
    # parsing ("attribute value ... is not an NCName"); the positives are accepted by both.
    for value in ["", "1abc", "a b", "fr:aller", "-x", ".x", "s'en"]:
        assert not is_ncname(value)
        with pytest.raises(etree.XMLSyntaxError, match="not an NCName"):
            etree.fromstring(f'<a xml:id="{value}"/>'.encode())
    for value in ["ok", "a.b", "_x", "s.0027en_aller"]:
        assert is_ncname(value)
        etree.fromstring(f'<a xml:id="{value}"/>'.encode())


def test_empty_lemma_is_an_error() -> None:
    with pytest.raises(IdentifierError):
        lemma_to_id("")


def test_foreign_dot_is_rejected_on_decoding() -> None:
    with pytest.raises(IdentifierError):
        id_to_lemma("douter.s1")


@given(st.text(min_size=1, max_size=30).filter(lambda s: "\x00" not in s))
def test_round_trip_and_ncname(lemma: str) -> None:
    identifier = lemma_to_id(lemma)
    assert is_ncname(identifier)
    assert id_to_lemma(identifier) == unicodedata.normalize("NFC", lemma)
    # libxml2 itself must accept it as an xml:id (it rejects non-NCNames while parsing).
    etree.fromstring(f'<a xml:id="{identifier}"/>'.encode())


def test_every_pass_through_letter_is_accepted_by_libxml2() -> None:
    for code in [*range(0xC0, 0x17F), *range(0x30, 0x3A)]:
        identifier = lemma_to_id("a" + chr(code))
        etree.fromstring(f'<a xml:id="{identifier}"/>'.encode())


@given(st.text(min_size=1, max_size=12), st.text(min_size=1, max_size=12))
def test_injective(first: str, second: str) -> None:
    if unicodedata.normalize("NFC", first) != unicodedata.normalize("NFC", second):
        assert lemma_to_id(first) != lemma_to_id(second)


@given(st.text(min_size=1, max_size=12), st.integers(min_value=1, max_value=40))
def test_sub_ids_never_collide_with_entry_ids(lemma: str, number: int) -> None:
    # A sense id is never the entry id of any lemma: '.s' cannot appear in an entry id.
    with pytest.raises(IdentifierError):
        id_to_lemma(sense_id(entry_id(lemma), number))


def test_next_free_id_never_reuses_retired_numbers() -> None:
    used = ["douter.s1", "douter.s4", "douter.s2.f7", "douterx.s9", "douter.h2.s8"]
    assert next_free_id("douter", "s", used) == "douter.s5"
    assert next_free_id("douter.s2", "f", used) == "douter.s2.f8"
    assert next_free_id("tenir", "s", used) == "tenir.s1"
