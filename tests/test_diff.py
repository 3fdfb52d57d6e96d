"""Comparing editions (lexbuild.editions.diff) on a hand-made pair covering every change kind.

Fixtures in tests/fixtures/editions: ``old/`` and ``new/`` are two sources folders written by
hand so that each change kind of ``diff.KINDS`` appears; ``expected_diff.json`` is the exact
report, checked line by line against the fixtures when it was written (each change is named in
the comments of ``test_every_kind_is_covered``). Being the code's own output, it is a regression
guard; ``test_simple_changes_agree_with_an_independent_reading_of_the_fixtures`` derives the
simple change kinds again from the raw YAML.
"""

from __future__ import annotations

import html.parser
import json
import time
from pathlib import Path
from typing import Any

import pytest

from lexbuild.editions.diff import (
    KINDS,
    diff_lexicons,
    diff_paths,
    load_for_diff,
    snapshot,
    tei_snapshot,
    to_html,
    to_json,
    to_markdown,
)
from lexbuild.errors import SourceError, UnsafeXMLError
from lexbuild.formats.tei import read_tei, to_tei
from lexbuild.lexicon.sources import load_lexicon

FIXTURES = Path(__file__).parent / "fixtures" / "editions"
OLD, NEW = FIXTURES / "old", FIXTURES / "new"


def test_json_report_is_exact() -> None:
    result = diff_paths(OLD, NEW, old_label="edition 1", new_label="edition 2")
    assert to_json(result) == (FIXTURES / "expected_diff.json").read_text(encoding="utf-8")


def test_every_kind_is_covered() -> None:
    summary = diff_paths(OLD, NEW).summary
    assert list(summary) == list(KINDS)  # summary counts come first, in a fixed order
    assert summary == {
        "entry-added": 1,  # hisser
        "entry-removed": 1,  # caréner
        "sense-added": 1,  # amarrer.s4
        "sense-removed": 1,  # virer.s2
        "sense-retired": 1,  # amarrer.s3 reviewed -> retired
        "gloss-changed": 1,  # amarrer.s1
        "status-changed": 1,  # amarrer.s2 draft -> reviewed
        "frame-added": 1,  # amarrer.s1 obl:PP[le long de]
        "frame-removed": 1,  # virer.s1 obl:PP[vers]
        "frequency-changed": 2,  # amarrer.s1 10 -> 11 and 4 -> 9
        "example-added": 2,  # port.5 to s1, port.4 to s2
        "example-removed": 2,  # port.2 from s1, port.4 from s3
        "sense-split": 1,  # port.1 stays in s1, port.2 goes to s4
        "sense-merged": 1,  # s2 now holds port.3 (s2) and port.4 (s3)
    }


def _raw_yaml(folder: Path) -> dict[str, dict[str, dict[str, Any]]]:
    """entry id -> sense id -> the sense as PyYAML reads it (no lexbuild code involved)."""
    import yaml

    entries = [
        yaml.safe_load(path.read_text(encoding="utf-8"))
        for path in sorted((folder / "entries").glob("*.yaml"))
    ]
    return {entry["id"]: {sense["id"]: sense for sense in entry["senses"]} for entry in entries}


def test_simple_changes_agree_with_an_independent_reading_of_the_fixtures() -> None:
    # expected_diff.json is a snapshot of the code's output (a regression guard). Here the
    # entry, sense, gloss, status, frame and frequency changes are derived again from the raw
    # YAML with a few lines of set arithmetic, and must be exactly those the diff reports.
    old, new = _raw_yaml(OLD), _raw_yaml(NEW)
    expected = {("entry-added", e, None, None, None) for e in new.keys() - old.keys()}
    expected |= {("entry-removed", e, None, None, None) for e in old.keys() - new.keys()}
    for entry in old.keys() & new.keys():
        before, after = old[entry], new[entry]
        for sense in after.keys() - before.keys():
            expected.add(("sense-added", entry, sense, None, after[sense]["status"]))
        for sense in before.keys() - after.keys():
            expected.add(("sense-removed", entry, sense, before[sense]["status"], None))
        for sense in before.keys() & after.keys():
            was, now = before[sense], after[sense]
            if was.get("gloss") != now.get("gloss"):
                expected.add(("gloss-changed", entry, sense, was.get("gloss"), now.get("gloss")))
            if was["status"] != now["status"]:
                kind = "sense-retired" if now["status"] == "retired" else "status-changed"
                expected.add((kind, entry, sense, was["status"], now["status"]))
            frames_was = {f["pattern"]: f.get("frequency") for f in was.get("frames", [])}
            frames_now = {f["pattern"]: f.get("frequency") for f in now.get("frames", [])}
            for pattern in frames_now.keys() - frames_was.keys():
                expected.add(("frame-added", entry, sense, None, frames_now[pattern]))
            for pattern in frames_was.keys() - frames_now.keys():
                expected.add(("frame-removed", entry, sense, frames_was[pattern], None))
            for pattern in frames_was.keys() & frames_now.keys():
                counts = frames_was[pattern], frames_now[pattern]
                if counts[0] != counts[1]:
                    expected.add(("frequency-changed", entry, sense, *counts))
    kinds = {change[0] for change in expected}
    reported = {
        (c.kind, c.entry, c.sense, c.old, c.new)
        for c in diff_paths(OLD, NEW).changes
        if c.kind in kinds
    }
    # Entry-level changes report a count of senses as old/new: compare kind and id only.
    def key(change: tuple[str | None, ...]) -> tuple[str | None, ...]:
        return change[:3] if str(change[0]).startswith("entry-") else change

    assert {key(c) for c in reported} == {key(c) for c in expected}
    assert len(kinds) == 10  # every kind but the example, split and merge ones


