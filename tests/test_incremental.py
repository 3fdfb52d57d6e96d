"""Incremental builds (``lexbuild.lexicon.build``): with the cache, the same bytes and the same
findings as a build without it, whatever was edited; a damaged or shared cache changes nothing.

The reference is the plain cold path (``load_lexicon``, ``check_lexicon``, ``to_tei``,
``to_lmf``, ``validate_bytes``), and validation runs against the published TEI Lex-0 and LMF
schemas (``schemas_dir`` fixture).
"""

from __future__ import annotations

import json
import os
import shutil
import sqlite3
import subprocess
import sys
import tempfile
import zlib
from pathlib import Path
from typing import Any

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from lexbuild.errors import LexbuildError, SourceError
from lexbuild.formats.fragments import EntryFragment, WrittenDocument, id_scope, ids_distinct
from lexbuild.formats.lmf import to_lmf
from lexbuild.formats.registry import ValidationContext, get_format
from lexbuild.formats.tei import to_tei
from lexbuild.formats.validate import validate_bytes, validate_written
from lexbuild.lexicon import sources
from lexbuild.lexicon.build import open_build
from lexbuild.lexicon.build_cache import BuildCache, cache_folder, code_fingerprint
from lexbuild.lexicon.checks import check_lexicon, load_problem_findings
from lexbuild.lexicon.model import Frame

SAMPLE_LEXICON = Path(__file__).resolve().parent.parent / "sample_lexicon"

ENTRY_NAMES = sorted(path.stem for path in (SAMPLE_LEXICON / "entries").glob("*.yaml"))


def _copy_sample(target: Path) -> Path:
    shutil.copytree(SAMPLE_LEXICON, target)
    return target


def _attempt(action: Any) -> Any:
    try:
        return ("ok", action())
    except LexbuildError as error:  # the writers' errors must be the same too
        return ("error", type(error).__name__, str(error))


def cold_outcome(folder: Path, schemas_dir: Path) -> dict[str, Any]:
    """Everything a build reports, the plain way (no cache anywhere)."""
    problems: list[SourceError] = []
    loaded = sources.load_lexicon(folder, problems=problems)
    outcome: dict[str, Any] = {
        "findings": [str(f) for f in load_problem_findings(problems) + check_lexicon(loaded)]
    }
    for name, write in (("tei", lambda: to_tei(loaded.lexicon)),
                        ("lmf", lambda: to_lmf(loaded.lexicon))):
        written = _attempt(write)
        outcome[name] = written
        if written[0] == "ok":
            outcome[f"{name} valid"] = [
                str(f) for f in validate_bytes(
                    written[1], schemas_dir=schemas_dir, name=name, source_map=loaded.source_map
                )
            ]
    outcome["lexicon"] = loaded.lexicon
    return outcome


def cached_outcome(folder: Path, schemas_dir: Path, cache: BuildCache) -> dict[str, Any]:
    problems: list[SourceError] = []
    build = open_build(folder, cache=cache, problems=problems)
    outcome: dict[str, Any] = {
        "findings": [str(f) for f in load_problem_findings(problems) + build.check()]
    }
    for name in ("tei", "lmf"):
        output_format = get_format(name)
        written = _attempt(lambda f=output_format: build.write(f))
        outcome[name] = written if written[0] == "error" else ("ok", written[1][0])
        if written[0] == "ok":
            data, document = written[1]
            context = ValidationContext(schemas_dir=schemas_dir, name=name,
                                        source_map=build.source_map)
            outcome[f"{name} valid"] = [
                str(f) for f in build.validate(output_format, data, document, context)
            ]
    outcome["lexicon"] = build.lexicon()
    return outcome


# ----------------------------------------------------------------------------- random edits

