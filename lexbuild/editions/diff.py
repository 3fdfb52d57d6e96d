"""Compare two states of a dictionary: source folders or released editions.

``diff_lexicons(old, new)`` works on two typed lexicons and returns a ``LexiconDiff``: a sorted
list of ``Change`` records plus summary counts. Both sides are first reduced to a ``Snapshot``
(what is compared: ids, lemmas, glosses, statuses, frame patterns and frequencies, example keys).

``diff_paths(old, new)`` takes a sources folder (``lexicon.yaml`` + ``entries/``), a released
edition folder (the one ``*.tei.xml`` file in it) or a TEI file. TEI is parsed safely by
``xmlsafe.parse_untrusted`` (no entity expansion, no DTD, no network, size limit) and read by
``tei_snapshot``, which takes the same values as ``lexbuild.formats.tei.read_tei`` without
building the typed model (several times faster on large editions, see benchmarks/bench_diff.py;
the tests check that both agree);
``load_for_diff`` gives the full typed model through ``read_tei``. When one side is TEI and the
other a sources folder, the sources go through the same export first, so that only what TEI keeps
is compared and the loss of, say, editors' notes does not show up as a change.

Matching rules:

* entries by id, senses by id within their entry (ids are stable across editions);
* frames of one sense by their canonical pattern (the id of a frame carries no meaning);
* examples of one sense by their source reference ``corpus#sentence`` (the text when there is no
  source);
* a sense *split*: the examples of one old sense now belong to two or more senses; a sense
  *merge*: one new sense holds examples of two or more old senses (examples matched as above,
  within one entry);
* a frequency change is reported when ``|new - old| > tolerance * max(|old|, 1)``; a frequency
  that appears or disappears always counts.

Output: ``to_markdown``, ``to_json`` and ``to_html`` (self-contained, every text escaped); all
three start with the summary counts and are deterministic.
"""

from __future__ import annotations

import gc
import html
import json
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from lexbuild.errors import SourceError, SourceLocation
from lexbuild.lexicon.model import Example, Lexicon, Sense, Status

__all__ = [
    "FORMATS",
    "KINDS",
    "Change",
    "EntryView",
    "LexiconDiff",
    "SenseView",
    "Snapshot",
    "diff_lexicons",
    "diff_paths",
    "diff_snapshots",
    "example_key",
    "load_for_diff",
    "render",
    "snapshot",
    "tei_snapshot",
    "to_html",
    "to_json",
    "to_markdown",
]

#: Every change kind, in the order the reports list them.
KINDS: tuple[str, ...] = (
    "entry-added",
    "entry-removed",
    "sense-added",
    "sense-removed",
    "sense-retired",
    "gloss-changed",
    "status-changed",
    "frame-added",
    "frame-removed",
    "frequency-changed",
    "example-added",
    "example-removed",
    "sense-split",
    "sense-merged",
)

_TITLES: dict[str, str] = {
    "entry-added": "Entries added",
    "entry-removed": "Entries removed",
    "sense-added": "Senses added",
    "sense-removed": "Senses removed",
    "sense-retired": "Senses retired",
    "gloss-changed": "Glosses changed",
    "status-changed": "Statuses changed",
    "frame-added": "Frames added",
    "frame-removed": "Frames removed",
    "frequency-changed": "Frequencies changed",
    "example-added": "Examples added",
    "example-removed": "Examples removed",
    "sense-split": "Senses split",
    "sense-merged": "Senses merged",
}

FORMATS: tuple[str, ...] = ("markdown", "json", "html")

_KIND_RANK = {kind: rank for rank, kind in enumerate(KINDS)}

Value = str | int | None


@dataclass(frozen=True)
class Change:
    """One difference. ``item`` is a frame pattern or an example key; ``related`` lists the
    other senses of a split or merge."""

    kind: str
    entry: str
    sense: str | None = None
    item: str | None = None
    old: Value = None
    new: Value = None
    related: tuple[str, ...] = ()

    def sort_key(self) -> tuple[int, str, str, str, tuple[str, ...]]:
        return (_KIND_RANK[self.kind], self.entry, self.sense or "", self.item or "", self.related)

    def as_dict(self) -> dict[str, Any]:
        return {
            "kind": self.kind,
            "entry": self.entry,
            "sense": self.sense,
            "item": self.item,
            "old": self.old,
            "new": self.new,
            "related": list(self.related),
        }


