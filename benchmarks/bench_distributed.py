"""``frames`` and ``induce`` on local Dask clusters: throughput, ratios and peak memory.

Usage:
    python benchmarks/bench_distributed.py frames [--sentences 100000,1000000] [--workers 1,2]
    python benchmarks/bench_distributed.py induce [--sentences 100000,1000000] [--workers 0,1,2]
        [--verbs 20] [--cap 2000]

The corpus is the shared French UD treebanks repeated (sentence ids made unique per copy)
up to the number of sentences asked, written to a temporary folder and removed afterwards.
Each measurement starts a fresh local cluster, so each worker's peak resident memory
(``ru_maxrss``, read on the worker) belongs to that run alone. Memory that stays flat from
100k to 1M sentences is what "constant in corpus size" means here. The machine may be shared:
print the load average beside the numbers.

Measured (2 cores shared with other jobs, load average 13-17 during the frames runs, 2-5
during the induce runs at 200k):

    frames, 100k sentences (144 MiB): 1 worker 134.4 s (744 sentences/s), 2 workers 70.7 s
        (1,415/s, x1.90); peak RSS per worker 86 MB and 84 MB
    frames, 1M sentences (1.4 GiB), 2 workers: 365.2 s (2,738/s, lower load by then); peak RSS
        per worker 92 and 93 MB: +9% for 10x the corpus (shard size fixed at 16 MiB)
    induce before per-verb caps were applied while reading (20 most frequent verbs, embedded
        default, threshold 0.6, no cache): peak RSS per worker 0.7 GB at 50k, 1.1 GB at 200k
        sentences, since each verb task held all of the verb's occurrences and vectors.
    induce now (each measurement in a fresh process; cap 2000; 20 verbs; load average 8-21 on
        the 2 shared cores, so wall times say little and 2 workers ran slower than 1):
        100k sentences (43,852 occurrences, 69 senses): one process 406.2 s, peak RSS 785 MB;
            1 worker 515.8 s, client 391 MB, worker 725 MB; 2 workers 585.6 s, client 435 MB,
            workers 719 and 731 MB.
        500k sentences (219,352 occurrences, 71 senses): one process 1736.7 s, peak RSS 874 MB:
            +11% for 5x the corpus and 5x the occurrences (the run before capped reading held
            every occurrence: memory grew with them); 2 workers 616.5 s (lower load, 4-9),
            workers 741 and 770 MB (+3% and +5% on 100k), client 617 MB (+42% on 100k: not
            investigated; the executor keeps 8 tasks in flight, each bounded by a shard).
        Stages of the one-process runs, 100k / 500k: obliques 103 / 939 s, reading (sampling)
        126 / 500 s, clustering 63 / 26 s (spaCy vectors loaded there), assigning 114 / 273 s.
        1M was not run: at this load one process would take about an hour.
"""

from __future__ import annotations

import argparse
import os
import resource
import shutil
import tempfile
import time
from collections import Counter
from pathlib import Path
from typing import Any

from lexbuild.corpus.conllu import iter_sentences
from lexbuild.corpus.sharded import count_frames_sharded
from lexbuild.corpus.shards import SHARD_BYTES
from lexbuild.distributed import open_executor

UD = Path(__file__).resolve().parents[2] / "shared" / "corpora" / "ud"
SOURCES = ("fr_sequoia-ud-train", "fr_sequoia-ud-dev", "fr_sequoia-ud-test",
           "fr_gsd-ud-dev", "fr_gsd-ud-test")


def build_corpus(folder: Path, sentences: int) -> Path:
    """One CoNLL-U file of ``sentences`` sentences: the shared treebanks, copy after copy."""
    blocks: list[str] = []
    for name in SOURCES:
        text = (UD / f"{name}.conllu").read_text(encoding="utf-8")
        blocks.extend(b.strip("\n") for b in text.split("\n\n") if b.strip())
    path = folder / f"repeated-{sentences}.conllu"
    written = 0
    with path.open("w", encoding="utf-8") as out:
        copy = 0
        while written < sentences:
            copy += 1
            for block in blocks:
                if written == sentences:
                    break
                out.write(block.replace("# sent_id = ", f"# sent_id = c{copy}-", 1) + "\n\n")
                written += 1
    return path


def _worker_peak_mb() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024


def _load() -> str:
    return " ".join(f"{x:.1f}" for x in os.getloadavg())


def bench_frames(corpus: Path, workers: int) -> dict[str, Any]:
    with open_executor(workers=workers) as executor:
        assert executor is not None
        start = time.perf_counter()
        table, stats, _ = count_frames_sharded([corpus], executor)
        seconds = time.perf_counter() - start
        peaks = executor.client.run(_worker_peak_mb)
    return {
        "seconds": seconds,
        "occurrences": sum(n for n, _ in stats.values()),
        "verbs": len(table),
        "worker_peak_mb": sorted(round(v) for v in peaks.values()),
    }


def run_frames(args: argparse.Namespace, folder: Path) -> None:
    print(f"shard size {SHARD_BYTES // 2**20} MiB; load average at start: {_load()}")
    reference: dict[int, float] = {}
    for sentences in args.sentences:
        corpus = build_corpus(folder, sentences)
        print(f"\ncorpus: {sentences:,} sentences, {corpus.stat().st_size / 2**20:,.0f} MiB")
        for workers in args.workers:
            result = bench_frames(corpus, workers)
            rate = sentences / result["seconds"]
            reference.setdefault(sentences, rate)
            print(
                f"  frames, {workers} worker(s): {result['seconds']:7.1f} s, "
                f"{rate:8,.0f} sentences/s (x{rate / reference[sentences]:.2f} of "
                f"{args.workers[0]} worker(s)), {result['occurrences']:,} occurrences, "
                f"peak RSS per worker {result['worker_peak_mb']} MB; load {_load()}"
            )
        corpus.unlink()


