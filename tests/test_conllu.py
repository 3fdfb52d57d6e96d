"""The streaming CoNLL-U reader: agreement with a reference parser, errors, round trip."""

from __future__ import annotations

import gzip
import lzma
import shutil
from dataclasses import replace
from pathlib import Path

import conllu as reference
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from lexbuild.corpus.conllu import (
    Sentence,
    Token,
    format_sentence,
    iter_sentences,
    read_sentences,
    write_conllu,
)
from lexbuild.errors import CorpusError

FIXTURES = Path(__file__).parent / "fixtures" / "conllu"

# (fixture, line the defect is on, words expected in the message)
MALFORMED = [
    ("columns.conllu", 10, "columns"),
    ("bad_id.conllu", 10, "not an integer"),
    ("head_not_integer.conllu", 9, "not an integer"),
    ("head_out_of_range.conllu", 9, "out of range"),
    ("cycle.conllu", 10, "cycle"),
    ("no_root.conllu", 9, "no root"),
    ("non_utf8.conllu", 10, "UTF-8"),
]


def _ud_files(ud_dir: Path) -> list[Path]:
    files = sorted(ud_dir.glob("*.conllu"))
    assert files, f"no .conllu file in {ud_dir}"
    return files


def _reference_words(tokenlist: reference.TokenList) -> list[tuple[object, ...]]:
    return [
        (t["id"], t["form"], t["lemma"], t["upos"], t["head"], t["deprel"])
        for t in tokenlist
        if isinstance(t["id"], int)
    ]


def _our_words(sentence: Sentence) -> list[tuple[object, ...]]:
    # The reference parser turns '_' into None in UPOS (not in FORM/LEMMA).
    return [
        (t.id, t.form, t.lemma, None if t.upos == "_" else t.upos, t.head, t.deprel)
        for t in sentence.tokens
    ]


@pytest.mark.slow
def test_agrees_with_reference_parser_on_every_ud_sentence(ud_dir: Path) -> None:
    # agreement with the `conllu` package (EmilStenstrom/conllu), conllu.parse_incr
    for path in _ud_files(ud_dir):
        ours = iter_sentences(path)
        with path.open(encoding="utf-8") as handle:
            count = 0
            for expected in reference.parse_incr(handle):
                sentence = next(ours)
                where = f"{path.name}, sentence {count + 1}"
                assert sentence.id == expected.metadata["sent_id"], where
                assert sentence.text == expected.metadata["text"], where
                assert _our_words(sentence) == _reference_words(expected), where
                count += 1
        assert next(ours, None) is None, f"{path.name}: extra sentences"
        assert count > 100


def test_multiword_and_empty_nodes_kept_apart(ud_dir: Path) -> None:
    # The CoNLL-U specification (universaldependencies.org/format.html): a multiword token's ID
    # is a range "1-2" over the syntactic words that follow it; an empty node's ID is a decimal
    # "8.1"; word IDs are integers from 1. Cross-checked with the `conllu` package, which reads
    # both kinds of ID as tuples.
    gsd = read_sentences(ud_dir / "fr_gsd-ud-test.conllu")
    with_mwt = next(s for s in gsd if s.multiword)
    first, last, form, _ = with_mwt.multiword[0]
    assert last > first and form
    assert [t.id for t in with_mwt.tokens] == list(range(1, len(with_mwt.tokens) + 1))
    with (ud_dir / "fr_gsd-ud-test.conllu").open(encoding="utf-8") as stream:
        theirs = next(
            s for s in reference.parse_incr(stream) if s.metadata.get("sent_id") == with_mwt.id
        )
    ranges = [t for t in theirs if isinstance(t["id"], tuple) and t["id"][1] == "-"]
    assert (ranges[0]["id"][0], ranges[0]["id"][2], ranges[0]["form"]) == (first, last, form)
    ewt = read_sentences(ud_dir / "en_ewt-ud-dev.conllu")
    with_empty = next(s for s in ewt if s.empty_nodes)
    assert "." in with_empty.empty_nodes[0].split("\t")[0]


@pytest.mark.parametrize(("name", "line", "words"), MALFORMED)
def test_malformed_raises_with_file_and_line(name: str, line: int, words: str) -> None:
    path = FIXTURES / name
    with pytest.raises(CorpusError) as info:
        read_sentences(path)
    message = str(info.value)
    assert f"{path}:{line}" in message
    assert words in message
    assert info.value.location is not None and info.value.location.line == line