GLOSSES = st.one_of(
    st.text(alphabet=st.characters(codec="utf-8", exclude_categories=("Cs",)), max_size=12),
    st.sampled_from(["", "a\x01b", "se déplacer", "  ", "x & <y>"]),
)
PATTERNS = st.sampled_from(
    ["subj:NP obj:NP", "subj:NP obl:PP[de]", "subj:NP obl:PP", "subj:NP comp:CLAUSE[que]"]
)
EDITS = st.one_of(
    st.tuples(st.just("gloss"), st.sampled_from(ENTRY_NAMES), GLOSSES),
    st.tuples(st.just("pattern"), st.sampled_from(ENTRY_NAMES), PATTERNS),
    st.tuples(st.just("duplicate-id"), st.sampled_from(ENTRY_NAMES),
              st.sampled_from(ENTRY_NAMES)),
    st.tuples(st.just("frame-without-id"), st.sampled_from(ENTRY_NAMES), st.none()),
    st.tuples(st.just("delete"), st.sampled_from(ENTRY_NAMES), st.none()),
    st.tuples(st.just("break-yaml"), st.sampled_from(ENTRY_NAMES), st.none()),
    st.tuples(st.just("drop-corpora"), st.none(), st.none()),
    # ids inside another entry's scope (fragments.id_scope), without a duplicate: the fast
    # id checks give a false alarm and the document is written and validated whole
    st.tuples(st.just("foreign-id"), st.sampled_from(ENTRY_NAMES), st.sampled_from(ENTRY_NAMES)),
    st.tuples(st.just("nested-copy"), st.sampled_from(ENTRY_NAMES),
              st.sampled_from(ENTRY_NAMES)),
)


def apply_edit(folder: Path, edit: tuple[str, Any, Any]) -> None:
    kind, name, value = edit
    if kind == "drop-corpora":
        meta_file = folder / sources.META_FILE
        meta = sources.load_meta(folder, sources.SourceMap())
        sources.write_meta(folder, meta.model_copy(update={"corpora": []}))
        assert meta_file.is_file()
        return
    path = folder / sources.ENTRIES_DIR / f"{name}.yaml"
    if not path.is_file():
        return
    if kind == "delete":
        path.unlink()
        return
    if kind == "break-yaml":
        path.write_text(path.read_text(encoding="utf-8") + "\n  : - [\n", encoding="utf-8")
        return
    if kind == "nested-copy":  # a copy of the entry whose id extends another entry's id
        text = path.read_text(encoding="utf-8")
        copy = text.replace(f"id: {name}\n", f"id: {value}.x\n").replace(
            f": {name}.", f": {value}.x."
        )
        (path.parent / f"{value}.x.yaml").write_text(copy, encoding="utf-8")
        return
    try:
        entry = sources.load_entry(path)
    except SourceError:
        return
    sense = entry.senses[0]
    if kind == "gloss":
        sense = sense.model_copy(update={"gloss": value})
    elif kind == "pattern" and sense.frames:
        frame = sense.frames[0]
        sense = sense.model_copy(
            update={"frames": [Frame(id=frame.id, pattern=value), *sense.frames[1:]]}
        )
    elif kind == "frame-without-id" and sense.frames:
        frames = [sense.frames[0].model_copy(update={"id": None}), *sense.frames[1:]]
        examples = [x.model_copy(update={"frame": None}) for x in sense.examples]
        sense = sense.model_copy(update={"frames": frames, "examples": examples})
    elif kind == "duplicate-id":
        sense = sense.model_copy(update={"id": f"{value}.s1"})
    elif kind == "foreign-id":
        sense = sense.model_copy(update={"id": f"{value}.s9"})
    entry = entry.model_copy(update={"senses": [sense, *entry.senses[1:]]})
    path.write_text(sources.dump_entry(entry), encoding="utf-8")


@pytest.fixture(scope="module")
def shared_cache() -> Any:
    with tempfile.TemporaryDirectory() as folder, BuildCache(folder) as cache:
        yield cache


