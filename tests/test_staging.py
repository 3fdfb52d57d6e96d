"""Interrupted runs leave nothing behind for long, merges never write through symbolic links,
and published files are readable by others as the umask allows (like files ``open`` creates)."""

from __future__ import annotations

import logging
import os
import stat
from pathlib import Path

import pytest

from lexbuild._atomic import (
    atomic_write_bytes,
    remove_stale_staging,
    staging_dir,
    symlinks_inside,
)
from lexbuild.editions.merge import merge_induction
from lexbuild.editions.release import release
from lexbuild.errors import MergeError
from tests.test_merge import InducedSense, build_induction, build_sources, unit

FIXTURES = Path(__file__).parent / "fixtures" / "editions"


def _dead_pid() -> int:
    # A pid above the kernel's maximum is never alive (common practice: pid_max <= 2**22).
    return 2**22 + 12345


def test_leftovers_of_a_killed_run_are_removed_with_a_message(
    tmp_path: Path, caplog: pytest.LogCaptureFixture
) -> None:
    dead = tmp_path / f".edition-2.{_dead_pid()}-abc.partial"
    older_style = tmp_path / ".edition-2.x1y2.partial"
    alive = tmp_path / f".edition-2.{os.getpid()}-def.partial"
    other = tmp_path / f".edition-3.{_dead_pid()}-abc.partial"
    for folder in (dead, older_style, alive, other):
        (folder / "sub").mkdir(parents=True)
    with caplog.at_level(logging.WARNING, logger="lexbuild"):
        removed = remove_stale_staging(tmp_path / "edition-2")
    assert removed == sorted([dead, older_style])
    assert alive.is_dir() and other.is_dir()  # a live run's, another target's: kept
    assert all(str(path) in caplog.text for path in removed)


def test_release_removes_an_earlier_killed_release(
    tmp_path: Path, schemas_dir: Path, caplog: pytest.LogCaptureFixture
) -> None:
    output = tmp_path / "out"
    leftover = output / f".edition-1.{_dead_pid()}-k1ll.partial"
    leftover.mkdir(parents=True)
    (leftover / "lexicon.tei.xml").write_text("<half", encoding="utf-8")
    with caplog.at_level(logging.WARNING, logger="lexbuild"):
        release(FIXTURES / "old", edition=1, output=output, schemas_dir=schemas_dir)
    assert sorted(p.name for p in output.iterdir()) == ["edition-1"]
    assert "interrupted run" in caplog.text


def test_merge_removes_an_earlier_killed_merge(tmp_path: Path) -> None:
    src = build_sources(tmp_path / "src", [])
    leftover = tmp_path / f".src.{_dead_pid()}-abcd.partial"
    (leftover / "entries").mkdir(parents=True)
    induced = build_induction(
        tmp_path / "ind", "run1", {"hisser": [InducedSense(["a.1"], unit(1, 0))]}
    )
    merge_induction(induced, src)
    assert not leftover.exists()
    assert not list(tmp_path.glob(".src.*.partial"))


def test_merge_refuses_a_linked_entries_folder(tmp_path: Path) -> None:
    src = build_sources(tmp_path / "src", [])
    elsewhere = tmp_path / "elsewhere"
    (src / "entries").mkdir(exist_ok=True)
    (src / "entries").rename(elsewhere)
    (src / "entries").symlink_to(elsewhere)
    before = sorted(p.name for p in elsewhere.iterdir())
    induced = build_induction(
        tmp_path / "ind", "run1", {"hisser": [InducedSense(["a.1"], unit(1, 0))]}
    )
    with pytest.raises(MergeError, match="symbolic link"):
        merge_induction(induced, src)
    assert sorted(p.name for p in elsewhere.iterdir()) == before  # nothing written through it


def test_symlinks_inside_lists_links_without_following_them(tmp_path: Path) -> None:
    (tmp_path / "a").mkdir()
    (tmp_path / "a" / "f.yaml").write_text("x", encoding="utf-8")
    (tmp_path / "a" / "link.yaml").symlink_to(tmp_path / "a" / "f.yaml")
    assert symlinks_inside(tmp_path) == [tmp_path / "a" / "link.yaml"]


@pytest.mark.parametrize(("umask", "mode"), [(0o022, 0o644), (0o077, 0o600), (0o002, 0o664)])
def test_written_files_take_their_mode_from_the_umask(
    tmp_path: Path, umask: int, mode: int
) -> None:
    previous = os.umask(umask)
    try:
        atomic_write_bytes(tmp_path / "lexicon.tei.xml", b"<TEI/>")
        with staging_dir(tmp_path / "edition-1") as stage:
            folder_mode = stat.S_IMODE(stage.stat().st_mode)
    finally:
        os.umask(previous)
    # What open() and mkdir() give under the same umask (POSIX: mode & ~umask).
    assert stat.S_IMODE((tmp_path / "lexicon.tei.xml").stat().st_mode) == mode
    assert folder_mode == 0o777 & ~umask
