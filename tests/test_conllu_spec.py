"""CoNLL-U checked against the format's rules: the CoNLL-U specification of Universal
Dependencies (https://universaldependencies.org/format.html). Each malformed case ends in one
CorpusError naming file, line, column and field; damaged compressed files too."""

from __future__ import annotations

import gzip
import lzma
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from lexbuild.cli import main
from lexbuild.corpus.conllu import format_sentence, read_sentences
from lexbuild.errors import CorpusError

WORDS = [
    "1\tLe\tle\tDET\t_\t_\t2\tdet\t_\t_",
    "2\tphare\tphare\tNOUN\t_\t_\t3\tnsubj\t_\t_",
    "3\tbrille\tbriller\tVERB\t_\t_\t0\troot\t_\t_",
]
VALID = "# sent_id = s1\n# text = Le phare brille\n" + "\n".join(WORDS) + "\n\n"


def _sentence(*lines: str) -> str:
    return "# sent_id = s1\n" + "\n".join(lines) + "\n\n"


def _replace(index: int, line: str) -> str:
    words = list(WORDS)
    words[index] = line
    return _sentence(*words)


def _insert(index: int, line: str) -> str:
    words = list(WORDS)
    words.insert(index, line)
    return _sentence(*words)


RANGE = "\tdu\t_\t_\t_\t_\t_\t_\t_\t_"
EMPTY = "\tvu\tvoir\tVERB\t_\t_\t_\t_\t2:conj\t_"

# (name, text, line of the defect, words the message must contain)
MALFORMED = [
    # "Multiword tokens are indexed with integer ranges like 1-2" (the specification, ID field)
    ("range of one word", _insert(0, "1-1" + RANGE), 2, "two words or more"),
    ("range from 0", _insert(0, "0-1" + RANGE), 2, "malformed"),
    (
        "range overlapping",
        _insert(1, "2-3" + RANGE).replace("# sent_id = s1\n", "# sent_id = s1\n1-2" + RANGE + "\n"),
        4,
        "overlap",
    ),
    ("range past the sentence", _insert(2, "3-4" + RANGE), 4, "past the last word"),
    ("range after its words", _insert(2, "1-2" + RANGE), 4, "just before"),
    ("range in other digits", _insert(0, "\u00b2-\u00b3" + RANGE), 2, "malformed"),
    ("range with a huge number", _insert(0, "7-99999999999999999999" + RANGE), 2, "malformed"),
    # "empty nodes ... decimal numbers ... i.1, i.2 after word i" (the specification, ID field)
    ("empty node .0", _insert(3, "3.0" + EMPTY), 5, "malformed"),
    ("empty node past its word", _insert(3, "99.1" + EMPTY), 5, "must follow word 99"),
    ("empty node with a head", _insert(3, "3.1\tvu\tvoir\tVERB\t_\t_\t3\tconj\t_\t_"), 5, "HEAD"),
    ("empty node out of order", _insert(3, "3.2" + EMPTY), 5, "must follow"),
    # "There must be exactly one root" (HEAD 0)
    ("two roots", _replace(1, "2\tphare\tphare\tNOUN\t_\t_\t0\troot\t_\t_"), 4, "second root"),
    # IDs are integers 1, 2, 3 ... written with ASCII digits
    (
        "id with a leading zero",
        _replace(2, "03\tbrille\tbriller\tVERB\t_\t_\t0\troot\t_\t_"),
        4,
        "ID",
    ),
    ("id with a space", _replace(0, " 1\tLe\tle\tDET\t_\t_\t2\tdet\t_\t_"), 2, "ID"),
    ("id with a plus", _replace(0, "+1\tLe\tle\tDET\t_\t_\t2\tdet\t_\t_"), 2, "ID"),
    ("id in Arabic-Indic digits", _replace(0, "\u0661\tLe\tle\tDET\t_\t_\t2\tdet\t_\t_"), 2, "ID"),
    ("head with a leading zero", _replace(0, "1\tLe\tle\tDET\t_\t_\t02\tdet\t_\t_"), 2, "HEAD"),
    ("head with a plus", _replace(0, "1\tLe\tle\tDET\t_\t_\t+2\tdet\t_\t_"), 2, "HEAD"),
    # "Fields must never be empty" (the specification)
    ("empty field", _replace(0, "1\tLe\t\tDET\t_\t_\t2\tdet\t_\t_"), 2, "LEMMA is empty"),
    # Control characters: a carriage return inside a field would break TSV output.
    (
        "carriage return in a field",
        _replace(0, "1\tLe\tle\r\tDET\t_\t_\t2\tdet\t_\t_"),
        2,
        "LEMMA contains the control character",
    ),
    # A lone carriage return in a comment ends the line for line-based readers (found by the
    # random-input test below).
    (
        "carriage return in a comment",
        "# sent_id = s1\n# te\rxt = Le phare brille\n" + "\n".join(WORDS) + "\n\n",
        2,
        "carriage return inside a comment line",
    ),
    # "Fields other than FORM, LEMMA and MISC must not contain space characters"
    (
        "space in DEPREL",
        _replace(0, "1\tLe\tle\tDET\t_\t_\t2\tde t\t_\t_"),
        2,
        "DEPREL contains a space",
    ),
]