@settings(max_examples=30, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])
@given(edits=st.lists(EDITS, min_size=1, max_size=3))
def test_cached_build_equals_cold_build_after_random_edits(
    edits: list[tuple[str, Any, Any]], schemas_dir: Path, shared_cache: BuildCache
) -> None:
    """Property: for any edits, a build with a warm cache reports the same findings, writes
    the same TEI and LMF bytes (or raises the same error) and validates the same as a cold
    build; the cache is shared across examples, so most entries are hits."""
    with tempfile.TemporaryDirectory() as tmp:
        folder = _copy_sample(Path(tmp) / "sources")
        cached_outcome(folder, schemas_dir, shared_cache)  # warm: the sources before the edits
        for edit in edits:
            apply_edit(folder, edit)
        expected = cold_outcome(folder, schemas_dir)
        got = cached_outcome(folder, schemas_dir, shared_cache)
        again = cached_outcome(folder, schemas_dir, shared_cache)  # every part a hit now
    assert got == expected
    assert again == expected


def test_sample_rebuild_reuses_everything(tmp_path: Path, schemas_dir: Path) -> None:
    folder = _copy_sample(tmp_path / "sources")
    with BuildCache(tmp_path / "cache") as cache:
        first = cached_outcome(folder, schemas_dir, cache)
        misses = cache.misses
        second = cached_outcome(folder, schemas_dir, cache)
        assert cache.misses == misses  # nothing computed twice
    assert first == second == cold_outcome(folder, schemas_dir)
    assert first["tei valid"] == [] and first["lmf valid"] == []


# ----------------------------------------------------------------------------- validation


def _sample_document(schemas_dir: Path) -> tuple[WrittenDocument, bytes]:
    build = open_build(SAMPLE_LEXICON)
    document = build.written("tei")
    assert document is not None
    return document, document.data()


def _with_fragment(document: WrittenDocument, index: int, text: str) -> WrittenDocument:
    fragments = list(document.fragments)
    fragments[index] = EntryFragment(
        text.encode("utf-8"), fragments[index].tail, fragments[index].id_block
    )
    return WrittenDocument(document.prefix, tuple(fragments), document.suffix)


@pytest.mark.parametrize(
    "change",
    [
        # RelaxNG: TEI Lex-0 has no element 'frobnicate' (published TEILex0.rng)
        lambda text: text.replace("<def>", "<frobnicate/><def>", 1),
        # Schematron (published TEILex0.sch): one gramGrp per parent
        lambda text: text.replace("</gramGrp>", "</gramGrp><gramGrp/>", 1),
        # a pointer from one entry into another (valid, but not local: whole document)
        lambda text: text.replace('target="#', 'target="#donner ', 1),
        # a pointer to nowhere (invalid)
        lambda text: text.replace('corresp="#', 'corresp="#nowhere ', 1),
        # an id borne twice in the document
        lambda text: text.replace('xml:id="', 'xml:id="donner" xml:x="', 1),
    ],
)
def test_incremental_validation_reports_what_whole_validation_reports(
    change: Any, tmp_path: Path, schemas_dir: Path
) -> None:
    document, _ = _sample_document(schemas_dir)
    index = 1  # a warm cache holds every fragment's verdict; then one fragment changes
    with BuildCache(tmp_path / "cache") as cache:
        fingerprint = code_fingerprint()
        assert validate_written(document, "tei", data=document.data(), cache=cache,
                                fingerprint=fingerprint, schemas_dir=schemas_dir) == []
        text = document.fragments[index].text_bytes().decode("utf-8")
        changed = _with_fragment(document, index, change(text))
        data = changed.data()
        expected = [str(f) for f in validate_bytes(data, schemas_dir=schemas_dir)]
        got = [str(f) for f in validate_written(changed, "tei", data=data, cache=cache,
                                                fingerprint=fingerprint,
                                                schemas_dir=schemas_dir)]
    assert got == expected


# ----------------------------------------------------------------------------- the cache file


