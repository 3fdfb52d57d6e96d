"""The review site (lexbuild.review) and ``lexbuild preview``: pages, determinism, release hook."""

from __future__ import annotations

import hashlib
import html
import json
import re
import shutil
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest

from lexbuild.cli import main
from lexbuild.editions.diff import KINDS
from lexbuild.editions.release import release
from lexbuild.errors import InductionError, LexbuildError
from lexbuild.lexicon.model import Lexicon, Status
from lexbuild.lexicon.sources import load_lexicon, write_entry
from lexbuild.review import (
    SiteInputs,
    build_site,
    preview_inputs,
    read_induction_view,
    write_site,
)
from lexbuild.review.labels import LANGUAGES, labels_for
from lexbuild.review.markup import el, text
from lexbuild.review.pages import highlighted
from lexbuild.review.plots import project_2d
from tests.review_data import (
    CHOSEN_THRESHOLD,
    INDUCED_LEMMAS,
    cluster_size,
    write_test_calibration,
    write_test_induction,
)


@pytest.fixture(scope="module")
def sample(sample_lexicon_dir: Path) -> Lexicon:
    return load_lexicon(sample_lexicon_dir).lexicon


def _tree(folder: Path) -> dict[str, str]:
    return {p.relative_to(folder).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file()}


class _Collect(HTMLParser):
    """Reads back what a page holds, with the stdlib's HTML parser (not our builder)."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.tags: list[tuple[str, dict[str, str | None]]] = []
        self.data: list[str] = []

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self.tags.append((tag, dict(attrs)))

    def handle_data(self, data: str) -> None:
        self.data.append(data)


def _parse(page: bytes) -> _Collect:
    parser = _Collect()
    parser.feed(page.decode("utf-8"))
    return parser


def test_label_tables_have_the_same_words() -> None:
    assert set(LANGUAGES["fr"]) == set(LANGUAGES["en"])
    assert all(f"kind.{kind}" in LANGUAGES["en"] for kind in KINDS)
    assert all(f"status.{status.value}" in LANGUAGES["en"] for status in Status)
    assert labels_for("fr-CA")[0] == "fr"
    assert labels_for("de")[0] == "en"  # no German words yet: English


def test_labels_follow_the_dictionary_language(sample: Lexicon) -> None:
    english = sample.model_copy(update={"meta": sample.meta.model_copy(update={"language": "en"})})
    index = build_site(SiteInputs(english))["index.html"].decode()
    assert '<html lang="en">' in index and ">Entries<" in index and "Entrées" not in index


def test_markup_escapes_text_and_attributes() -> None:
    page = el("p", {"title": '"><script>'}, "<b>&", el("i", None, "x"))
    assert page == '<p title="&quot;&gt;&lt;script&gt;">&lt;b&gt;&amp;<i>x</i></p>'
    assert text(page) is page


def test_index_lists_every_entry_and_each_entry_has_a_page(sample: Lexicon) -> None:
    files = build_site(SiteInputs(sample))
    index = _parse(files["index.html"])
    rows = [attrs for tag, attrs in index.tags if tag == "tr" and "data-search" in attrs]
    assert len(rows) == len(sample.entries)
    links = {attrs["href"] for tag, attrs in index.tags if tag == "a"}
    for entry in sample.entries:
        assert f"entries/{entry.id}.html" in links
        assert f"entries/{entry.id}.html" in files
    assert index.tags[0] == ("html", {"lang": "fr"})  # the dictionary's language
    assert "Entrées" in "".join(index.data)


def test_entry_page_shows_every_sense_frame_and_example(sample: Lexicon) -> None:
    files = build_site(SiteInputs(sample))
    for entry in sample.entries:
        page = _parse(files[f"entries/{entry.id}.html"])
        ids = {attrs.get("id") for _, attrs in page.tags}
        words = re.sub(r"\s+", " ", "".join(page.data))
        for sense in entry.senses:
            assert sense.id in ids
            for frame in sense.frames:
                assert frame.pattern in words
            for example in sense.examples:
                assert example.id in ids
                # the slot tags are inserted inside the text: compare with them removed
                item = _example_text(files[f"entries/{entry.id}.html"].decode(), example.id)
                assert item == example.text


def _example_text(page: str, example_id: str) -> str:
    body = page.split(f'<li id="{example_id}">', 1)[1].split('<span class="src">', 1)[0]
    body = re.sub(r"<sub>.*?</sub>", "", body)
    return html.unescape(re.sub(r"<[^>]+>", "", body)).rstrip()


def test_highlight_marks_the_verb_and_each_argument_by_function(sample: Lexicon) -> None:
    entry = next(e for e in sample.entries if e.lemma == "compter")
    sense = entry.senses[2]  # compter.s3, frame subj:NP obl:PP[sur]
    example = sense.examples[1]  # "Nous comptons sur vous samedi au marché."
    labels = labels_for("fr")[1]
    marked = highlighted(sense, example, labels)
    assert '<strong class="verb">comptons</strong>' in marked
    assert '<mark class="s-subj">Nous<sub>subj</sub></mark>' in marked
    assert '<mark class="s-obl">sur vous<sub>obl</sub></mark>' in marked


def test_hostile_text_is_escaped_everywhere(sample: Lexicon) -> None:
    entry = sample.entries[0]
    sense = entry.senses[0].model_copy(update={"gloss": "<script>alert(1)</script>",
                                               "note": 'a "quoted" & <b>'})
    hostile = sample.model_copy(update={"entries": [
        entry.model_copy(update={"senses": [sense]}), *sample.entries[1:]]})
    files = build_site(SiteInputs(hostile))
    page = files[f"entries/{entry.id}.html"].decode()
    assert "<script>alert" not in page and "&lt;script&gt;alert(1)" in page
    assert "<b>" not in page.split("</header>", 1)[1]


def test_same_sources_give_a_byte_identical_site(
    sample_lexicon_dir: Path, tmp_path: Path
) -> None:
    lexicon = load_lexicon(sample_lexicon_dir).lexicon
    induction = write_test_induction(lexicon, tmp_path / "induced")
    calibration = write_test_calibration(tmp_path / "calibration")
    trees = []
    for name in ("one", "two"):
        inputs = preview_inputs(sample_lexicon_dir, output=tmp_path / name,
                                induction=induction, calibration=calibration)
        write_site(build_site(inputs), tmp_path / name)
        trees.append(_tree(tmp_path / name))
    assert trees[0] == trees[1]
    assert "plots/calibration.svg" in trees[0]
    assert {f"plots/{e.id}.svg" for e in lexicon.entries if e.lemma in INDUCED_LEMMAS} <= set(
        trees[0])
    svg = (tmp_path / "one" / "plots" / "calibration.svg").read_text()
    assert "<dc:date>" not in svg  # no date stamp


def test_site_bytes_do_not_depend_on_the_process(sample_lexicon_dir: Path,
                                                 tmp_path: Path) -> None:
    # Two interpreters with different string hashing (set and dict orders could differ).
    import os
    import subprocess
    import sys

    lexicon = load_lexicon(sample_lexicon_dir).lexicon
    induction = write_test_induction(lexicon, tmp_path / "induced")
    calibration = write_test_calibration(tmp_path / "calibration")
    for salt in ("1", "2"):
        subprocess.run(
            [sys.executable, "-m", "lexbuild", "preview", str(sample_lexicon_dir),
             "--induction", str(induction), "--calibration", str(calibration),
             "--output", str(tmp_path / salt)],
            check=True, capture_output=True, cwd=Path(__file__).resolve().parent.parent,
            env={**os.environ, "PYTHONHASHSEED": salt},
        )
    assert _tree(tmp_path / "1") == _tree(tmp_path / "2")


def test_induction_view_reads_sizes_and_frames(sample: Lexicon, tmp_path: Path) -> None:
    view = read_induction_view(write_test_induction(sample, tmp_path / "induced"))
    assert sorted(view.entries) == sorted(INDUCED_LEMMAS)
    compter = view.entries["compter"]
    assert [s.assigned for s in compter.senses] == [cluster_size(r)
                                                    for r in range(len(compter.senses))]
    assert compter.senses[0].frames == (("subj:NP obj:NP", 20),)
    assert view.vectors is not None and view.vectors["compter.s1"].shape == (12, 16)
    assert view.manifest["threshold"] == CHOSEN_THRESHOLD


def test_projection_matches_scikit_learn_pca() -> None:
    # Reference: scikit-learn's PCA on the same stacked matrix (sorted sense order).
    from sklearn.decomposition import PCA

    rng = np.random.RandomState(3)
    vectors = {"b.s2": rng.normal(size=(5, 6)).astype(np.float32) + 3,
               "b.s1": rng.normal(size=(7, 6)).astype(np.float32)}
    points, labels = project_2d(vectors)
    expected = PCA(n_components=2).fit_transform(
        np.vstack([vectors["b.s1"], vectors["b.s2"]]).astype(np.float64))
    assert labels == ["b.s1"] * 7 + ["b.s2"] * 5
    np.testing.assert_allclose(points, expected, atol=1e-9)


def test_site_without_occurrence_vectors_says_why(sample: Lexicon, tmp_path: Path) -> None:
    induced = write_test_induction(sample, tmp_path / "induced", vectors=False)
    files = build_site(SiteInputs(sample, induction=read_induction_view(induced)))
    assert not any(name.startswith("plots/") for name in files)
    assert "occurrence-vectors.npz" in files["entries/compter.html"].decode()


def test_calibration_plot_alt_names_the_chosen_threshold(sample: Lexicon, tmp_path: Path) -> None:
    inputs = preview_inputs("sample_lexicon", output=tmp_path / "site",
                            calibration=write_test_calibration(tmp_path / "calibration"))
    page = _parse(build_site(SiteInputs(sample, calibration=inputs.calibration))[
        "diagnostics.html"])
    images = [attrs for tag, attrs in page.tags if tag == "img"]
    assert images and all(attrs.get("alt") for attrs in images)
    assert str(CHOSEN_THRESHOLD) in str(images[0]["alt"])


def test_bad_induction_json_names_the_file_and_line(sample: Lexicon, tmp_path: Path) -> None:
    folder = write_test_induction(sample, tmp_path / "induced")
    (folder / "induction.json").write_text('{\n  "run": oops\n}\n')
    with pytest.raises(InductionError, match=r"induction\.json:2"):
        read_induction_view(folder)
    code = main(["preview", "sample_lexicon", "--induction", str(folder),
                 "--output", str(tmp_path / "site")])
    assert code == 2


def test_write_site_never_wipes_another_folder(tmp_path: Path) -> None:
    (tmp_path / "notes.txt").write_text("keep me")
    with pytest.raises(LexbuildError, match="not an earlier review site"):
        write_site({"index.html": b""}, tmp_path)
    assert (tmp_path / "notes.txt").read_text() == "keep me"


def test_preview_command_writes_the_sample_site(tmp_path: Path,
                                                capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["preview", "sample_lexicon", "--output", str(tmp_path / "site")]) == 0
    assert "20 entries" in capsys.readouterr().out
    assert len(list((tmp_path / "site" / "entries").glob("*.html"))) == 20
    # a second run replaces the earlier site
    assert main(["preview", "sample_lexicon", "--output", str(tmp_path / "site")]) == 0


def test_release_writes_the_site_listed_in_the_manifest(
    sample_lexicon_dir: Path, schemas_dir: Path, tmp_path: Path
) -> None:
    sources = tmp_path / "sources"
    shutil.copytree(sample_lexicon_dir, sources)
    first = release(sources, edition=1, output=tmp_path / "editions", schemas_dir=schemas_dir)
    entry = load_lexicon(sources).lexicon.entries[0]
    changed = entry.model_copy(update={"senses": [
        entry.senses[0].model_copy(update={"gloss": "une glose revue"}), *entry.senses[1:]]})
    write_entry(sources, changed)
    second = release(sources, edition=2, output=tmp_path / "editions", schemas_dir=schemas_dir)
    for result in (first, second):
        listed = result.manifest["site"]["files"]
        on_disk = _tree(result.folder / "site")
        assert {name: info["sha256"] for name, info in listed.items()} == on_disk
    page = (second.folder / "site" / "entries" / f"{entry.id}.html").read_text()
    assert f'changes.html#e-{entry.id}' in page  # changed entry -> its change log
    link = f"../../../edition-1/site/entries/{entry.id}.html"
    assert link in page and (second.folder / "site" / "entries" / link).resolve().is_file()
    changes = (second.folder / "site" / "changes.html").read_text()
    assert f'id="e-{entry.id}"' in changes and "une glose revue" in changes
    # the same sources released elsewhere: the same site, byte for byte
    again = tmp_path / "again"
    shutil.copytree(tmp_path / "editions" / "edition-1", again / "edition-1")
    third = release(sources, edition=2, output=again, schemas_dir=schemas_dir)
    assert _tree(third.folder / "site") == _tree(second.folder / "site")


def test_release_without_site(sample_lexicon_dir: Path, schemas_dir: Path,
                              tmp_path: Path) -> None:
    result = release(sample_lexicon_dir, edition=1, output=tmp_path, schemas_dir=schemas_dir,
                     site=False)
    assert not (result.folder / "site").exists()
    assert "site" not in json.loads((result.folder / "manifest.json").read_text())


def test_preview_of_an_edition_links_its_change_log_and_other_editions(
    sample_lexicon_dir: Path, schemas_dir: Path, tmp_path: Path
) -> None:
    editions = tmp_path / "editions"
    release(sample_lexicon_dir, edition=1, output=editions, schemas_dir=schemas_dir)
    release(sample_lexicon_dir, edition=2, output=editions, schemas_dir=schemas_dir)
    output = tmp_path / "elsewhere" / "review"
    assert main(["preview", str(editions / "edition-2"), "--output", str(output)]) == 0
    entry_id = load_lexicon(sample_lexicon_dir).lexicon.entries[0].id
    page = _parse((output / "entries" / f"{entry_id}.html").read_bytes())
    hrefs = [str(attrs["href"]) for tag, attrs in page.tags if tag == "a"]
    other = [href for href in hrefs if "edition-1" in href]
    assert other and (output / "entries" / other[0]).resolve() == (
        editions / "edition-1" / "site" / "entries" / f"{entry_id}.html").resolve()
    assert "../changes.html" in hrefs
    assert "edition 1" in (output / "changes.html").read_text()
