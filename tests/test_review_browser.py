"""The review site in a real headless Chromium (Debian's chromium + chromium-driver, Selenium).

What a reviewer relies on: the index renders every entry, the filters narrow the list, sorting
works, an entry page shows every sense and example, nothing is logged as an error, no request
leaves the machine (Chromium's own network log: only file:// URLs), and the basics of
accessibility hold (landmarks, labelled controls, alt text on plots, keyboard reach).

Skipped when Chromium, its driver or Selenium is missing, unless ``LEXBUILD_REQUIRE_BROWSER=1``
(CI sets it: there the browser tests must run).
"""

from __future__ import annotations

import dataclasses
import json
import os
import shutil
import tempfile
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest

from lexbuild.lexicon.model import Lexicon
from lexbuild.lexicon.sources import load_lexicon
from lexbuild.review import build_site, preview_inputs, write_site
from tests.review_data import (
    INDUCED_LEMMAS,
    write_occurrence_vectors_from_cache,
    write_test_calibration,
    write_test_induction,
)

CHROMIUM = os.environ.get("LEXBUILD_CHROMIUM", "/usr/bin/chromium")
CHROMEDRIVER = os.environ.get("LEXBUILD_CHROMEDRIVER", "/usr/bin/chromedriver")
REQUIRED = os.environ.get("LEXBUILD_REQUIRE_BROWSER") == "1"


def _browser_missing() -> str | None:
    try:
        import selenium  # noqa: F401
    except ImportError:
        return "selenium is not installed"
    for path in (CHROMIUM, CHROMEDRIVER):
        if not Path(path).is_file():
            return f"{path} is missing (apt-get install chromium chromium-driver)"
    return None


_MISSING = _browser_missing()
if _MISSING and REQUIRED:
    raise RuntimeError(f"LEXBUILD_REQUIRE_BROWSER=1 but {_MISSING}")
pytestmark = pytest.mark.skipif(_MISSING is not None, reason=_MISSING or "")

#: Flags that keep Chromium from calling home (without the background-networking ones it
#: reaches out to update and field-trial hosts on start).
FLAGS = ("--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync",
         "--window-size=1280,1000")


@pytest.fixture(scope="module")
def lexicon(sample_lexicon_dir: Path) -> Lexicon:
    loaded = load_lexicon(sample_lexicon_dir).lexicon
    # one flagged sense, so that the flag filter has something to find
    first = loaded.entries[3]
    flagged = first.senses[0].model_copy(update={"flags": ["unsupported:run-test"]})
    return loaded.model_copy(update={"entries": [
        *loaded.entries[:3], first.model_copy(update={"senses": [flagged, *first.senses[1:]]}),
        *loaded.entries[4:]]})


@pytest.fixture(scope="module")
def site(lexicon: Lexicon, sample_lexicon_dir: Path,
         tmp_path_factory: pytest.TempPathFactory) -> Path:
    root = tmp_path_factory.mktemp("review-site")
    inputs = preview_inputs(
        sample_lexicon_dir, output=root / "site",
        induction=write_test_induction(lexicon, root / "induced"),
        calibration=write_test_calibration(root / "calibration"),
    )
    inputs = dataclasses.replace(inputs, lexicon=lexicon)
    return write_site(build_site(inputs), root / "site")


@pytest.fixture(scope="module")
def browser() -> Iterator[Any]:
    from selenium import webdriver
    from selenium.webdriver.chrome.service import Service

    options = webdriver.ChromeOptions()
    options.binary_location = CHROMIUM
    profile = tempfile.mkdtemp(prefix="lexbuild-chromium-")
    for flag in (*FLAGS, f"--user-data-dir={profile}"):
        options.add_argument(flag)
    options.set_capability("goog:loggingPrefs", {"browser": "ALL", "performance": "ALL"})
    driver = webdriver.Chrome(service=Service(executable_path=CHROMEDRIVER), options=options)
    driver.get("about:blank")  # leave the browser's own start page before any log is read
    driver.get_log("performance")
    try:
        yield driver
    finally:
        driver.quit()
        shutil.rmtree(profile, ignore_errors=True)


def _open(browser: Any, page: Path) -> None:
    browser.get(page.as_uri())
    browser.get_log("browser")  # nothing from earlier pages counts against this one


def _visible_lemmas(browser: Any) -> list[str]:
    return [row.find_element("css selector", "td a").text
            for row in browser.find_elements("css selector", "#entries tbody tr")
            if row.is_displayed()]