def _run_cli(*args: str, cache: Path | None, cwd: Path) -> subprocess.CompletedProcess[str]:
    environment = dict(os.environ)
    if cache is not None:
        environment["LEXBUILD_CACHE"] = str(cache)
    project = Path(__file__).resolve().parent.parent
    environment["PYTHONPATH"] = str(project) + os.pathsep + environment.get("PYTHONPATH", "")
    return subprocess.run(
        [sys.executable, "-m", "lexbuild", *args], cwd=cwd, env=environment,
        capture_output=True, text=True, timeout=600,
    )


def _export(folder: Path, output: Path, schemas_dir: Path, cache: Path | None,
            *extra: str) -> subprocess.CompletedProcess[str]:
    return _run_cli("export", str(folder), "--format", "tei", "--output", str(output),
                    "--schemas", str(schemas_dir), *extra, cache=cache, cwd=folder.parent)


def test_no_cache_neither_reads_nor_writes(tmp_path: Path, schemas_dir: Path) -> None:
    folder = _copy_sample(tmp_path / "sources")
    cache = tmp_path / "cache"
    done = _export(folder, tmp_path / "out.tei.xml", schemas_dir, cache, "--no-cache")
    assert done.returncode == 0, done.stderr
    assert not cache.exists()
    assert (tmp_path / "out.tei.xml").read_bytes() == to_tei(sources.load_lexicon(folder).lexicon)


def test_two_processes_share_one_cache(tmp_path: Path, schemas_dir: Path) -> None:
    """Two exports at once on an empty cache, then one reading what they stored: all three
    write the cold build's bytes (SQLite serialises the writers)."""
    folder = _copy_sample(tmp_path / "sources")
    cache = tmp_path / "cache"
    environment = dict(os.environ, LEXBUILD_CACHE=str(cache))
    project = Path(__file__).resolve().parent.parent
    environment["PYTHONPATH"] = str(project) + os.pathsep + environment.get("PYTHONPATH", "")
    running = [
        subprocess.Popen(
            [sys.executable, "-m", "lexbuild", "export", str(folder), "--format", "lmf",
             "--output", str(tmp_path / f"out{k}.lmf.xml"), "--schemas", str(schemas_dir)],
            env=environment, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
        )
        for k in (1, 2)
    ]
    for process in running:
        _, error = process.communicate(timeout=600)
        assert process.returncode == 0, error
    third = _run_cli("export", str(folder), "--format", "lmf", "--output",
                     str(tmp_path / "out3.lmf.xml"), "--schemas", str(schemas_dir),
                     cache=cache, cwd=tmp_path)
    assert third.returncode == 0, third.stderr
    expected = to_lmf(sources.load_lexicon(folder).lexicon)
    for k in (1, 2, 3):
        assert (tmp_path / f"out{k}.lmf.xml").read_bytes() == expected
    with sqlite3.connect(cache / "build" / "results.sqlite") as connection:
        (count,) = connection.execute("SELECT count(*) FROM results").fetchone()
    assert count >= len(ENTRY_NAMES)


