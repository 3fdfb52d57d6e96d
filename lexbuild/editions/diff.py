"""Compare two states of a dictionary: source folders or released editions.

``diff_lexicons(old, new)`` works on two typed lexicons and returns a ``LexiconDiff``: a sorted
list of ``Change`` records plus summary counts. Both sides are first reduced to a ``Snapshot``
(what is compared: ids, lemmas, glosses, statuses, frame patterns and frequencies, example keys).

``diff_paths(old, new)`` takes a sources folder (``lexicon.yaml`` + ``entries/``), a released
edition folder (the one ``*.tei.xml`` file in it) or a TEI file. TEI is parsed safely by
``xmlsafe.parse_untrusted`` (no entity expansion, no DTD, no network, size limit) and read by
``lexbuild.formats.tei.tei_snapshot`` into the snapshot model of ``lexbuild.lexicon.snapshot``
(shared with the counts of ``release``), which takes the same values as
``lexbuild.formats.tei.read_tei`` without building the typed model (several times faster on
large editions, see benchmarks/bench_diff.py; the tests check that both agree);
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

Output (``lexbuild.editions.diff_report``): ``to_markdown``, ``to_json`` and ``to_html``
(self-contained, every text escaped); all three start with the summary counts and are
deterministic. The change records are in ``lexbuild.editions.changes``.
"""

from __future__ import annotations

import gc
from pathlib import Path

from lexbuild.editions.changes import KINDS, Change, LexiconDiff
from lexbuild.editions.diff_report import (
    FORMATS,
    render,
    to_html,
    to_json,
    to_markdown,
)
from lexbuild.errors import SourceError, SourceLocation
from lexbuild.formats.tei import tei_snapshot
from lexbuild.lexicon.model import Lexicon, Status
from lexbuild.lexicon.snapshot import (
    EntryView,
    SenseView,
    Snapshot,
    example_key,
    snapshot,
)

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

# ------------------------------------------------------------------------------ comparing


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