def _matching(lexicon: Lexicon, query: str) -> list[str]:
    """Lemmas the text filter should keep: the query in the lemma, a gloss or a frame."""
    return [e.lemma for e in lexicon.entries
            if any(query in text.lower() for text in (
                e.lemma, *(s.gloss for s in e.senses),
                *(f.pattern for s in e.senses for f in s.frames)))]


def _errors(browser: Any) -> list[dict[str, Any]]:
    return [entry for entry in browser.get_log("browser") if entry["level"] == "SEVERE"]


def _requests(browser: Any) -> list[str]:
    urls = []
    for entry in browser.get_log("performance"):
        message = json.loads(entry["message"])["message"]
        if message["method"] == "Network.requestWillBeSent":
            urls.append(message["params"]["request"]["url"])
    return urls


def test_index_renders_every_entry(browser: Any, site: Path, lexicon: Lexicon) -> None:
    _open(browser, site / "index.html")
    assert _visible_lemmas(browser) == [entry.lemma for entry in lexicon.entries]
    assert browser.find_element("id", "shown").text == str(len(lexicon.entries))
    assert _errors(browser) == []


def test_filters_narrow_the_list(browser: Any, site: Path, lexicon: Lexicon) -> None:
    from selenium.webdriver.support.ui import Select

    _open(browser, site / "index.html")
    browser.find_element("id", "q").send_keys("compt")
    assert "compter" in _matching(lexicon, "compt")
    assert _visible_lemmas(browser) == _matching(lexicon, "compt")
    assert len(_matching(lexicon, "compt")) < len(lexicon.entries)
    browser.find_element("id", "q").clear()
    browser.execute_script("document.getElementById('q').dispatchEvent(new Event('input',"
                           "{bubbles: true}))")
    Select(browser.find_element("id", "status")).select_by_value("draft")
    with_draft = [e.lemma for e in lexicon.entries
                  if any(s.status.value == "draft" for s in e.senses)]
    assert _visible_lemmas(browser) == with_draft
    assert 0 < len(with_draft) < len(lexicon.entries)
    assert browser.find_element("id", "shown").text == str(len(with_draft))
    Select(browser.find_element("id", "status")).select_by_value("")
    Select(browser.find_element("id", "flag")).select_by_value("unsupported")
    assert _visible_lemmas(browser) == [lexicon.entries[3].lemma]
    assert _errors(browser) == []


def test_sorting_by_number_of_senses(browser: Any, site: Path, lexicon: Lexicon) -> None:
    _open(browser, site / "index.html")
    header = browser.find_elements("css selector", "#entries thead th")[1]
    header.find_element("tag name", "button").click()
    assert header.get_attribute("aria-sort") == "ascending"
    expected = [e.lemma for e in sorted(lexicon.entries, key=lambda e: len(e.senses))]
    assert _visible_lemmas(browser) == expected  # stable: ties keep dictionary order
    header.find_element("tag name", "button").click()
    assert header.get_attribute("aria-sort") == "descending"
    assert _visible_lemmas(browser)[0] == max(lexicon.entries, key=lambda e: len(e.senses)).lemma


def test_entry_pages_show_every_sense_and_example(browser: Any, site: Path,
                                                  lexicon: Lexicon) -> None:
    for entry in lexicon.entries:
        _open(browser, site / "entries" / f"{entry.id}.html")
        articles = browser.find_elements("css selector", "article.sense")
        assert [a.get_attribute("id") for a in articles] == [s.id for s in entry.senses]
        for sense in entry.senses:
            for example in sense.examples:
                shown = browser.find_element("id", example.id)
                assert shown.is_displayed()
                verb = shown.find_element("css selector", ".verb").text
                assert verb == example.text[example.verb[0]:example.verb[1]]
        assert _errors(browser) == [], entry.id


def test_no_request_leaves_the_machine(browser: Any, site: Path, lexicon: Lexicon) -> None:
    browser.get_log("performance")
    pages = [site / "index.html", site / "diagnostics.html",
             *(site / "entries" / f"{e.id}.html" for e in lexicon.entries)]
    seen: list[str] = []
    for page in pages:
        browser.get(page.as_uri())
        seen += _requests(browser)
    assert seen, "the network log recorded nothing: the check would be blind"
    assert any(url.endswith(".svg") for url in seen)  # the plots were loaded, locally
    assert [url for url in seen if not url.startswith("file://")] == []