def _frequent_verbs(n: int) -> list[str]:
    """The ``n`` most frequent verbs of the repeated treebanks (the same in every copy)."""
    counts: Counter[str] = Counter(
        t.lemma for s in iter_sentences([UD / f"{name}.conllu" for name in SOURCES])
        for t in s.tokens if t.upos == "VERB"
    )
    return [lemma for lemma, _ in counts.most_common(n)]


def induce_once(corpus: Path, verbs: list[str], workers: int, cap: int, spool: Path) -> None:
    """One induction in this (fresh) process; prints one JSON line of measurements."""
    import json

    from lexbuild.senses.distributed_induce import induce_corpus
    from lexbuild.senses.executor import InProcessExecutor
    from lexbuild.senses.settings import InductionSettings
    from lexbuild.senses.vectors import load_representation

    settings = InductionSettings(threshold=0.6, cap=cap)
    representation = load_representation("static-syntactic")
    stages: dict[str, float] = {}
    clock = {"name": "", "since": time.perf_counter()}

    def on_stage(name: str) -> None:
        now = time.perf_counter()
        if clock["name"]:
            stages[str(clock["name"])] = round(now - float(clock["since"]), 1)
        clock.update(name=name, since=now)

    start = time.perf_counter()
    peaks: list[float] = []
    if workers == 0:
        run, _ = induce_corpus([corpus], representation, InProcessExecutor(), settings,
                               lemmas=verbs, spill=spool, on_stage=on_stage)
    else:
        with open_executor(workers=workers) as executor:
            assert executor is not None
            run, _ = induce_corpus([corpus], representation, executor, settings,
                                   lemmas=verbs, spill=spool, on_stage=on_stage)
            peaks = sorted(round(v) for v in executor.client.run(_worker_peak_mb).values())
    on_stage("")
    print(json.dumps({
        "seconds": time.perf_counter() - start,
        "stages": stages,
        "occurrences": sum(run.counts.values()),
        "senses": sum(len(r.entry.senses) for r in run.results),
        "process_peak_mb": round(_worker_peak_mb()),
        "worker_peak_mb": peaks,
    }))


def run_induce(args: argparse.Namespace, folder: Path) -> None:
    import json
    import subprocess
    import sys

    verbs = _frequent_verbs(args.verbs)
    print(f"load average at start: {_load()}; cap {args.cap}; {len(verbs)} verbs: "
          f"{' '.join(verbs)}")
    for sentences in args.sentences:
        corpus = build_corpus(folder, sentences)
        print(f"\ncorpus: {sentences:,} sentences, {corpus.stat().st_size / 2**20:,.0f} MiB")
        reference = None
        for workers in args.workers:
            spool = folder / f"spool-{workers}"
            # A fresh process per measurement: its peak resident memory is this run's alone.
            done = subprocess.run(
                [sys.executable, __file__, "induce-once", "--corpus", str(corpus),
                 "--workers", str(workers), "--cap", str(args.cap), "--spool", str(spool),
                 "--verb-list", ",".join(verbs)],
                check=True, capture_output=True, text=True,
                # This checkout's lexbuild, whatever the environment has installed.
                env={**os.environ, "PYTHONPATH": str(Path(__file__).resolve().parents[1])},
            )
            shutil.rmtree(spool, ignore_errors=True)
            result = json.loads(done.stdout.strip().splitlines()[-1])
            seconds = result["seconds"]
            reference = reference or seconds
            where = "one process" if workers == 0 else f"{workers} worker(s)"
            print(
                f"  induce, {where}: {seconds:7.1f} s (x{reference / seconds:.2f} of the "
                f"first), stages {result['stages']}, {result['occurrences']:,} occurrences, "
                f"{result['senses']} senses; peak RSS: process {result['process_peak_mb']} MB, "
                f"per worker {result['worker_peak_mb']} MB; load {_load()}"
            )
        corpus.unlink()


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("stage", choices=("frames", "induce", "induce-once"))
    parser.add_argument("--sentences", default=None, help="comma-separated corpus sizes")
    parser.add_argument(
        "--workers", default=None,
        help="comma-separated worker counts (induce: 0 is one process; default 0,1,2)",
    )
    parser.add_argument("--verbs", type=int, default=20, help="induce: most frequent verbs")
    parser.add_argument("--cap", type=int, default=2000, help="induce: occurrences per verb")
    parser.add_argument("--corpus", type=Path, help=argparse.SUPPRESS)
    parser.add_argument("--spool", type=Path, help=argparse.SUPPRESS)
    parser.add_argument("--verb-list", help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.stage == "induce-once":
        induce_once(args.corpus, args.verb_list.split(","), int(args.workers), args.cap,
                    args.spool)
        return
    args.workers = args.workers or ("0,1,2" if args.stage == "induce" else "1,2")
    default = "100000,1000000"
    args.sentences = [int(x) for x in (args.sentences or default).split(",")]
    args.workers = [int(x) for x in args.workers.split(",")]
    folder = Path(tempfile.mkdtemp(prefix="lexbuild-bench-"))
    try:
        (run_frames if args.stage == "frames" else run_induce)(args, folder)
    finally:
        shutil.rmtree(folder, ignore_errors=True)


if __name__ == "__main__":
    main()