@pytest.mark.parametrize(
    ("name", "text", "line", "words"), MALFORMED, ids=[m[0] for m in MALFORMED]
)
def test_malformed_sentence_is_refused(
    tmp_path: Path, name: str, text: str, line: int, words: str
) -> None:
    path = tmp_path / "bad.conllu"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(CorpusError) as info:
        read_sentences(path)
    assert info.value.location is not None
    assert (info.value.location.file, info.value.location.line) == (str(path), line)
    assert words in info.value.message


def test_column_is_named(tmp_path: Path) -> None:
    path = tmp_path / "bad.conllu"
    path.write_text(_replace(0, "1\tLe\tle\tDET\t_\t_\t2\tde t\t_\t_"), encoding="utf-8")
    with pytest.raises(CorpusError) as info:
        read_sentences(path)
    assert (
        info.value.location is not None and info.value.location.column == 19
    )  # DEPREL starts at column 19


def _fields(token: object) -> tuple[object, ...]:
    return tuple(getattr(token, name) for name in ("id", "form", "lemma", "head", "deprel"))


def test_valid_sentence_with_range_and_empty_node_round_trips(tmp_path: Path) -> None:
    text = _sentence("1-2" + RANGE, *WORDS[:2], WORDS[2], "3.1" + EMPTY)
    path = tmp_path / "ok.conllu"
    path.write_text(text, encoding="utf-8")
    (sentence,) = read_sentences(path)
    assert sentence.multiword == ((1, 2, "du", "_"),)
    again = tmp_path / "again.conllu"
    again.write_text(format_sentence(sentence), encoding="utf-8")
    (back,) = read_sentences(again)
    assert ([t[:10] for t in map(_fields, back.tokens)], back.multiword, back.empty_nodes) == (
        [t[:10] for t in map(_fields, sentence.tokens)],
        sentence.multiword,
        sentence.empty_nodes,
    )


def test_skip_counts_bad_sentences(tmp_path: Path) -> None:
    path = tmp_path / "mixed.conllu"
    path.write_text(VALID + MALFORMED[0][1] + VALID + MALFORMED[11][1], encoding="utf-8")
    errors: list[CorpusError] = []
    sentences = read_sentences(path, on_error="skip", errors=errors)
    assert len(sentences) == 2 and len(errors) == 2


@pytest.mark.parametrize(
    ("suffix", "damage"),
    [
        (".gz", lambda data: gzip.compress(data)[:-12]),  # truncated: EOFError before
        (".gz", lambda data: gzip.compress(data)[:12] + b"\x00" * 40),  # corrupt: zlib.error
        (".xz", lambda data: lzma.compress(data)[:-20]),  # truncated: EOFError / LZMAError
        (".xz", lambda data: data),  # a plain file named .xz: LZMAError before
        (".gz", lambda data: data),  # a plain file named .gz: BadGzipFile before
    ],
)
def test_damaged_compressed_file_is_one_clean_error(
    tmp_path: Path, suffix: str, damage: object
) -> None:
    path = tmp_path / f"corpus.conllu{suffix}"
    path.write_bytes(damage(VALID.encode() * 200))  # type: ignore[operator]
    with pytest.raises(CorpusError) as info:
        read_sentences(path)
    assert info.value.location is not None and info.value.location.file == str(path)
    with pytest.raises(CorpusError):  # skipping cannot read past a damaged stream either
        read_sentences(path, on_error="skip", errors=[])


def test_empty_path_is_refused(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.chdir(tmp_path)
    (tmp_path / "x.conllu").write_text(VALID, encoding="utf-8")
    with pytest.raises(CorpusError, match="empty corpus path"):
        read_sentences("")


def test_cli_frames_exits_2_without_traceback(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    path = tmp_path / "corpus.conllu.gz"
    path.write_bytes(gzip.compress(VALID.encode() * 50)[:-9])
    assert main(["frames", str(path)]) == 2
    err = capsys.readouterr().err
    assert str(path) in err and "Traceback" not in err


def test_every_ud_sentence_still_reads(ud_dir: Path) -> None:
    # The shared UD treebanks pass the official validator: the rules above must accept them.
    conllu = pytest.importorskip("conllu")
    for path in sorted(ud_dir.glob("fr_sequoia-ud-dev.conllu")):
        with path.open(encoding="utf-8") as handle:
            theirs = sum(1 for _ in conllu.parse_incr(handle))
        assert len(read_sentences(path)) == theirs


@settings(
    max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(data=st.data())
def test_mutated_corpus_reads_or_fails_cleanly(data: st.DataObject, tmp_path: Path) -> None:
    raw = (VALID * 3).encode()
    start = data.draw(st.integers(0, len(raw)))
    noise = data.draw(st.binary(max_size=8) | st.sampled_from([b"\t", b"\n", b"-", b".", b"0"]))
    cut = data.draw(st.integers(start, len(raw)))
    path = tmp_path / "fuzz.conllu"
    path.write_bytes(raw[:start] + noise + raw[cut:])
    try:
        for sentence in read_sentences(path):
            assert "\r" not in format_sentence(sentence)
    except CorpusError as error:
        assert error.location is not None and error.location.line >= 1