@dataclass(frozen=True)
class LexiconDiff:
    old_label: str
    new_label: str
    changes: list[Change] = field(default_factory=list)
    tolerance: float = 0.0

    @property
    def summary(self) -> dict[str, int]:
        counts = dict.fromkeys(KINDS, 0)
        for change in self.changes:
            counts[change.kind] += 1
        return counts

    def __bool__(self) -> bool:
        return bool(self.changes)

    def of_kind(self, kind: str) -> list[Change]:
        return [change for change in self.changes if change.kind == kind]

    def as_dict(self) -> dict[str, Any]:
        return {
            "old": self.old_label,
            "new": self.new_label,
            "tolerance": self.tolerance,
            "summary": self.summary,
            "changes": [change.as_dict() for change in self.changes],
        }


# ------------------------------------------------------------------------------ comparing


@dataclass(frozen=True, slots=True)
class SenseView:
    """What the diff compares of a sense."""

    id: str
    gloss: str
    status: str
    frames: dict[str, int | None]  # canonical pattern -> frequency (first frame of a pattern)
    examples: frozenset[str]  # example keys (see ``example_key``)


@dataclass(frozen=True, slots=True)
class EntryView:
    id: str
    lemma: str
    senses: dict[str, SenseView]  # by id, in dictionary order


#: What the diff compares of a whole dictionary: entries by id, in dictionary order.
Snapshot = dict[str, EntryView]


def example_key(example: Example) -> str:
    """How an example is recognised across editions: its source, else its text."""
    if example.source is not None:
        return f"{example.source.corpus}#{example.source.sentence}"
    return f"text:{example.text}"


def _sense_view(sense: Sense) -> SenseView:
    frames: dict[str, int | None] = {}
    for frame in sense.frames:
        frames.setdefault(frame.pattern, frame.frequency)
    return SenseView(
        sense.id, sense.gloss, sense.status.value, frames,
        frozenset(example_key(example) for example in sense.examples),
    )


def snapshot(lexicon: Lexicon) -> Snapshot:
    """The compared view of a typed lexicon."""
    return {
        entry.id: EntryView(
            entry.id, entry.lemma, {sense.id: _sense_view(sense) for sense in entry.senses}
        )
        for entry in lexicon.entries
    }


def _frequency_changed(old: int | None, new: int | None, tolerance: float) -> bool:
    if old is None or new is None:
        return old != new
    return abs(new - old) > tolerance * max(abs(old), 1)


def _diff_sense(
    entry_id: str, old: SenseView, new: SenseView, tolerance: float, out: list[Change]
) -> None:
    sid = new.id
    if old.gloss != new.gloss:
        out.append(Change("gloss-changed", entry_id, sid, old=old.gloss, new=new.gloss))
    if old.status != new.status:
        kind = "sense-retired" if new.status == Status.RETIRED.value else "status-changed"
        out.append(Change(kind, entry_id, sid, old=old.status, new=new.status))
    if old.frames != new.frames:
        for pattern, frequency in new.frames.items():
            if pattern not in old.frames:
                out.append(Change("frame-added", entry_id, sid, pattern, new=frequency))
            elif _frequency_changed(old.frames[pattern], frequency, tolerance):
                out.append(
                    Change(
                        "frequency-changed", entry_id, sid, pattern,
                        old=old.frames[pattern], new=frequency,
                    )
                )
        for pattern, frequency in old.frames.items():
            if pattern not in new.frames:
                out.append(Change("frame-removed", entry_id, sid, pattern, old=frequency))
    if old.examples != new.examples:
        out.extend(
            Change("example-added", entry_id, sid, key) for key in new.examples - old.examples
        )
        out.extend(
            Change("example-removed", entry_id, sid, key) for key in old.examples - new.examples
        )


def _example_owners(entry: EntryView) -> dict[str, set[str]]:
    owners: dict[str, set[str]] = {}
    for sense in entry.senses.values():
        for key in sense.examples:
            owners.setdefault(key, set()).add(sense.id)
    return owners


