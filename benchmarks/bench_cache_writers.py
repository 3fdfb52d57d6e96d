"""Vector cache with concurrent writers: a shard per worker merged afterwards vs one WAL file.

Usage: python benchmarks/bench_cache_writers.py [--writers 2] [--vectors 20000] [--dim 300]

``shards``: each writer process puts its vectors into a file of its own (``VectorCache``), the
client merges them into the main file afterwards (``merge_vector_shards``): what the Dask
back-end does. ``wal``: every writer puts its vectors into the one main file in SQLite WAL mode
(writers queue on SQLite's single write lock, ``busy_timeout``). Both write batches of 512, the
batch size of ``encode_cached``. Prints wall times and the ratio; the machine may be shared.
"""

from __future__ import annotations

import argparse
import multiprocessing
import os
import sqlite3
import tempfile
import time
from pathlib import Path

import numpy as np

from lexbuild.senses.vectors import SHARDS_DIR, VectorCache, merge_vector_shards

BATCH = 512


def _batches(writer: int, vectors: int, dim: int) -> list[list[tuple[str, np.ndarray]]]:
    rng = np.random.default_rng(writer)
    rows = [(f"w{writer}-{i}", rng.normal(size=dim).astype(np.float32)) for i in range(vectors)]
    return [rows[i : i + BATCH] for i in range(0, vectors, BATCH)]


def _write_shard(args: tuple[str, int, int, int]) -> None:
    folder, writer, vectors, dim = args
    shard = Path(folder) / SHARDS_DIR / f"writer-{writer}.sqlite"
    shard.parent.mkdir(parents=True, exist_ok=True)
    with VectorCache(shard) as cache:
        for batch in _batches(writer, vectors, dim):
            cache.put_many("space", batch)


def _write_wal(args: tuple[str, int, int, int]) -> None:
    folder, writer, vectors, dim = args
    db = sqlite3.connect(Path(folder) / "vectors.sqlite", timeout=600)
    for batch in _batches(writer, vectors, dim):
        rows = [("space", key, v.size, v.tobytes()) for key, v in batch]
        with db:
            db.executemany("INSERT OR REPLACE INTO vectors VALUES (?, ?, ?, ?)", rows)
    db.close()


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--writers", type=int, default=2)
    parser.add_argument("--vectors", type=int, default=20000, help="per writer")
    parser.add_argument("--dim", type=int, default=300)
    args = parser.parse_args()
    print(f"{args.writers} writers x {args.vectors:,} vectors of {args.dim} floats; "
          f"load average {os.getloadavg()[0]:.1f}")
    results = {}
    with tempfile.TemporaryDirectory() as tmp:
        for mode in ("shards", "wal"):
            folder = Path(tmp) / mode
            VectorCache(folder).close()
            if mode == "wal":
                sqlite3.connect(folder / "vectors.sqlite").execute("PRAGMA journal_mode=WAL")
            jobs = [(str(folder), w, args.vectors, args.dim) for w in range(args.writers)]
            start = time.perf_counter()
            with multiprocessing.get_context("spawn").Pool(args.writers) as pool:
                pool.map(_write_shard if mode == "shards" else _write_wal, jobs)
            written = time.perf_counter() - start
            if mode == "shards":
                merge_vector_shards(folder)
            total = time.perf_counter() - start
            with VectorCache(folder) as cache:
                assert len(cache) == args.writers * args.vectors
            results[mode] = total
            print(f"  {mode:6}: writes {written:6.2f} s, with merge {total:6.2f} s")
    print(f"  shards / wal: x{results['shards'] / results['wal']:.2f} (below 1: shards faster)")


if __name__ == "__main__":
    main()