@pytest.mark.parametrize("damage", ["truncate", "garbage", "record", "unreadable-record"])
def test_damaged_cache_is_a_miss(damage: str, tmp_path: Path, schemas_dir: Path) -> None:
    folder = _copy_sample(tmp_path / "sources")
    cache_dir = tmp_path / "cache"
    with BuildCache(cache_dir) as cache:
        expected = cached_outcome(folder, schemas_dir, cache)
    database = cache_dir / "results.sqlite"
    if damage == "truncate":
        data = database.read_bytes()
        database.write_bytes(data[: len(data) // 3])
    elif damage == "garbage":
        database.write_bytes(b"\x00not a database" * 500)
    else:
        with sqlite3.connect(database) as connection:
            rows = connection.execute("SELECT kind, key, value FROM results").fetchall()
            for kind, key, value in rows:
                if damage == "record":  # a wrong but readable record: its checksum fails
                    spoiled = bytes(value).replace(b"s1", b"s9")
                    connection.execute("UPDATE results SET value = ? WHERE kind = ? AND key = ?",
                                       (spoiled, kind, key))
                else:  # checksum right, bytes undecodable (not UTF-8): every reader's miss
                    spoiled = b"\xff\xfe" + bytes(value)[:10]
                    connection.execute(
                        "UPDATE results SET value = ?, crc = ? WHERE kind = ? AND key = ?",
                        (spoiled, zlib.crc32(spoiled), kind, key),
                    )
    with BuildCache(cache_dir) as cache:
        got = cached_outcome(folder, schemas_dir, cache)
        again = cached_outcome(folder, schemas_dir, cache)
    assert got == expected == again == cold_outcome(folder, schemas_dir)


def test_cache_folder_rule(monkeypatch: pytest.MonkeyPatch, tmp_path: Path) -> None:
    # the vector cache's rule (lexbuild/cli/induce.py open_cache), plus one 'build' subfolder
    monkeypatch.setenv("LEXBUILD_CACHE", str(tmp_path / "a"))
    assert cache_folder() == tmp_path / "a" / "build"
    monkeypatch.delenv("LEXBUILD_CACHE")
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "b"))
    assert cache_folder() == tmp_path / "b" / "lexbuild" / "build"
    monkeypatch.delenv("XDG_CACHE_HOME")
    monkeypatch.setenv("HOME", str(tmp_path / "c"))
    assert cache_folder() == tmp_path / "c" / ".cache" / "lexbuild" / "build"


def test_validate_reuses_the_export_verdict_and_sees_an_edit(
    tmp_path: Path, schemas_dir: Path
) -> None:
    folder = _copy_sample(tmp_path / "sources")
    cache = tmp_path / "cache"
    output = tmp_path / "out.tei.xml"
    assert _export(folder, output, schemas_dir, cache).returncode == 0
    with sqlite3.connect(cache / "build" / "results.sqlite") as connection:
        (verdicts,) = connection.execute(
            "SELECT count(*) FROM results WHERE kind = 'valid-document'"
        ).fetchone()
    assert verdicts == 1  # the export's document, found valid
    checked = _run_cli("validate", str(output), "--schemas", str(schemas_dir), "--format",
                       "json", cache=cache, cwd=tmp_path)
    assert checked.returncode == 0 and json.loads(checked.stdout)["problems"] == 0
    output.write_bytes(output.read_bytes().replace(b"<def>", b"<frobnicate/><def>", 1))
    expected = [str(f) for f in validate_bytes(output.read_bytes(), schemas_dir=schemas_dir,
                                               name=str(output))]
    checked = _run_cli("validate", str(output), "--schemas", str(schemas_dir), cache=cache,
                       cwd=tmp_path)
    assert checked.returncode == 1
    assert expected and expected[0].splitlines()[0] in checked.stdout


def test_check_cli_same_with_and_without_cache(tmp_path: Path) -> None:
    folder = _copy_sample(tmp_path / "sources")
    apply_edit(folder, ("duplicate-id", "donner", "prendre"))
    apply_edit(folder, ("gloss", "agir", "a\x01b"))
    cache = tmp_path / "cache"
    cold = _run_cli("check", str(folder), "--format", "json", "--no-cache", cache=cache,
                    cwd=tmp_path)
    first = _run_cli("check", str(folder), "--format", "json", cache=cache, cwd=tmp_path)
    second = _run_cli("check", str(folder), "--format", "json", cache=cache, cwd=tmp_path)
    assert cold.returncode == first.returncode == second.returncode == 1
    assert cold.stdout == first.stdout == second.stdout
    codes = {finding["code"] for finding in json.loads(cold.stdout)["findings"]}
    assert {"E104", "E202"} <= codes