def test_tolerance_hides_small_frequency_changes() -> None:
    result = diff_paths(OLD, NEW, tolerance=0.2)  # 10 -> 11 is 10 %, 4 -> 9 is 125 %
    assert [(c.item, c.old, c.new) for c in result.of_kind("frequency-changed")] == [
        ("subj:NP obj:NP obl:PP[à]", 4, 9)
    ]


def test_released_tei_gives_the_same_changes(tmp_path: Path) -> None:
    old, new = load_lexicon(OLD).lexicon, load_lexicon(NEW).lexicon
    (tmp_path / "e1").mkdir()
    (tmp_path / "e1" / "lexicon.tei.xml").write_bytes(to_tei(old))
    (tmp_path / "e2.tei.xml").write_bytes(to_tei(new))
    from_tei = diff_paths(tmp_path / "e1", tmp_path / "e2.tei.xml")  # edition folder, TEI file
    assert from_tei.changes == diff_lexicons(old, new).changes
    mixed = diff_paths(tmp_path / "e1", NEW)  # a TEI edition against a sources folder
    assert mixed.changes == from_tei.changes


def test_identical_inputs_have_no_changes() -> None:
    result = diff_paths(NEW, NEW)
    assert not result and set(result.summary.values()) == {0}


class _Collector(html.parser.HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.tags: list[str] = []
        self.links: list[str] = []
        self.text = ""

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self.tags.append(tag)
        self.links += [v or "" for k, v in attrs if k in {"src", "href"}]

    def handle_data(self, data: str) -> None:
        self.text += data


def test_html_is_escaped_and_self_contained() -> None:
    page = to_html(diff_paths(OLD, NEW))
    # Python's own HTML parser (reference reader) sees no element coming from the data
    collector = _Collector()
    collector.feed(page)
    assert set(collector.tags) <= {"html", "head", "meta", "title", "style", "body", "h1", "h2",
                                   "table", "tr", "th", "td", "ul", "li", "code"}
    assert collector.links == [] and "<script" not in page
    assert "&lt;à quai&gt; &amp; le tenir" in page
    assert "'attacher un navire <à quai> & le tenir'" in collector.text  # unescaped back


def test_markdown_starts_with_summary() -> None:
    text = to_markdown(diff_paths(OLD, NEW))
    assert text.index("## Summary") < text.index("## Entries added")
    assert "| Frames removed | 1 |" in text


# Both files follow the classic published attacks (billion laughs: the "lol" entity chain of
# the Wikipedia article "Billion laughs attack"; XXE: OWASP "XML External Entity Processing").
@pytest.mark.parametrize("name", ["billion_laughs.tei.xml", "external_entity.tei.xml"])
def test_malicious_tei_is_refused_without_expansion(name: str, tmp_path: Path) -> None:
    start = time.perf_counter()
    with pytest.raises(UnsafeXMLError) as caught:
        load_for_diff(FIXTURES / name)
    assert time.perf_counter() - start < 5  # expanding 10^9 "lol" would take far longer
    assert "root:" not in str(caught.value)  # nothing of /etc/passwd leaked into the message
    edition = tmp_path / "edition-9"
    edition.mkdir()
    (edition / "lexicon.tei.xml").write_bytes((FIXTURES / name).read_bytes())
    with pytest.raises(UnsafeXMLError):
        diff_paths(OLD, edition)


def test_json_round_trips() -> None:
    data = json.loads(to_json(diff_paths(OLD, NEW)))
    assert data["summary"]["sense-split"] == 1
    assert data["changes"][0] == {
        "kind": "entry-added", "entry": "hisser", "sense": None, "item": "hisser",
        "old": None, "new": 1, "related": [],
    }


@pytest.mark.parametrize("folder", [OLD, NEW, Path(__file__).parent.parent / "sample_lexicon"])
def test_fast_tei_reading_agrees_with_read_tei(folder: Path) -> None:
    data = to_tei(load_lexicon(folder).lexicon)
    assert tei_snapshot(data) == snapshot(read_tei(data))


def test_bad_frequency_in_tei_names_the_line() -> None:
    data = to_tei(load_lexicon(NEW).lexicon).replace(b'value="9"', b'value="neuf"', 1)
    with pytest.raises(SourceError) as caught:
        tei_snapshot(data)
    assert caught.value.location is not None and caught.value.location.line > 1