def _splits_and_merges(old: EntryView, new: EntryView, out: list[Change]) -> None:
    if old.senses.keys() == new.senses.keys() and all(
        old.senses[key].examples == new.senses[key].examples for key in old.senses
    ):
        return  # no example moved: nothing split or merged
    old_owners = _example_owners(old)
    new_owners = _example_owners(new)
    # old sense -> new senses holding its examples, and the reverse
    forward: dict[str, set[str]] = {}
    backward: dict[str, set[str]] = {}
    for key, before in old_owners.items():
        after = new_owners.get(key)
        if not after:
            continue
        for old_sense in before:
            forward.setdefault(old_sense, set()).update(after)
        for new_sense in after:
            backward.setdefault(new_sense, set()).update(before)
    for old_sense, targets in sorted(forward.items()):
        if len(targets) >= 2:
            out.append(Change("sense-split", new.id, old_sense, related=tuple(sorted(targets))))
    for new_sense, origins in sorted(backward.items()):
        if len(origins) >= 2:
            out.append(Change("sense-merged", new.id, new_sense, related=tuple(sorted(origins))))


def diff_snapshots(
    old: Snapshot,
    new: Snapshot,
    *,
    tolerance: float = 0.0,
    old_label: str = "old",
    new_label: str = "new",
) -> LexiconDiff:
    """Every change from ``old`` to ``new``, sorted by kind, entry, sense and item."""
    if tolerance < 0:
        raise ValueError(f"tolerance must be >= 0, got {tolerance}")
    changes: list[Change] = []
    for entry_id, entry in new.items():
        before = old.get(entry_id)
        if before is None:
            changes.append(
                Change("entry-added", entry_id, item=entry.lemma, new=len(entry.senses))
            )
            continue
        if before == entry:
            continue
        for sense_id, sense in entry.senses.items():
            previous = before.senses.get(sense_id)
            if previous is None:
                changes.append(Change("sense-added", entry_id, sense_id, new=sense.status))
            elif previous != sense:
                _diff_sense(entry_id, previous, sense, tolerance, changes)
        for sense_id, sense in before.senses.items():
            if sense_id not in entry.senses:
                changes.append(Change("sense-removed", entry_id, sense_id, old=sense.status))
        _splits_and_merges(before, entry, changes)
    for entry_id, entry in old.items():
        if entry_id not in new:
            changes.append(
                Change("entry-removed", entry_id, item=entry.lemma, old=len(entry.senses))
            )
    changes.sort(key=Change.sort_key)
    return LexiconDiff(old_label, new_label, changes, tolerance)


def diff_lexicons(
    old: Lexicon,
    new: Lexicon,
    *,
    tolerance: float = 0.0,
    old_label: str = "old",
    new_label: str = "new",
) -> LexiconDiff:
    """Every change from ``old`` to ``new`` (two typed lexicons)."""
    return diff_snapshots(
        snapshot(old), snapshot(new), tolerance=tolerance, old_label=old_label,
        new_label=new_label,
    )


# -------------------------------------------------------------------------------- loading


def tei_snapshot(source: str | Path | bytes) -> Snapshot:
    """The compared view of one of our TEI Lex-0 exports, read straight from the XML.

    Parsed with ``xmlsafe.parse_untrusted`` (no entities, no DTD, no network, size limit). It
    reads the same values as ``lexbuild.formats.tei.read_tei`` without building the typed model,
    in one pass over the elements it needs, which is what makes a diff of two large editions fast;
    ``tests/test_diff.py`` checks that both readings agree.
    """
    from lexbuild.formats.xmlsafe import parse_untrusted

    name = "<bytes>" if isinstance(source, bytes) else str(source)
    root = parse_untrusted(source).getroot()
    if root.tag != _T + "TEI":
        raise SourceError(f"the root element is {root.tag}, not a TEI element",
                          SourceLocation(name))
    reader = _TeiWalk(name)
    try:
        for body in root.iterfind(f"{_T}text/{_T}body"):
            reader.walk(body)
    except (ValueError, KeyError, TypeError, AttributeError, IndexError) as error:
        if isinstance(error, SourceError) and name in str(error):
            raise
        raise SourceError(
            f"not a TEI Lex-0 export lexbuild can read back: {error}", SourceLocation(name)
        ) from None
    return reader.entries


