"""Pinned external files fetched by sha256: ``lexbuild schemas fetch/status`` and the test data.

The "network" here is a loopback HTTP server (``http.server`` in a thread on 127.0.0.1) that
serves the real published schemas good, tampered, truncated, missing (404), slow or trickling;
no other host is ever contacted. The expected checksums are those of the reference copies'
READMEs (``../shared/schemas/README.md``, ``../shared/corpora/README.md``).
"""

from __future__ import annotations

import hashlib
import os
import re
import signal
import subprocess
import sys
import threading
import time
import urllib.parse
from collections.abc import Iterator
from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer
from pathlib import Path

import pytest
from conftest import PROJECT_ROOT, SHARED

from lexbuild.cli import main
from lexbuild.errors import FetchError
from lexbuild.external import (
    GROUPS,
    PINNED_FILES,
    ensure_group,
    fetch_files,
    pinned,
    user_cache,
)
from lexbuild.formats import schemastore

SCHEMA_NAMES = [file.name for file in pinned("schemas")]
PROXY_VARIABLES = ("http_proxy", "https_proxy", "no_proxy", "all_proxy")


class Loopback:
    """A file server on 127.0.0.1 whose first path segment says how to misbehave."""

    def __init__(self, files: dict[str, bytes]) -> None:
        self.files = files
        self.requests: list[str] = []
        self.trickle_started = threading.Event()
        self.slow_seconds = 2.0
        owner = self

        class Handler(BaseHTTPRequestHandler):
            def log_message(self, *args: object) -> None:  # keep pytest's output clean
                pass

            def do_GET(self) -> None:
                owner.requests.append(self.path)
                # A proxied request names the whole URL; the path is what is served.
                path = urllib.parse.urlsplit(self.path).path
                _, mode, *rest = path.split("/")
                name = "/".join(rest).rsplit("/", 1)[-1]
                data = owner.files.get(name)
                if data is None or mode == "missing":
                    self.send_error(404, "Not Found")
                    return
                if mode == "flaky" and owner.requests.count(self.path) == 1:
                    self.send_error(503, "Service Unavailable")
                    return
                if mode == "tampered":
                    data = data.replace(b"<", b"< ", 1)
                if mode == "slow":
                    time.sleep(owner.slow_seconds)
                self.send_response(200)
                self.send_header("Content-Length", str(len(data)))
                self.end_headers()
                try:
                    if mode == "truncated":
                        self.wfile.write(data[: len(data) // 2])
                        self.close_connection = True
                    elif mode == "trickle":
                        for start in range(0, len(data), 1024):
                            self.wfile.write(data[start : start + 1024])
                            self.wfile.flush()
                            if start >= 8 * 1024:
                                owner.trickle_started.set()
                            time.sleep(0.05)
                    else:
                        self.wfile.write(data)
                except (BrokenPipeError, ConnectionResetError):
                    pass

        self.server = ThreadingHTTPServer(("127.0.0.1", 0), Handler)
        self.server.daemon_threads = True
        self.thread = threading.Thread(target=self.server.serve_forever, daemon=True)

    @property
    def base(self) -> str:
        host, port = self.server.server_address[:2]
        return f"http://{host!s}:{port}"

    def url(self, mode: str) -> str:
        return f"{self.base}/{mode}"


@pytest.fixture(autouse=True)
def no_outside_proxy(monkeypatch: pytest.MonkeyPatch) -> None:
    # A proxy from the environment would receive the loopback requests: none here.
    for name in PROXY_VARIABLES:
        monkeypatch.delenv(name, raising=False)
        monkeypatch.delenv(name.upper(), raising=False)


@pytest.fixture
def cache(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Path:
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "xdg"))
    monkeypatch.delenv("LEXBUILD_SCHEMAS", raising=False)
    return tmp_path / "xdg" / "lexbuild" / "schemas"


@pytest.fixture
def server(schemas_dir: Path) -> Iterator[Loopback]:
    loopback = Loopback({name: (schemas_dir / name).read_bytes() for name in SCHEMA_NAMES})
    loopback.thread.start()
    yield loopback
    loopback.server.shutdown()
    loopback.server.server_close()


def _snapshot(folder: Path) -> dict[str, bytes]:
    """Every file of ``folder`` (hidden ones too), to show a refused fetch changed nothing."""
    if not folder.exists():
        return {}
    return {path.name: path.read_bytes() for path in sorted(folder.iterdir())}


def _published(schemas_dir: Path) -> dict[str, str]:
    # Recomputed here with hashlib from the reference copies, not taken from lexbuild.
    return {
        name: hashlib.sha256((schemas_dir / name).read_bytes()).hexdigest()
        for name in SCHEMA_NAMES
    }


# --------------------------------------------------------------------------- the pinned table


def test_every_pinned_url_is_at_a_fixed_commit() -> None:
    # A branch name (main, master, HEAD) would let the bytes change under a fixed checksum.
    for file in PINNED_FILES:
        assert re.search(r"/[0-9a-f]{40}/", file.url), file.url
        assert file.url.endswith("/" + file.name)
        assert re.fullmatch(r"[0-9a-f]{64}", file.sha256)
    assert {file.group for file in PINNED_FILES} == set(GROUPS)
    assert len({file.name for file in PINNED_FILES}) == len(PINNED_FILES)


@pytest.mark.skipif(SHARED is None, reason="no local reference tree (../shared) to compare with")
def test_pinned_table_is_that_of_the_reference_readmes() -> None:
    # ../shared/schemas/README.md and ../shared/corpora/README.md list URL and sha256 of each
    # external file; the package's table must say the same.
    assert SHARED is not None
    listed: dict[str, str] = {}
    urls: dict[str, str] = {}
    for readme in (SHARED / "schemas" / "README.md", SHARED / "corpora" / "README.md"):
        text = readme.read_text(encoding="utf-8")
        for line in text.splitlines():
            digest = re.search(r"\| ([0-9a-f]{64}) \|$", line)
            name = re.match(r"^\| (?:ud/)?(\S+\.(?:rng|sch|dtd|conllu)) \|", line)
            if digest and name:
                listed[name.group(1)] = digest.group(1)
            for match in re.finditer(r"(https://raw\.githubusercontent\.com/\S+/([^/\s|]+))", line):
                urls[match.group(2)] = match.group(1)
    assert listed == {file.name: file.sha256 for file in PINNED_FILES}
    # The README of the corpora writes "same commit" for the other files of a treebank.
    for file in PINNED_FILES:
        if file.name in urls:
            assert urls[file.name] == file.url
    assert len(urls) >= 5
    assert {n: s for n, s in listed.items() if n in SCHEMA_NAMES} == schemastore.PINNED


def test_reference_copies_have_the_pinned_checksums(schemas_dir: Path, ud_dir: Path) -> None:
    for file in PINNED_FILES:
        folder = schemas_dir if file.group == "schemas" else ud_dir
        assert hashlib.sha256((folder / file.name).read_bytes()).hexdigest() == file.sha256


# ------------------------------------------------------------------------------ fetch, status


def test_fetch_from_a_loopback_mirror_then_status(
    server: Loopback, cache: Path, schemas_dir: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    assert main(["schemas", "status"]) == 1
    assert "lexbuild schemas fetch" in capsys.readouterr().err
    assert main(["schemas", "fetch", "--mirror", server.url("good")]) == 0
    assert sorted(server.requests) == sorted(f"/good/{name}" for name in SCHEMA_NAMES)
    assert {name: hashlib.sha256(data).hexdigest() for name, data in _snapshot(cache).items()} == (
        _published(schemas_dir)
    )
    capsys.readouterr()
    assert main(["schemas", "status"]) == 0
    out = capsys.readouterr().out
    assert out.count("checksum ok") == 3 and "per-user cache" in out
    # The commands that need the schemas find them in the cache with no option.
    assert schemastore.checksums() == _published(schemas_dir)
    # A second fetch finds verified files and downloads nothing; --force downloads again.
    assert main(["schemas", "fetch", "--mirror", server.url("good")]) == 0
    assert len(server.requests) == 3
    assert main(["schemas", "fetch", "--mirror", server.url("good"), "--force"]) == 0
    assert len(server.requests) == 6


def test_folder_mirror(cache: Path, schemas_dir: Path, tmp_path: Path) -> None:
    # How CI and offline sites use the reference copies: --mirror ../shared/schemas.
    assert main(["schemas", "fetch", "--mirror", str(schemas_dir)]) == 0
    assert schemastore.checksums() == _published(schemas_dir)
    assert main(["schemas", "fetch", "--mirror", str(tmp_path / "nowhere"), "--force"]) == 2


def _half_filled_cache(cache: Path, schemas_dir: Path) -> dict[str, bytes]:
    """A cache holding one verified schema and an unrelated file: what must stay as it was."""
    cache.mkdir(parents=True)
    (cache / "TEILex0.sch").write_bytes((schemas_dir / "TEILex0.sch").read_bytes())
    (cache / "notes.txt").write_text("kept\n", encoding="utf-8")
    return _snapshot(cache)


def test_tampered_file_is_refused_and_the_cache_is_unchanged(
    server: Loopback, cache: Path, schemas_dir: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    before = _half_filled_cache(cache, schemas_dir)
    assert main(["schemas", "fetch", "--mirror", server.url("tampered"), "--force"]) == 2
    err = capsys.readouterr().err
    first = SCHEMA_NAMES[0]
    received = hashlib.sha256(
        (schemas_dir / first).read_bytes().replace(b"<", b"< ", 1)
    ).hexdigest()
    assert received in err and _published(schemas_dir)[first] in err  # both checksums named
    assert len(err.strip().splitlines()) == 1  # one line, no traceback
    assert _snapshot(cache) == before


def test_truncated_file_is_retried_then_refused(
    server: Loopback, cache: Path, schemas_dir: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    before = _half_filled_cache(cache, schemas_dir)
    assert main(["schemas", "fetch", "--mirror", server.url("truncated")]) == 2
    err = capsys.readouterr().err
    size = len((schemas_dir / SCHEMA_NAMES[0]).read_bytes())
    assert f"received {size // 2} of {size} bytes" in err and "3 attempts" in err
    assert server.requests == [f"/truncated/{SCHEMA_NAMES[0]}"] * 3
    assert _snapshot(cache) == before


def test_missing_file_is_refused_at_once(
    server: Loopback, cache: Path, schemas_dir: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    before = _half_filled_cache(cache, schemas_dir)
    assert main(["schemas", "fetch", "--mirror", server.url("missing")]) == 2
    assert "HTTP 404" in capsys.readouterr().err
    assert len(server.requests) == 1  # a 404 is not retried
    assert _snapshot(cache) == before


def test_slow_server_times_out(server: Loopback, cache: Path, schemas_dir: Path) -> None:
    before = _half_filled_cache(cache, schemas_dir)
    server.slow_seconds = 1.5
    with pytest.raises(FetchError, match=r"gave up after 2 attempts.*timed out"):
        fetch_files(
            pinned("schemas"), cache, mirror=server.url("slow"), timeout=0.2, attempts=2
        )
    assert _snapshot(cache) == before


def test_server_error_is_retried(server: Loopback, cache: Path, schemas_dir: Path) -> None:
    outcomes = fetch_files(pinned("schemas"), cache, mirror=server.url("flaky"))
    assert all(outcome.fetched for outcome in outcomes)
    assert len(server.requests) == 6  # each file: 503 once, then the file
    assert schemastore.checksums() == _published(schemas_dir)


def test_proxy_variables_are_honoured(
    server: Loopback, cache: Path, schemas_dir: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    # The loopback server plays the proxy: the request names a host that does not exist
    # (.invalid, RFC 2606), so only a proxied request can succeed.
    monkeypatch.setenv("http_proxy", server.base)
    fetch_files(pinned("schemas"), cache, mirror="http://mirror.lexbuild.invalid/good")
    assert server.requests[0] == f"http://mirror.lexbuild.invalid/good/{SCHEMA_NAMES[0]}"
    assert schemastore.checksums() == _published(schemas_dir)


def test_killed_fetch_leaves_nothing_taken_for_a_schema(
    server: Loopback, cache: Path, schemas_dir: Path, tmp_path: Path
) -> None:
    env = {**os.environ, "XDG_CACHE_HOME": str(tmp_path / "xdg")}
    process = subprocess.Popen(
        [sys.executable, "-m", "lexbuild", "schemas", "fetch", "--mirror", server.url("trickle")],
        cwd=PROJECT_ROOT,
        env=env,
        stdout=subprocess.DEVNULL,
        stderr=subprocess.DEVNULL,
    )
    try:
        assert server.trickle_started.wait(60), "the download never started"
    finally:
        process.send_signal(signal.SIGKILL)
        process.wait()
    leftovers = sorted(path.name for path in cache.iterdir())
    assert leftovers and all(name.endswith(".part") and name.startswith(".") for name in leftovers)
    assert main(["schemas", "status"]) == 1  # nothing is taken for a schema
    # A later fetch completes; an old leftover is cleared away.
    for part in cache.glob(".*.part"):
        os.utime(part, (time.time() - 7200, time.time() - 7200))
    assert main(["schemas", "fetch", "--mirror", server.url("good")]) == 0
    assert sorted(path.name for path in cache.iterdir()) == sorted(SCHEMA_NAMES)
    assert schemastore.checksums() == _published(schemas_dir)


def test_status_names_an_altered_file(
    cache: Path, schemas_dir: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    assert main(["schemas", "fetch", "--mirror", str(schemas_dir)]) == 0
    with (cache / "TEILex0.rng").open("ab") as handle:
        handle.write(b"<!-- local edit -->")
    capsys.readouterr()
    assert main(["schemas", "status"]) == 1
    out = capsys.readouterr().out
    assert "TEILex0.rng: ALTERED" in out and out.count("checksum ok") == 2


def test_a_command_that_needs_schemas_names_the_fetch_command(
    cache: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    document = tmp_path / "x.tei.xml"
    document.write_text('<TEI xmlns="http://www.tei-c.org/ns/1.0"/>', encoding="utf-8")
    assert main(["validate", str(document)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "run `lexbuild schemas fetch`" in err[0]


# ------------------------------------------------------------------------- the test treebanks


def test_treebanks_fetched_from_a_mirror_url_into_the_cache(
    ud_dir: Path, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    # LEXBUILD_SHARED as a URL: the tree laid out like ../shared is read as a mirror.
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "xdg"))
    files = {file.name: (ud_dir / file.name).read_bytes() for file in pinned("ud")}
    loopback = Loopback(files)
    loopback.thread.start()
    try:
        folder = ensure_group("ud", loopback.url("tree"))
    finally:
        loopback.server.shutdown()
        loopback.server.server_close()
    assert folder == user_cache("ud") == tmp_path / "xdg" / "lexbuild" / "ud"
    assert sorted(loopback.requests) == sorted(f"/tree/corpora/ud/{name}" for name in files)
    assert _snapshot(folder) == files


def test_reference_folder_is_used_in_place_and_checked(ud_dir: Path, tmp_path: Path) -> None:
    shared = tmp_path / "shared"
    (shared / "corpora").mkdir(parents=True)
    os.symlink(ud_dir, shared / "corpora" / "ud")
    assert ensure_group("ud", shared) == shared / "corpora" / "ud"
    altered = tmp_path / "altered"
    (altered / "corpora" / "ud").mkdir(parents=True)
    for file in pinned("ud"):
        os.symlink(ud_dir / file.name, altered / "corpora" / "ud" / file.name)
    victim = altered / "corpora" / "ud" / "en_ewt-ud-dev.conllu"
    victim.unlink()
    victim.write_text("# sent_id = 1\n", encoding="utf-8")
    with pytest.raises(FetchError, match="altered"):
        ensure_group("ud", altered)


# ----------------------------------------------------------------------------- no silent skips


def test_skips_fail_the_run_when_forbidden(tmp_path: Path) -> None:
    (tmp_path / "test_inner.py").write_text(
        "import pytest\n"
        "def test_skipped():\n"
        "    pytest.skip('optional part missing')\n"
        "def test_passes():\n"
        "    pass\n",
        encoding="utf-8",
    )
    (tmp_path / "test_module_skip.py").write_text(
        "import pytest\npytest.importorskip('lexbuild_no_such_module')\n", encoding="utf-8"
    )
    def run(target: str, forbid: bool) -> subprocess.CompletedProcess[str]:
        command = [
            sys.executable, "-m", "pytest", "-p", "conftest", "-q", "-p", "no:cacheprovider",
            "--rootdir", str(tmp_path), "-c", os.devnull, str(tmp_path / target),
        ]
        env = {**os.environ, "PYTHONPATH": f"{PROJECT_ROOT / 'tests'}{os.pathsep}{PROJECT_ROOT}"}
        env.pop("LEXBUILD_FORBID_SKIPS", None)
        if forbid:
            env["LEXBUILD_FORBID_SKIPS"] = "1"
        return subprocess.run(command, env=env, capture_output=True, text=True, cwd=tmp_path)

    allowed = run("test_inner.py", forbid=False)
    assert allowed.returncode == 0 and "1 passed, 1 skipped" in allowed.stdout, allowed.stdout
    assert run("test_module_skip.py", forbid=False).returncode == 5  # all skipped, none failed
    forbidden = run("test_inner.py", forbid=True)
    assert forbidden.returncode == 1 and "1 failed, 1 passed" in forbidden.stdout
    assert "optional part missing" in forbidden.stdout
    # A module-level skip (importorskip) becomes a collection error that stops the run.
    module = run("test_module_skip.py", forbid=True)
    assert module.returncode == 2 and "1 error" in module.stdout
    assert "skipped while LEXBUILD_FORBID_SKIPS is set" in module.stdout