@pytest.mark.parametrize(("name", "line", "words"), MALFORMED)
def test_malformed_skipped_and_recorded(name: str, line: int, words: str) -> None:
    errors: list[CorpusError] = []
    sentences = read_sentences(FIXTURES / name, on_error="skip", errors=errors)
    assert [s.id for s in sentences] == ["ok-1", "ok-2"]
    assert len(errors) == 1 and errors[0].location is not None
    assert errors[0].location.line == line


def test_folder_glob_gz_xz(tmp_path: Path) -> None:
    source = FIXTURES / "cycle.conllu"
    shutil.copy(source, tmp_path / "a.conllu")
    (tmp_path / "b.conllu.gz").write_bytes(gzip.compress(source.read_bytes()))
    (tmp_path / "c.conllu.xz").write_bytes(lzma.compress(source.read_bytes()))
    (tmp_path / "notes.txt").write_text("not a corpus")
    ids = [s.id for s in iter_sentences(tmp_path, on_error="skip")]
    assert ids == ["ok-1", "ok-2"] * 3
    by_glob = read_sentences(str(tmp_path / "*.conllu*"), on_error="skip")
    assert [s.source for s in by_glob][::2] == [
        str(tmp_path / n) for n in ("a.conllu", "b.conllu.gz", "c.conllu.xz")
    ]
    with pytest.raises(CorpusError, match="no file matches"):
        read_sentences(str(tmp_path / "*.nothing"))


def test_fallback_id_and_text_honour_space_after(tmp_path: Path) -> None:
    # The CoNLL-U specification (universaldependencies.org/format.html): the text is the
    # tokens' forms (a multiword token's form, not its words') joined by one space, except
    # after a token whose MISC has SpaceAfter=No. The sentence-id fallback is our own rule.
    path = tmp_path / "bare.conllu.gz"
    rows = [
        "1-2\tdu\t_\t_\t_\t_\t_\t_\t_\t_",
        "1\tde\tde\tADP\t_\t_\t3\tcase\t_\t_",
        "2\tle\tle\tDET\t_\t_\t3\tdet\t_\t_",
        "3\tpain\tpain\tNOUN\t_\t_\t0\troot\t_\tSpaceAfter=No",
        "4\t!\t!\tPUNCT\t_\t_\t3\tpunct\t_\t_",
    ]
    path.write_bytes(gzip.compress(("\n".join(rows) + "\n\n" + "\n".join(rows) + "\n").encode()))
    first, second = read_sentences(path)
    assert (first.id, second.id) == ("bare.1", "bare.2")
    assert first.text == "du pain!"
    assert (first.line, second.line) == (1, 7)


def test_write_then_read_round_trip(ud_dir: Path, tmp_path: Path) -> None:
    original = read_sentences(ud_dir / "en_ewt-ud-dev.conllu")[:300]
    target = tmp_path / "out.conllu"
    write_conllu(original, target)
    again = read_sentences(target)
    assert [(s.id, s.text, s.metadata, s.multiword, s.empty_nodes) for s in again] == [
        (s.id, s.text, s.metadata, s.multiword, s.empty_nodes) for s in original
    ]
    def unlined(sentences: list[Sentence]) -> list[list[Token]]:
        return [[replace(t, line=0) for t in s.tokens] for s in sentences]

    assert unlined(again) == unlined(original)


_form = st.text(alphabet=st.characters(codec="utf-8", exclude_categories=("Cc", "Cs", "Zs",
                                                                          "Zl", "Zp")),
                min_size=1, max_size=6)


@settings(max_examples=60, deadline=None)
@given(forms=st.lists(_form, min_size=1, max_size=8), data=st.data())
def test_format_sentence_round_trip_property(
    forms: list[str], data: st.DataObject, tmp_path_factory: pytest.TempPathFactory
) -> None:
    # Any well-formed tree (each word's head an earlier word, the first the root) round-trips.
    tokens = tuple(
        Token(i, form, form.lower(), "X", "_", "_",
              0 if i == 1 else data.draw(st.integers(1, i - 1)),
              "root" if i == 1 else "dep", "_", "_")
        for i, form in enumerate(forms, 1)
    )
    sentence = Sentence(id="s1", text=" ".join(forms), tokens=tokens)
    path = tmp_path_factory.mktemp("rt") / "one.conllu"
    path.write_text(format_sentence(sentence), encoding="utf-8")
    (back,) = read_sentences(path)
    assert (back.id, back.text) == ("s1", " ".join(forms))
    assert [(t.form, t.head) for t in back.tokens] == [(t.form, t.head) for t in tokens]