_T = "{http://www.tei-c.org/ns/1.0}"
_XML_ID = "{http://www.w3.org/XML/1998/namespace}id"


def _text(element: Any) -> str:
    if element is None:
        return ""
    if len(element):  # mixed content (an example's quote): every text node, as read_tei does
        return "".join(element.itertext())
    return element.text or ""


def _strip_ref(value: str | None, prefix: str) -> str:
    return (value or "").strip().removeprefix("#").removeprefix(prefix)


class _TeiWalk:
    """One document-order pass over entries, senses, frames and examples (see tei_snapshot)."""

    def __init__(self, name: str) -> None:
        from lexbuild.formats.tei import STATUS_PREFIX

        self.name = name
        self.status_prefix = STATUS_PREFIX
        self.entries: Snapshot = {}

    def walk(self, body: Any) -> None:
        t = _T
        entry_tag, sense_tag, cit_tag = t + "entry", t + "sense", t + "cit"
        gram_tag, usg_tag, idno_tag = t + "gram", t + "usg", t + "idno"
        def_tag, orth_tag = t + "def", t + "orth"
        entry: Any = None
        senses: dict[str, SenseView] = {}
        sense: Any = None  # top-level sense element being read
        frames: dict[str, int | None] = {}
        keys: list[str] = []
        frame_id = ""
        pattern: str | None = None
        frequency: int | None = None
        cit: Any = None
        corpus: str | None = None
        sentence: str | None = None
        lemma = ""
        gloss = ""

        def end_cit() -> None:
            nonlocal cit, corpus, sentence
            if cit is not None:
                if corpus is None and sentence is None and cit.find(t + "bibl") is None:
                    keys.append("text:" + _text(cit.find(t + "quote")))
                else:
                    keys.append(f"{corpus or ''}#{sentence or ''}")
            cit, corpus, sentence = None, None, None

        def end_frame() -> None:
            nonlocal pattern, frequency
            if pattern is not None:
                frames.setdefault(pattern, frequency)
            pattern, frequency = None, None

        def end_sense() -> None:
            nonlocal sense, frames, keys, gloss
            end_cit()
            end_frame()
            if sense is not None:
                sense_id = sense.get(_XML_ID) or ""
                status = _strip_ref(sense.get("ana"), self.status_prefix) or Status.DRAFT.value
                senses[sense_id] = SenseView(sense_id, gloss, status, frames, frozenset(keys))
            sense, frames, keys, gloss = None, {}, [], ""

        def end_entry() -> None:
            nonlocal entry, senses, lemma
            end_sense()
            if entry is not None:
                entry_id = entry.get(_XML_ID) or ""
                self.entries[entry_id] = EntryView(entry_id, lemma, senses)
            entry, senses, lemma = None, {}, ""

        for element in body.iter(entry_tag, sense_tag, cit_tag, gram_tag, usg_tag, idno_tag,
                                 def_tag, orth_tag):
            tag = element.tag
            if tag == idno_tag:
                kind = element.get("type")
                if cit is not None and kind == "corpus":
                    corpus = _text(element)
                elif cit is not None and kind == "sentence":
                    sentence = _text(element)
            elif tag == cit_tag:
                end_cit()
                cit = element
            elif tag == gram_tag:
                if element.get("type") == "construction" and sense is not None:
                    pattern = _text(element)
            elif tag == usg_tag:
                if (
                    element.get("type") == "frequency"
                    and _strip_ref(element.get("corresp"), "") == frame_id
                ):
                    frequency = _count(element, self.name)
            elif tag == sense_tag:
                end_cit()
                if element.getparent() is entry:
                    end_sense()
                    sense = element
                else:  # a frame's sub-sense
                    end_frame()
                    frame_id = element.get(_XML_ID) or ""
            elif tag == def_tag:
                if element.getparent() is sense:
                    gloss = _text(element)
            elif tag == orth_tag:
                parent = element.getparent()
                if parent is not None and parent.get("type") == "lemma" and (
                    parent.getparent() is entry
                ):
                    lemma = _text(element)
            else:  # entry
                end_entry()
                entry = element
        end_entry()