def test_locked_cache_is_left_alone(
    tmp_path: Path, schemas_dir: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    """Another process holding the write lock past the timeout: this run builds without the
    cache (same output) and neither waits forever nor removes the other run's file."""
    from lexbuild.lexicon import build_cache

    folder = _copy_sample(tmp_path / "sources")
    cache_dir = tmp_path / "cache"
    with BuildCache(cache_dir) as cache:
        expected = cached_outcome(folder, schemas_dir, cache)
    monkeypatch.setattr(build_cache, "BUSY_SECONDS", 0.2)
    holder = sqlite3.connect(cache_dir / "results.sqlite", isolation_level=None)
    holder.execute("BEGIN EXCLUSIVE")
    try:
        apply_edit(folder, ("gloss", "donner", "changé"))
        with BuildCache(cache_dir) as cache:
            got = cached_outcome(folder, schemas_dir, cache)
    finally:
        holder.execute("ROLLBACK")
        holder.close()
    assert got == cold_outcome(folder, schemas_dir) != expected
    with sqlite3.connect(cache_dir / "results.sqlite") as connection:
        (count,) = connection.execute("SELECT count(*) FROM results").fetchone()
    assert count > 0


def test_cached_entries_are_located_like_loaded_ones(tmp_path: Path) -> None:
    """Validation findings name the YAML line of an id: a cached entry's ids (paths read
    lazily) are found at the same file, line and column as after a plain load."""
    folder = _copy_sample(tmp_path / "sources")
    loaded = sources.load_lexicon(folder)
    with BuildCache(tmp_path / "cache") as cache:
        open_build(folder, cache=cache)
        build = open_build(folder, cache=cache)
    assert build.items[0].parsed is None  # every entry came from the cache
    identifiers = [name for entry in loaded.lexicon.entries for name, _ in
                   sources.id_paths(entry)]
    for identifier in identifiers[::7]:
        assert build.source_map.locate_id(identifier) == loaded.source_map.locate_id(identifier)


# ----------------------------------------------------------------------------- id scopes


def test_id_scope_is_the_id_every_other_extends() -> None:
    assert id_scope([b"agir", b"agir.s1", b"agir.s1.f1"]) == b"agir"
    assert id_scope([b"agir", b"agirs.s1"]) is None  # 'agirs' does not extend 'agir'
    assert id_scope([b"agir", b"agir.s1", b"agir.s1"]) is None  # borne twice
    assert id_scope([b"agir.s1", b"agir"]) is None  # the scope comes first
    assert id_scope([]) is None


def _distinct_by_scopes(fragments: list[list[str]], others: list[str]) -> bool:
    scopes: list[bytes] = []
    scoped: list[list[bytes]] = []
    single = [name.encode() for name in others]
    for ids in fragments:
        names = [name.encode() for name in ids]
        scope = id_scope(names)
        if scope is None:
            single += names
        else:
            scopes.append(scope)
            scoped.append(names)
    return ids_distinct(scopes, lambda k: scoped[k], single)


@pytest.mark.parametrize(
    ("fragments", "others", "expected"),
    [
        ([["agir", "agir.s1"], ["donner", "donner.s1"]], ["rev.e1"], True),
        ([["agir"], ["agir"]], [], False),  # two entries with one id
        ([["voler", "voler.s1"], ["voler.h2", "voler.h2.s1"]], [], True),  # homographs
        ([["voler", "voler.h2.s1"], ["voler.h2", "voler.h2.s1"]], [], False),
        ([["voler", "voler.h2"], ["voler.h2", "voler.h2.s1"]], [], False),
        ([["agir", "agir.s1"], ["agirs", "agirs.s1"]], ["agi"], True),  # text prefixes only
        ([["agir", "agir.s1"]], ["agir.s9"], True),  # inside the scope, not borne
        ([["agir", "agir.s9"]], ["agir.s9"], False),
        ([["agir"]], ["agir"], False),
        ([["agir"]], ["x", "x"], False),
        ([["a", "b"], ["b", "c"]], [], False),  # no scope: id by id
    ],
)
def test_ids_distinct_finds_every_shared_id(
    fragments: list[list[str]], others: list[str], expected: bool
) -> None:
    assert _distinct_by_scopes(fragments, others) is expected


@settings(max_examples=300, deadline=None)
@given(
    st.lists(
        st.lists(
            st.sampled_from(["a", "b", "a.b", "a.s1", "b.s1", "a.b.s1", "a.h2", "a.h2.s1", "s1"]),
            min_size=1, max_size=4, unique=True,
        ),
        min_size=1, max_size=5,
    ),
    st.lists(st.sampled_from(["a.s1", "rev.e1", "a.h2.s1", "b"]), max_size=2),
)
def test_ids_distinct_agrees_with_a_set(fragments: list[list[str]], others: list[str]) -> None:
    """Property: the check by scopes says 'distinct' exactly when a set of every id has as
    many members as there are ids."""
    every = [name for ids in fragments for name in ids] + others
    assert _distinct_by_scopes(fragments, others) is (len(set(every)) == len(every))


@pytest.mark.parametrize(
    ("edits", "written"),
    [
        ([("nested-copy", "agir", "donner")], "ok"),
        ([("foreign-id", "agir", "donner")], "ok"),
        # two entries whose scopes nest ('donner', 'donner.x') sharing one id: an error
        ([("nested-copy", "agir", "donner"), ("duplicate-id", "donner", "donner.x")], "error"),
    ],
)
def test_ids_inside_another_entrys_scope(
    edits: list[tuple[str, str, str]], written: str, tmp_path: Path, schemas_dir: Path
) -> None:
    """An id that the fast check over scopes cannot clear (inside another entry's scope):
    the rebuild writes (or refuses) and validates what a cold build does."""
    folder = _copy_sample(tmp_path / "sources")
    with BuildCache(tmp_path / "cache") as cache:
        cached_outcome(folder, schemas_dir, cache)
        for edit in edits[:-1]:
            apply_edit(folder, edit)
        cached_outcome(folder, schemas_dir, cache)  # every entry but the last edit's cached
        apply_edit(folder, edits[-1])
        got = cached_outcome(folder, schemas_dir, cache)
        again = cached_outcome(folder, schemas_dir, cache)
    expected = cold_outcome(folder, schemas_dir)
    assert expected["tei"][0] == expected["lmf"][0] == written
    assert got == expected == again


def test_homographs_stay_on_the_fast_path(
    tmp_path: Path, schemas_dir: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    """Entries 'donner' and 'donner.x' (like a homograph 'voler.h2' of 'voler', one id
    extends the other): a rebuild after an edit elsewhere reuses the fragments and their
    verdicts, with neither a cold write nor a whole validation."""
    from lexbuild.formats import lmf, tei, validate

    folder = _copy_sample(tmp_path / "sources")
    apply_edit(folder, ("nested-copy", "agir", "donner"))
    with BuildCache(tmp_path / "cache") as cache:
        cached_outcome(folder, schemas_dir, cache)
        apply_edit(folder, ("gloss", "jouer", "changé"))
        writes: list[tuple[str, bool]] = []
        for module, name in ((tei, "write_tei"), (lmf, "write_lmf")):
            original = getattr(module, name)

            def spy(*args: Any, _original: Any = original, _name: str = name,
                    **kwargs: Any) -> Any:
                writes.append((_name, kwargs.get("cache") is not None))
                return _original(*args, **kwargs)

            monkeypatch.setattr(module, name, spy)
        validated: list[int] = []
        whole_validation = validate.validate_bytes

        def validate_spy(data: bytes, **kwargs: Any) -> Any:
            validated.append(len(data))
            return whole_validation(data, **kwargs)

        monkeypatch.setattr(validate, "validate_bytes", validate_spy)
        got = cached_outcome(folder, schemas_dir, cache)
    monkeypatch.undo()
    assert got == cold_outcome(folder, schemas_dir)
    assert writes == [("write_tei", True), ("write_lmf", True)]  # no cold write
    documents = {len(got["tei"][1]), len(got["lmf"][1])}
    assert validated and documents.isdisjoint(validated)  # parts only, never a whole one
