"""Shared fixtures: the published schemas and the UD treebanks (pinned, never vendored).

Where the external files come from (the manifest is ``lexbuild.external.PINNED_FILES``):

1. ``$LEXBUILD_SHARED``, else ``../shared`` beside the checkout, when it is a folder holding the
   whole group (``schemas/``, ``corpora/ud/``): used in place, each file's sha256 checked;
2. otherwise the per-user cache (``$XDG_CACHE_HOME/lexbuild/``), filled on first use from
   ``$LEXBUILD_SHARED`` read as a mirror (an http(s) URL laid out like ``../shared``) or, when
   it is unset, from the pinned URLs.

With ``LEXBUILD_FORBID_SKIPS=1`` (set by ``.ci/run``) a skipped test fails the run: in CI every
dependency is installed and every file is there, so a skip can only hide a broken test.
"""

from __future__ import annotations

import os
from collections.abc import Generator
from pathlib import Path

import pytest

PROJECT_ROOT = Path(__file__).resolve().parent.parent
SAMPLE_LEXICON = PROJECT_ROOT / "sample_lexicon"
FORBID_SKIPS_VAR = "LEXBUILD_FORBID_SKIPS"


def shared_reference() -> str | Path | None:
    """``$LEXBUILD_SHARED`` (a folder or an http(s) URL), else ``../shared`` if it exists."""
    from lexbuild.external import is_url

    value = os.environ.get("LEXBUILD_SHARED")
    if value:
        return value if is_url(value) else Path(value)
    default = PROJECT_ROOT.parent / "shared"
    return default if default.is_dir() else None


#: The local reference tree, when there is one (its READMEs hold the pinned tables too).
SHARED: Path | None = (
    _ref if isinstance(_ref := shared_reference(), Path) and _ref.is_dir() else None
)


@pytest.fixture(autouse=True, scope="session")
def _session_cache(tmp_path_factory: pytest.TempPathFactory) -> Generator[None, None, None]:
    """Commands run by the tests keep build results and vectors in a folder of the test
    session, not in the user's cache (unless $LEXBUILD_CACHE names one already)."""
    if os.environ.get("LEXBUILD_CACHE"):
        yield
        return
    os.environ["LEXBUILD_CACHE"] = str(tmp_path_factory.mktemp("lexbuild-cache"))
    try:
        yield
    finally:
        os.environ.pop("LEXBUILD_CACHE", None)


@pytest.fixture(scope="session")
def schemas_dir() -> Path:
    """A folder with the three published schemas, sha256 verified."""
    from lexbuild.external import ensure_group

    return ensure_group("schemas", shared_reference())


@pytest.fixture(scope="session")
def ud_dir() -> Path:
    """A folder with the six pinned UD treebank files, sha256 verified."""
    from lexbuild.external import ensure_group

    return ensure_group("ud", shared_reference())


@pytest.fixture(scope="session")
def sample_lexicon_dir() -> Path:
    return SAMPLE_LEXICON


def skips_forbidden() -> bool:
    return os.environ.get(FORBID_SKIPS_VAR, "") not in {"", "0"}


def _forbid(report: pytest.TestReport | pytest.CollectReport) -> None:
    if not report.skipped or hasattr(report, "wasxfail"):
        return
    longrepr = report.longrepr
    reason = longrepr[2] if isinstance(longrepr, tuple) else str(longrepr)
    report.outcome = "failed"
    report.longrepr = f"skipped while {FORBID_SKIPS_VAR} is set (no silent skips): {reason}"


@pytest.hookimpl(hookwrapper=True)
def pytest_runtest_makereport(
    item: pytest.Item, call: pytest.CallInfo[None]
) -> Generator[None, pytest.TestReport, None]:
    outcome = yield
    if skips_forbidden():
        _forbid(outcome.get_result())  # type: ignore[attr-defined]


@pytest.hookimpl(hookwrapper=True)
def pytest_make_collect_report(
    collector: pytest.Collector,
) -> Generator[None, pytest.CollectReport, None]:
    outcome = yield
    if skips_forbidden():
        _forbid(outcome.get_result())  # type: ignore[attr-defined]