def _count(usg: Any, name: str) -> int:
    try:
        return int(usg.get("value", "0"))
    except ValueError:
        raise SourceError(
            f"usg/@value={usg.get('value')!r} is not a whole number",
            SourceLocation(name, usg.sourceline or 0),
        ) from None


def _edition_tei(folder: Path) -> Path | None:
    found = sorted(folder.glob("*.tei.xml"))
    if len(found) > 1:
        raise SourceError(
            f"{len(found)} TEI files (*.tei.xml) in {folder}; pass the one to compare",
            SourceLocation(str(folder)),
        )
    return found[0] if found else None


def _resolve(path: str | Path) -> tuple[Path, bool]:
    """(path to read, is TEI) for a sources folder, an edition folder or a TEI file."""
    from lexbuild.lexicon.sources import META_FILE

    where = Path(path)
    if where.is_dir():
        if (where / META_FILE).is_file():
            return where, False
        tei_file = _edition_tei(where)
        if tei_file is None:
            raise SourceError(
                f"{where} is neither a sources folder (no {META_FILE}) nor a released edition "
                "(no *.tei.xml file)",
                SourceLocation(str(where)),
            )
        return tei_file, True
    if not where.is_file():
        raise SourceError(f"not found: {where}", SourceLocation(str(where)))
    return where, True


def load_for_diff(path: str | Path) -> tuple[Lexicon, bool]:
    """Read a sources folder, an edition folder or a TEI file into the typed model; returns
    (lexicon, from_tei). TEI goes through ``lexbuild.formats.tei.read_tei`` (safe parsing)."""
    where, is_tei = _resolve(path)
    if not is_tei:
        from lexbuild.lexicon.sources import load_lexicon

        return load_lexicon(where).lexicon, False
    from lexbuild.formats.tei import read_tei

    return read_tei(where), True


def diff_paths(
    old: str | Path,
    new: str | Path,
    *,
    tolerance: float = 0.0,
    old_label: str | None = None,
    new_label: str | None = None,
) -> LexiconDiff:
    """The diff of two paths (sources folders, edition folders or TEI files).

    When one side is TEI and the other sources, the sources go through the TEI export first, so
    that only what TEI keeps is compared (an editor's note missing from TEI is no change).
    """
    from lexbuild.lexicon.sources import load_lexicon

    old_path, old_tei = _resolve(old)
    new_path, new_tei = _resolve(new)
    def view(where: Path, is_tei: bool, other_tei: bool) -> Snapshot:
        if is_tei:
            return tei_snapshot(where)
        lexicon = load_lexicon(where).lexicon
        if other_tei:
            from lexbuild.formats.tei import to_tei

            return tei_snapshot(to_tei(lexicon))
        return snapshot(lexicon)

    # The cyclic garbage collector is paused while reading: the snapshots hold no cycles, and
    # its repeated full passes over a heap growing by millions of objects cost more than the
    # reading itself. (Reading both sides in two threads was measured slower: GIL contention.)
    collecting = gc.isenabled()
    gc.disable()
    try:
        return diff_snapshots(
            view(old_path, old_tei, new_tei),
            view(new_path, new_tei, old_tei),
            tolerance=tolerance,
            old_label=old_label if old_label is not None else str(old),
            new_label=new_label if new_label is not None else str(new),
        )
    finally:
        if collecting:
            gc.enable()


# ------------------------------------------------------------------------------ rendering


def _describe(change: Change) -> str:
    """One plain-text line for a change (Markdown and HTML wrap it)."""
    sense = change.sense or ""
    match change.kind:
        case "entry-added":
            return f"{change.entry} ({change.item}), {change.new} sense(s)"
        case "entry-removed":
            return f"{change.entry} ({change.item}), had {change.old} sense(s)"
        case "sense-added":
            return f"{sense} ({change.new})"
        case "sense-removed":
            return f"{sense} (was {change.old})"
        case "sense-retired" | "status-changed":
            return f"{sense}: {change.old} -> {change.new}"
        case "gloss-changed":
            return f"{sense}: {change.old!r} -> {change.new!r}"
        case "frame-added":
            return f"{sense}: {change.item} (frequency {change.new})"
        case "frame-removed":
            return f"{sense}: {change.item} (frequency {change.old})"
        case "frequency-changed":
            return f"{sense}: {change.item}: {change.old} -> {change.new}"
        case "example-added" | "example-removed":
            return f"{sense}: {change.item}"
        case "sense-split":
            return f"{sense} -> {', '.join(change.related)}"
        case "sense-merged":
            return f"{', '.join(change.related)} -> {sense}"
    raise ValueError(f"unknown change kind {change.kind!r}")


