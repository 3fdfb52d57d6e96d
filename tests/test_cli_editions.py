"""The ``merge``, ``release`` and ``diff`` commands: arguments, output and exit codes."""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import numpy as np
import pytest

from lexbuild.cli import main
from lexbuild.lexicon import ids, sources
from lexbuild.lexicon.model import Entry, Example, Frame, Induction, Sense, SourceRef

FIXTURES = Path(__file__).parent / "fixtures" / "editions"
OLD, NEW = FIXTURES / "old", FIXTURES / "new"


def induction_folder(folder: Path) -> Path:
    """A one-verb induction in the documented folder format."""
    (folder / "entries").mkdir(parents=True)
    sid = ids.sense_id("gréer", 1)
    entry = Entry(id="gréer", lemma="gréer", senses=[Sense(
        id=sid,
        frames=[Frame(id=f"{sid}.f1", pattern="subj:NP obj:NP", frequency=6)],
        examples=[Example(id=f"{sid}.x1", text="On grée le canot.", verb=(3, 7),
                          source=SourceRef(corpus="brevenn", sentence="chantier.9"),
                          frame=f"{sid}.f1")],
        induction=Induction(cluster_size=6, threshold=0.5, representation="t", centroid=sid,
                            run="r1"),
    )])
    (folder / "entries" / "gréer.yaml").write_text(sources.dump_entry(entry), encoding="utf-8")
    np.savez(folder / "centroids.npz", **{sid: np.ones(4, dtype=np.float32) / 2})  # type: ignore[arg-type]
    (folder / "assignments.tsv").write_text(
        "lemma\tsense\tcorpus\tsent_id\ttoken\ngréer\tgréer.s1\tbrevenn\tchantier.9\t2\n",
        encoding="utf-8",
    )
    (folder / "induction.json").write_text(json.dumps({"run": "r1"}), encoding="utf-8")
    return folder


def test_merge_dry_run_then_merge(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    src = tmp_path / "src"
    shutil.copytree(NEW, src)
    induced = induction_folder(tmp_path / "ind")
    assert main(["merge", str(induced), str(src), "--dry-run"]) == 0
    out = capsys.readouterr().out
    assert out.startswith("# Merge report (dry run: nothing written)")
    assert not (src / "entries" / "gréer.yaml").exists()
    assert main(["merge", str(induced), str(src), "--format", "json",
                 "--report", str(tmp_path / "rep")]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["entries_added"] == ["gréer"]
    assert (src / "entries" / "gréer.yaml").is_file()
    assert json.loads((tmp_path / "rep" / "merge-report.json").read_text()) == data
    assert (tmp_path / "rep" / "merge-report.md").read_text().startswith("# Merge report")


def test_merge_bad_induction_folder_exits_2(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    src = tmp_path / "src"
    shutil.copytree(NEW, src)
    assert main(["merge", str(tmp_path), str(src)]) == 2
    assert "induction.json is missing" in capsys.readouterr().err


def test_release_and_diff(
    tmp_path: Path, schemas_dir: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    out = tmp_path / "editions"
    common = ["--output", str(out), "--schemas", str(schemas_dir)]
    assert main(["release", str(OLD), "--edition", "1", *common]) == 0
    assert main(["release", str(NEW), "--edition", "2", "--date", "2027-01-15", *common]) == 0
    printed = capsys.readouterr().out
    assert "edition 2 published" in printed and "changes since edition 1: 17" in printed
    manifest = json.loads((out / "edition-2" / "manifest.json").read_text())
    assert manifest["release_date"] == "2027-01-15"
    assert main(["diff", str(out / "edition-1"), str(out / "edition-2"), "--format", "json"]) == 1
    data = json.loads(capsys.readouterr().out)
    assert data["summary"]["entry-added"] == 1
    assert main(["diff", str(NEW), str(out / "edition-2")]) == 0  # same content both sides
    page = tmp_path / "d.html"
    assert main(["diff", str(OLD), str(NEW), "--format", "html", "--output", str(page)]) == 1
    assert page.read_text(encoding="utf-8").startswith("<!DOCTYPE html>")


def test_release_refused_exits_1(
    tmp_path: Path, schemas_dir: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    broken = tmp_path / "src"
    shutil.copytree(NEW, broken)
    path = broken / "entries" / "hisser.yaml"
    path.write_text(path.read_text().replace("[11, 18]", "[11, 15]"), encoding="utf-8")
    code = main(["release", str(broken), "--edition", "1", "--output", str(tmp_path / "o"),
                 "--schemas", str(schemas_dir)])
    assert code == 1
    assert "nothing was published" in capsys.readouterr().err
    assert not (tmp_path / "o").exists()


def test_usage_errors(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    with pytest.raises(SystemExit) as caught:
        main(["release", str(NEW), "--edition", "1", "--output", str(tmp_path), "--date", "1/2"])
    assert caught.value.code == 2
    assert "YYYY-MM-DD" in capsys.readouterr().err
    assert main(["diff", str(NEW), str(FIXTURES / "billion_laughs.tei.xml")]) == 2
    assert "refuses" in capsys.readouterr().err
    assert main(["diff", str(NEW), str(tmp_path / "missing")]) == 2