def test_plots_load_and_have_alt_text(browser: Any, site: Path, lexicon: Lexicon) -> None:
    induced = [e for e in lexicon.entries if e.lemma in INDUCED_LEMMAS]
    for page in [site / "diagnostics.html",
                 *(site / "entries" / f"{e.id}.html" for e in induced)]:
        _open(browser, page)
        images = browser.find_elements("tag name", "img")
        assert images
        for image in images:
            assert image.get_attribute("alt").strip()
            assert browser.execute_script(
                "return arguments[0].complete && arguments[0].naturalWidth > 0", image)
        assert _errors(browser) == []


def test_landmarks_labels_and_keyboard(browser: Any, site: Path, lexicon: Lexicon) -> None:
    from selenium.webdriver.common.keys import Keys

    for page in (site / "index.html", site / "entries" / f"{lexicon.entries[0].id}.html",
                 site / "diagnostics.html"):
        _open(browser, page)
        assert browser.find_element("tag name", "html").get_attribute("lang") == "fr"
        for landmark in ("header", "nav", "main", "footer"):
            assert browser.find_elements("tag name", landmark), (page.name, landmark)
        unlabelled = browser.execute_script(
            "return Array.from(document.querySelectorAll('input, select, button'))"
            ".filter(e => !(e.labels && e.labels.length) && !e.textContent.trim()"
            " && !e.getAttribute('aria-label')).map(e => e.outerHTML)")
        assert unlabelled == []
    _open(browser, site / "index.html")
    body = browser.find_element("tag name", "body")
    body.send_keys(Keys.TAB)
    assert browser.switch_to.active_element.get_attribute("class") == "skip"
    for _ in range(6):  # skip link, title, nav link(s), then the search field
        if browser.switch_to.active_element.get_attribute("id") == "q":
            break
        browser.switch_to.active_element.send_keys(Keys.TAB)
    assert browser.switch_to.active_element.get_attribute("id") == "q"
    browser.switch_to.active_element.send_keys("donn")
    assert _visible_lemmas(browser) == _matching(lexicon, "donn")


def test_print_style_hides_the_controls(browser: Any, site: Path) -> None:
    _open(browser, site / "index.html")
    browser.execute_cdp_cmd("Emulation.setEmulatedMedia", {"media": "print"})
    try:
        assert not browser.find_element("id", "filters").is_displayed()
        assert browser.find_element("id", "entries").is_displayed()
    finally:
        browser.execute_cdp_cmd("Emulation.setEmulatedMedia", {"media": ""})
    assert browser.find_element("id", "filters").is_displayed()


@pytest.mark.slow
def test_demo_release_site_renders_every_entry(browser: Any, schemas_dir: Path,
                                               tmp_path: Path) -> None:
    from lexbuild.demo import run_demo

    summary = run_demo(tmp_path / "demo", schemas_dir=schemas_dir)
    merged = load_lexicon(summary.sources).lexicon
    for edition in summary.editions:
        site = edition.folder / "site"
        _open(browser, site / "index.html")
        assert len(_visible_lemmas(browser)) == len(merged.entries)
        for entry in merged.entries:
            _open(browser, site / "entries" / f"{entry.id}.html")
            assert browser.find_element("tag name", "h1").text.startswith(entry.lemma)
            assert _errors(browser) == [], (edition.folder.name, entry.id)
    last = summary.editions[-1].folder / "site" / "entries" / f"{merged.entries[0].id}.html"
    _open(browser, last)
    articles = browser.find_elements("css selector", "article.sense")
    assert [a.get_attribute("id") for a in articles] == [s.id for s in merged.entries[0].senses]

    # The merged sources with the real induction: a projection per induced verb.
    from lexbuild.cli import main

    count = write_occurrence_vectors_from_cache(
        summary.induced, summary.conllu, tmp_path / "demo" / "vector-cache.sqlite")
    assert count == summary.occurrences
    review = tmp_path / "review"
    assert main(["preview", str(summary.sources), "--induction", str(summary.induced),
                 "--output", str(review)]) == 0
    for lemma in summary.senses_per_verb:
        entry = next(e for e in merged.entries if e.lemma == lemma)
        _open(browser, review / "entries" / f"{entry.id}.html")
        plots = browser.find_elements("css selector", "figure img")
        assert len(plots) == 1 and lemma in plots[0].get_attribute("alt")
        assert browser.execute_script(
            "return arguments[0].complete && arguments[0].naturalWidth > 0", plots[0])
        assert _errors(browser) == [], lemma
