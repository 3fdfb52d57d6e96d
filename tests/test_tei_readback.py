"""Released TEI read back (``diff``, and ``release`` over a previous edition): every malformed
file ends in one coded error naming file, line and column, exit 2, never a traceback."""

from __future__ import annotations

from pathlib import Path

import pytest

from lexbuild.cli import main
from lexbuild.editions.release import TEI_FILE, release
from lexbuild.errors import LexbuildError, MalformedXMLError, UnsafeXMLError
from lexbuild.formats.tei import read_tei, to_tei
from lexbuild.formats.xmlsafe import parse_untrusted
from lexbuild.lexicon.sources import load_lexicon

FIXTURES = Path(__file__).parent / "fixtures" / "editions"


@pytest.fixture(scope="module")
def tei(sample_lexicon_dir: Path) -> bytes:
    return to_tei(load_lexicon(sample_lexicon_dir).lexicon)


def _second_entry_id(tei: bytes) -> bytes:
    first = tei.index(b'<entry xml:id="')
    second = tei.index(b'<entry xml:id="', first + 1)
    start = second + len(b'<entry xml:id="')
    return tei[start : tei.index(b'"', start)]


# Each damage a released file may suffer; the words libxml2 puts in its message (XML 1.0 and
# xml:id 1.0 well-formedness and validity constraints).
DAMAGES = {
    "truncated": (lambda tei: tei[: tei.rindex(b"</entry>")], "Premature end"),
    "mismatched tags": (lambda tei: tei.replace(b"</sense>", b"</entry>", 1), "mismatch"),
    "bad encoding": (lambda tei: tei.replace(b"<sense", b"<sense\xff", 1), ""),
    "latin-1 bytes": (lambda tei: tei.replace("é".encode(), b"\xe9", 1), "encoding"),
    "undeclared entity": (lambda tei: tei.replace(b"<sense", b"&nbsp;<sense", 1), "nbsp"),
    "two roots": (lambda tei: tei + b"<TEI/>\n", "Extra content"),
    "duplicate xml:id": (
        lambda tei: tei.replace(
            b'xml:id="' + _second_entry_id(tei) + b'"',
            b'xml:id="' + tei.split(b'<entry xml:id="')[1].split(b'"')[0] + b'"',
            1,
        ),
        "already defined",
    ),
    "20 MB text": (
        lambda tei: tei.replace(b"<sense", b"<note>" + b"x" * 20_000_000 + b"</note><sense", 1),
        "",
    ),
    "deep nesting": (
        lambda tei: tei.replace(b"<sense", b"<p>" * 5000 + b"</p>" * 5000 + b"<sense", 1),
        "depth",
    ),
    "empty file": (lambda tei: b"", ""),
    "not XML": (lambda tei: b"edition 1\n", ""),
    "attribute without value": (lambda tei: tei.replace(b'xml:id="', b"xml:id ", 1), ""),
    "control character": (lambda tei: tei.replace(b"<sense", b"\x01<sense", 1), ""),
}


@pytest.mark.parametrize("name", sorted(DAMAGES))
def test_damaged_tei_is_one_located_error(tei: bytes, tmp_path: Path, name: str) -> None:
    damage, words = DAMAGES[name]
    path = tmp_path / "lexicon.tei.xml"
    path.write_bytes(damage(tei))
    for read in (parse_untrusted, read_tei):
        with pytest.raises(LexbuildError) as caught:
            read(path)
        error = caught.value
        assert error.location is not None and error.location.file == str(path), name
        if isinstance(error, MalformedXMLError):
            assert error.location.line >= 1 and error.location.column >= 1
            assert words.lower() in error.message.lower()


@pytest.mark.parametrize("name", ["truncated", "duplicate xml:id", "deep nesting"])
def test_diff_exits_2_without_traceback(
    tei: bytes, tmp_path: Path, name: str, capsys: pytest.CaptureFixture[str]
) -> None:
    good, bad = tmp_path / "good.tei.xml", tmp_path / "bad.tei.xml"
    good.write_bytes(tei)
    bad.write_bytes(DAMAGES[name][0](tei))
    assert main(["diff", str(bad), str(good)]) == 2
    err = capsys.readouterr().err
    assert f"{bad}:" in err and "Traceback" not in err


def test_entity_declarations_stay_refused(tmp_path: Path) -> None:
    path = tmp_path / "bomb.xml"
    path.write_bytes(b'<!DOCTYPE TEI [<!ENTITY a "aaaa">]><TEI>&a;</TEI>')
    with pytest.raises(UnsafeXMLError):
        parse_untrusted(path)


def test_release_over_a_damaged_previous_edition(
    tmp_path: Path, schemas_dir: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    output = tmp_path / "editions"
    release(FIXTURES / "old", edition=1, output=output, schemas_dir=schemas_dir)
    previous = output / "edition-1" / TEI_FILE
    previous.write_bytes(previous.read_bytes()[:-200])
    code = main(
        [
            "release",
            str(FIXTURES / "new"),
            "--edition",
            "2",
            "--output",
            str(output),
            "--schemas",
            str(schemas_dir),
        ]
    )
    err = capsys.readouterr().err
    assert code == 2 and f"{previous}:" in err and "Traceback" not in err
    assert not (output / "edition-2").exists()