def summary_lines(result: LexiconDiff) -> list[str]:
    """Short lines for a change log header: one per kind with a non-zero count."""
    return [
        f"{_TITLES[kind]}: {count}" for kind, count in result.summary.items() if count
    ] or ["No changes."]


def change_lines(result: LexiconDiff) -> list[str]:
    """One plain line per change, with its kind's title in front (TEI revisionDesc items)."""
    return [f"{_TITLES[c.kind]}: {_describe(c)}" for c in result.changes]


def _md_code(text: str) -> str:
    return text.replace("|", "\\|").replace("`", "'")


def to_markdown(result: LexiconDiff) -> str:
    lines = [
        f"# Changes from {_md_code(result.old_label)} to {_md_code(result.new_label)}",
        "",
        "## Summary",
        "",
        "| change | count |",
        "|---|---:|",
    ]
    lines += [f"| {_TITLES[kind]} | {count} |" for kind, count in result.summary.items()]
    if not result.changes:
        lines += ["", "No changes."]
    for kind in KINDS:
        items = result.of_kind(kind)
        if not items:
            continue
        lines += ["", f"## {_TITLES[kind]}", ""]
        lines += [f"- `{_md_code(c.entry)}`: {_md_code(_describe(c))}" for c in items]
    return "\n".join(lines) + "\n"


def to_json(result: LexiconDiff) -> str:
    return json.dumps(result.as_dict(), ensure_ascii=False, indent=2) + "\n"


_CSS = (
    "body{font-family:sans-serif;margin:2em;max-width:60em}"
    "table{border-collapse:collapse}td,th{border:1px solid #999;padding:.2em .6em}"
    "td.n{text-align:right}code{background:#eee;padding:0 .2em}"
)


def to_html(result: LexiconDiff) -> str:
    """A self-contained page (inline style, no script, no external resource)."""
    esc = html.escape
    title = f"Changes from {result.old_label} to {result.new_label}"
    parts = [
        "<!DOCTYPE html>",
        '<html><head><meta charset="utf-8">',
        f"<title>{esc(title)}</title>",
        f"<style>{_CSS}</style></head><body>",
        f"<h1>{esc(title)}</h1>",
        "<h2>Summary</h2>",
        "<table><tr><th>change</th><th>count</th></tr>",
    ]
    parts += [
        f'<tr><td>{esc(_TITLES[kind])}</td><td class="n">{count}</td></tr>'
        for kind, count in result.summary.items()
    ]
    parts.append("</table>")
    for kind in KINDS:
        items = result.of_kind(kind)
        if not items:
            continue
        parts.append(f"<h2>{esc(_TITLES[kind])}</h2><ul>")
        parts += [
            f"<li><code>{esc(c.entry)}</code>: {esc(_describe(c))}</li>" for c in items
        ]
        parts.append("</ul>")
    parts.append("</body></html>")
    return "\n".join(parts) + "\n"


def render(result: LexiconDiff, fmt: str) -> str:
    if fmt == "markdown":
        return to_markdown(result)
    if fmt == "json":
        return to_json(result)
    if fmt == "html":
        return to_html(result)
    raise ValueError(f"unknown format {fmt!r}; expected one of {', '.join(FORMATS)}")


def count_items(lexicon: Lexicon) -> dict[str, int]:
    """Counts of entries, senses, frames and examples (manifests and summaries)."""
    senses = [sense for entry in lexicon.entries for sense in entry.senses]
    return {
        "entries": len(lexicon.entries),
        "senses": len(senses),
        "frames": sum(len(sense.frames) for sense in senses),
        "examples": sum(len(sense.examples) for sense in senses),
    }

