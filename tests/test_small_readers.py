"""Calibration files, induction folders and gold files: bad encoding, JSON, nesting, numbers
and TSV quoting each end in one coded error naming file, line and column (never a traceback)."""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import pytest

from lexbuild.cli import main
from lexbuild.editions.merge import merge_induction
from lexbuild.errors import CorpusError, InductionError, LexbuildError, MergeError, SourceError
from lexbuild.senses.calibrate import read_calibration
from lexbuild.senses.evaluation import read_gold_conllu, read_gold_tsv
from lexbuild.senses.induction_folder import read_assignments, read_induction

CALIBRATION = {"representation": "static-syntactic", "recommended": {"threshold": 0.45}}


def test_calibration_reads(tmp_path: Path) -> None:
    path = tmp_path / "calibration.json"
    path.write_text(json.dumps(CALIBRATION), encoding="utf-8")
    assert read_calibration(tmp_path)["recommended"]["threshold"] == 0.45


@pytest.mark.parametrize(
    ("content", "line", "column", "words"),
    [
        (b'{"representation": "x",\n "recommended": {"threshold": 0.4\xff}}', 2, 34, "not UTF-8"),
        (b'{"representation": "x",\n  "recommended": }', 2, 18, "not valid JSON"),
        (b"[" * 100_000 + b"]" * 100_000, 0, 0, "nested too deeply"),
        (b'{"recommended": {"threshold": ' + b"9" * 5000 + b"}}", 0, 0, "not valid JSON"),
        (b"[1, 2]", 0, 0, "missing 'recommended.threshold'"),
    ],
)
def test_bad_calibration_file(
    tmp_path: Path, content: bytes, line: int, column: int, words: str
) -> None:
    path = tmp_path / "calibration.json"
    path.write_bytes(content)
    with pytest.raises(InductionError) as caught:
        read_calibration(path)
    error = caught.value
    assert error.location is not None and error.location.file == str(path)
    assert (error.location.line, error.location.column) == (line, column)
    assert words in error.message


def test_gold_tsv_bad_byte_names_line_and_column(tmp_path: Path) -> None:
    path = tmp_path / "gold.tsv"
    path.write_bytes(b"sent_id\ttoken\tsense\ns1\t2\tporter.s1\ns2\t3\tporter\xe9.s1\n")
    with pytest.raises(CorpusError) as caught:
        read_gold_tsv(path)
    assert caught.value.location is not None
    assert (caught.value.location.line, caught.value.location.column) == (3, 12)


def test_gold_tsv_quoting_error_is_located(tmp_path: Path) -> None:
    path = tmp_path / "gold.tsv"
    path.write_bytes(b"s1\t2\tporter.s1\n" + b's2\t"' + b"x" * 200_000 + b'"\tporter.s1\n')
    with pytest.raises(CorpusError, match="bad TSV") as caught:
        read_gold_tsv(path)
    assert caught.value.location is not None and caught.value.location.line == 2


def test_gold_conllu_ignores_other_digits_and_names_bad_bytes(tmp_path: Path) -> None:
    path = tmp_path / "gold.conllu"
    path.write_bytes(
        b"# sent_id = s1\n\xd9\xa1\tporte\tporter\tVERB\t_\t_\t0\troot\t_\tSense=porter.s1\n\n"
    )
    assert read_gold_conllu(path) == {}
    path.write_bytes(b"# sent_id = s1\n1\tport\xe9\tporter\tVERB\t_\t_\t0\troot\t_\t_\n")
    with pytest.raises(CorpusError) as caught:
        read_gold_conllu(path)
    assert caught.value.location is not None and caught.value.location.line == 2


def test_assignments_bad_byte(tmp_path: Path) -> None:
    (tmp_path / "assignments.tsv").write_bytes(
        b"lemma\tsense\tcorpus\tsent_id\ttoken\nporter\tporter.s1\tc\ts\xff1\t2\n"
    )
    with pytest.raises(InductionError) as caught:
        read_assignments(tmp_path)
    assert caught.value.location is not None and caught.value.location.line == 2


def test_induction_json_too_deep(tmp_path: Path) -> None:
    (tmp_path / "induction.json").write_bytes(b"[" * 100_000 + b"]" * 100_000)
    with pytest.raises(MergeError, match="nested too deeply"):
        read_induction(tmp_path)


def test_centroids_that_are_not_npz(tmp_path: Path) -> None:
    (tmp_path / "induction.json").write_text("{}", encoding="utf-8")
    (tmp_path / "centroids.npz").write_bytes(b"PK\x03\x04" + b"\x00" * 40)
    with pytest.raises(SourceError, match="cannot read centroids"):
        read_induction(tmp_path)


def test_merge_names_the_real_file_of_a_duplicate_key(
    tmp_path: Path, sample_lexicon_dir: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # Before: the fast loader kept the last value, and the round-trip writer refused the staging
    # copy, naming .sources.*.partial/... instead of the file the editor has to fix.
    from tests.test_merge import InducedSense, build_induction, unit

    src = tmp_path / "sources"
    shutil.copytree(sample_lexicon_dir, src)
    entry = src / "entries" / "agir.yaml"
    entry.write_text(entry.read_text(encoding="utf-8") + "note: une autre\nnote: perdue\n", "utf-8")
    induced = build_induction(
        tmp_path / "ind", "run1", {"agir": [InducedSense(["a.1"], unit(1, 0))]}
    )
    with pytest.raises(LexbuildError) as caught:
        merge_induction(induced, src)
    assert caught.value.location is not None and caught.value.location.file == str(entry)
    assert main(["merge", str(induced), str(src)]) == 2
    err = capsys.readouterr().err
    assert str(entry) in err and ".partial" not in err
