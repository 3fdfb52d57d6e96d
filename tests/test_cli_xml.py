"""``lexbuild export`` and ``lexbuild validate``: exit codes, messages, no file on failure."""

from __future__ import annotations

import json
import re
import shutil
from pathlib import Path

import pytest
from lxml import etree

from lexbuild.cli import main

FIXTURES = Path(__file__).parent / "fixtures" / "xml"


@pytest.fixture
def sources(tmp_path: Path, sample_lexicon_dir: Path) -> Path:
    folder = tmp_path / "sources"
    shutil.copytree(sample_lexicon_dir, folder)
    return folder


def line_of(path: Path, needle: str) -> int:
    lines = path.read_text(encoding="utf-8").splitlines()
    return next(number for number, line in enumerate(lines, start=1) if needle in line)


@pytest.mark.parametrize("fmt", ["tei", "lmf"])
def test_export_writes_a_valid_file(
    fmt: str, sources: Path, schemas_dir: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    output = tmp_path / f"out.{fmt}.xml"
    argv = ["export", str(sources), "--format", fmt, "--output", str(output)]
    assert main([*argv, "--schemas", str(schemas_dir)]) == 0
    assert "valid" in capsys.readouterr().out
    tree = etree.parse(str(output))
    if fmt == "tei":
        # TEI Lex-0 RelaxNG, ../shared/schemas/TEILex0.rng
        assert etree.RelaxNG(etree.parse(str(schemas_dir / "TEILex0.rng"))).validate(tree)
    else:
        # LMF DTD rev. 16, ../shared/schemas/DTD_LMF_REV_16.dtd
        assert etree.DTD(str(schemas_dir / "DTD_LMF_REV_16.dtd")).validate(tree)
    first = output.read_bytes()
    assert main([*argv, "--schemas", str(schemas_dir)]) == 0
    assert output.read_bytes() == first  # deterministic: same sources, same bytes
    assert [p.name for p in output.parent.iterdir() if p.name.endswith(".tmp")] == []


def test_export_uses_the_environment_schema_folder(
    sources: Path, schemas_dir: Path, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setenv("LEXBUILD_SCHEMAS", str(schemas_dir))
    output = tmp_path / "env.xml"
    assert main(["export", str(sources), "--format", "lmf", "--output", str(output)]) == 0
    monkeypatch.setenv("LEXBUILD_SCHEMAS", str(tmp_path / "empty"))
    assert main(["export", str(sources), "--format", "lmf", "--output", str(output)]) == 2


def test_export_stops_on_check_errors(
    sources: Path, schemas_dir: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    douter = sources / "entries" / "douter.yaml"
    text = douter.read_text(encoding="utf-8")
    # The first example's verb span now ends far past its text: check E201.
    broken = re.sub(r"verb: \[(\d+), \d+\]", r"verb: [\1, 999]", text, count=1)
    assert broken != text
    douter.write_text(broken, encoding="utf-8")
    output = tmp_path / "out.xml"
    code = main(
        [
            "export",
            str(sources),
            "--format",
            "tei",
            "--output",
            str(output),
            "--schemas",
            str(schemas_dir),
        ]
    )
    captured = capsys.readouterr()
    assert code == 1
    assert not output.exists()
    assert f"douter.yaml:{line_of(douter, 'verb: ')}" in captured.out
    assert "E201" in captured.out


def test_export_stops_when_an_extra_schema_rejects_it(
    sources: Path, schemas_dir: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    shutil.copy(FIXTURES / "tei_short_gloss.sch", sources / "short_gloss.sch")
    meta = sources / "lexicon.yaml"
    meta.write_text(
        meta.read_text(encoding="utf-8")
        + "extra_schemas:\n  - {path: short_gloss.sch, kind: sch, format: tei}\n",
        encoding="utf-8",
    )
    output = tmp_path / "out.xml"
    code = main(
        [
            "export",
            str(sources),
            "--format",
            "tei",
            "--output",
            str(output),
            "--schemas",
            str(schemas_dir),
        ]
    )
    captured = capsys.readouterr()
    assert code == 1
    assert not output.exists()
    douter = sources / "entries" / "douter.yaml"
    # The deliberately broken export points back at the YAML file and line of the sense.
    assert f"source: {douter}:{line_of(douter, 'id: douter.s1')}:" in captured.out
    assert "A gloss has at most 60 characters" in captured.out
    # The LMF export is not concerned by a TEI customisation.
    assert (
        main(
            [
                "export",
                str(sources),
                "--format",
                "lmf",
                "--output",
                str(output),
                "--schemas",
                str(schemas_dir),
            ]
        )
        == 0
    )


def test_validate_exit_codes(
    sources: Path, schemas_dir: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    tei = tmp_path / "a.tei.xml"
    lmf = tmp_path / "a.lmf.xml"
    for fmt, path in (("tei", tei), ("lmf", lmf)):
        assert (
            main(
                [
                    "export",
                    str(sources),
                    "--format",
                    fmt,
                    "--output",
                    str(path),
                    "--schemas",
                    str(schemas_dir),
                ]
            )
            == 0
        )
    schemas = ["--schemas", str(schemas_dir)]
    assert main(["validate", str(tei), str(lmf), *schemas]) == 0
    broken = tmp_path / "broken.xml"
    broken.write_bytes(tei.read_bytes().replace(b' type="lex-0"', b""))
    capsys.readouterr()
    assert main(["validate", str(tei), str(broken), *schemas, "--format", "json"]) == 1
    report = json.loads(capsys.readouterr().out)
    assert report["problems"] >= 1
    assert {f["document"] for f in report["findings"]} == {str(broken)}
    assert main(["validate", str(tmp_path / "missing.xml"), *schemas]) == 2
    assert main(["validate", str(tei), "--schemas", str(tmp_path)]) == 2
    # With --sources, problems name the YAML line.
    entry = tmp_path / "entry.xml"
    entry.write_bytes(
        tei.read_bytes().replace(
            b'<entry xml:id="tenir" xml:lang="fr"',
            b'<entry xml:id="tenir" xml:lang="fr" status="x"',
        )
    )
    capsys.readouterr()
    assert main(["validate", str(entry), *schemas, "--sources", str(sources)]) == 1
    tenir = sources / "entries" / "tenir.yaml"
    assert f"source: {tenir}:{line_of(tenir, 'id: tenir')}:" in capsys.readouterr().out


def test_commands_run_with_fewer_collections_and_restore_the_collector(
    sources: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    # A command runs under COMMAND_GC_THRESHOLDS; the caller's thresholds come back after it,
    # whether it succeeds or fails.
    import contextlib
    import gc
    from collections.abc import Iterator

    from lexbuild.cli import common

    seen: list[tuple[int, ...]] = []

    @contextlib.contextmanager
    def recording() -> Iterator[None]:
        with common.command_gc():
            seen.append(gc.get_threshold())
            yield

    before = gc.get_threshold()
    monkeypatch.setattr("lexbuild.cli.command_gc", recording)
    assert main(["check", str(sources)]) == 0
    assert main(["check", str(sources / "missing")]) == 2
    assert len(seen) == 2 and all(t[0] >= common.COMMAND_GC_THRESHOLDS[0] for t in seen)
    assert gc.get_threshold() == before
