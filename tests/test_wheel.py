"""The built wheel carries everything ``lexbuild demo`` needs, and the demo runs from it alone.

The wheel is built by pip (``pip wheel``, no dependencies, no build isolation: the build runs
offline) from a copy of the checkout, installed into a temporary folder with ``--target``, and
the demo is run from a folder outside the checkout with only that folder on ``PYTHONPATH``
(its dependencies come from the running environment).
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
import zipfile
from pathlib import Path

import pytest
from conftest import PROJECT_ROOT

SKIP_IN_COPY = shutil.ignore_patterns(
    ".git", ".venv", "build", "dist", "*.egg-info", "__pycache__", ".*_cache", ".hypothesis",
    "demo-output", ".benchmarks",
)


@pytest.fixture(scope="module")
def wheel(tmp_path_factory: pytest.TempPathFactory) -> Path:
    work = tmp_path_factory.mktemp("wheel")
    source = work / "source"
    shutil.copytree(PROJECT_ROOT, source, ignore=SKIP_IN_COPY)
    subprocess.run(
        [sys.executable, "-m", "pip", "wheel", str(source), "--no-deps", "--no-build-isolation",
         "--quiet", "--wheel-dir", str(work / "dist")],
        check=True,
        cwd=work,
    )
    (built,) = (work / "dist").glob("lexbuild-*.whl")
    return built


def test_wheel_carries_the_demo_data(wheel: Path) -> None:
    names = set(zipfile.ZipFile(wheel).namelist())
    def inside(folder: Path, pattern: str, prefix: str) -> set[str]:
        return {
            f"{prefix}/{path.relative_to(folder).as_posix()}"
            for path in folder.rglob(pattern)
            if path.is_file() and "__pycache__" not in path.parts
        }

    tracked = (
        inside(PROJECT_ROOT / "lexbuild" / "data", "*", "lexbuild/data")
        | inside(PROJECT_ROOT / "sample_lexicon", "*", "lexbuild/data/sample_lexicon")
        | inside(PROJECT_ROOT / "schemas", "*.schema.json", "lexbuild/data/json_schemas")
    )
    assert "lexbuild/data/demo/gold.tsv" in tracked
    assert tracked <= names, sorted(tracked - names)


@pytest.mark.slow
def test_demo_runs_from_the_installed_wheel_outside_the_checkout(
    wheel: Path, schemas_dir: Path, tmp_path: Path
) -> None:
    target = tmp_path / "site"
    subprocess.run(
        [sys.executable, "-m", "pip", "install", "--no-deps", "--quiet", "--target", str(target),
         str(wheel)],
        check=True,
    )
    outside = tmp_path / "elsewhere"
    outside.mkdir()
    env = {**os.environ, "PYTHONPATH": str(target), "XDG_CACHE_HOME": str(tmp_path / "xdg")}
    where = subprocess.run(
        [sys.executable, "-c", "import lexbuild; print(lexbuild.__file__)"],
        cwd=outside, env=env, capture_output=True, text=True, check=True,
    )
    assert Path(where.stdout.strip()).is_relative_to(target)
    demo = subprocess.run(
        [sys.executable, "-m", "lexbuild", "demo", "--output", "out", "--schemas",
         str(schemas_dir)],
        cwd=outside, env=env, capture_output=True, text=True,
    )
    assert demo.returncode == 0, demo.stderr[-3000:]
    assert "validation problems in the released edition: 0" in demo.stdout
    editions = outside / "out" / "editions"
    assert sorted(p.name for p in editions.iterdir()) == ["edition-1", "edition-2"]
