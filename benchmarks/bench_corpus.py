"""Corpus stage benchmarks, each ratio measured against its reference in the same run.

1. Reader: MB/s of lexbuild.corpus.conllu.iter_sentences and of the ``conllu`` package's
   ``parse_incr`` (github.com/EmilStenstrom/conllu) over the same UD files; ratio.
2. Occurrences + frames (iter_occurrences -> count_frames) over all the UD files, then over
   them concatenated ``--repeat`` times (default 10): seconds, occurrences/s and peak resident
   memory of a fresh process each; streaming means the peak stays flat.
3. spaCy parsing (lexbuild.corpus.textparse.parse_texts, default pipeline, ``nlp.pipe`` with the
   components a parse does not need left out): sentences/s with 1 and 2 workers on the
   ``# text`` lines of a UD file. The 2-worker figure includes starting the worker processes.

    python benchmarks/bench_corpus.py [UD_DIR] [--repeat 10] [--skip-parse]
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

DEFAULT_UD = Path(__file__).resolve().parents[2] / "shared/corpora/ud"

_CHILD = r"""
import json, resource, sys, time
from lexbuild.corpus.occurrences import iter_occurrences
from lexbuild.corpus.valency import count_frames
started = time.perf_counter()
seen = 0
def counted(stream):
    global seen
    for occurrence in stream:
        seen += 1
        yield occurrence
table = count_frames(counted(iter_occurrences(sys.argv[1:], language="fr")))
seconds = time.perf_counter() - started
peak_kib = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
print(json.dumps({"seconds": seconds, "occurrences": seen, "lemmas": len(table),
                  "peak_mib": peak_kib / 1024}))
"""


def bench_reader(files: list[Path]) -> None:
    import conllu

    from lexbuild.corpus.conllu import iter_sentences

    size_mb = sum(f.stat().st_size for f in files) / 1e6
    started = time.perf_counter()
    ours = sum(1 for _ in iter_sentences(files))
    ours_s = time.perf_counter() - started
    started = time.perf_counter()
    theirs = 0
    for path in files:
        with path.open(encoding="utf-8") as handle:
            theirs += sum(1 for _ in conllu.parse_incr(handle))
    theirs_s = time.perf_counter() - started
    assert ours == theirs, (ours, theirs)
    print(f"reader: {len(files)} files, {size_mb:.1f} MB, {ours} sentences")
    print(f"  lexbuild.corpus.conllu   {size_mb / ours_s:7.1f} MB/s  ({ours_s:.2f} s)")
    print(f"  conllu.parse_incr {size_mb / theirs_s:7.1f} MB/s  ({theirs_s:.2f} s)")
    print(f"  ratio             {theirs_s / ours_s:7.2f}x faster")


def _child(paths: list[Path]) -> dict[str, float]:
    result = subprocess.run(
        [sys.executable, "-c", _CHILD, *map(str, paths)],
        check=True,
        capture_output=True,
        text=True,
    )
    return dict(json.loads(result.stdout))


def bench_frames(files: list[Path], repeat: int) -> None:
    with tempfile.TemporaryDirectory() as folder:
        once = _child(files)
        big = Path(folder) / "repeated.conllu"
        with big.open("wb") as target:
            for _ in range(repeat):
                for path in files:
                    target.write(path.read_bytes())
                    target.write(b"\n")
        many = _child([big])
        size_mb = big.stat().st_size / 1e6
    print("occurrences + frames (fresh process each, peak RSS includes the interpreter):")
    for label, run in (("corpus x1", once), (f"corpus x{repeat} ({size_mb:.0f} MB)", many)):
        print(
            f"  {label:<24} {run['seconds']:7.2f} s  {run['occurrences'] / run['seconds']:9.0f} "
            f"occurrences/s  {int(run['occurrences']):8d} occurrences  peak {run['peak_mib']:6.1f}"
            " MiB"
        )
    print(f"  peak memory ratio x{repeat} / x1: {many['peak_mib'] / once['peak_mib']:.2f}")


def bench_parse(gold: Path) -> None:
    from lexbuild.corpus.conllu import iter_sentences
    from lexbuild.corpus.textparse import load_pipeline, parse_texts

    texts = [s.text for s in iter_sentences(gold)]
    with tempfile.TemporaryDirectory() as folder:
        source = Path(folder) / "bench.txt"
        source.write_text("\n\n".join(texts) + "\n", encoding="utf-8")  # one paragraph each
        started = time.perf_counter()
        nlp = load_pipeline()
        load_s = time.perf_counter() - started
        print(
            f"spaCy parsing: {len(texts)} paragraphs of {gold.name}, pipeline {nlp.meta['name']}"
            f" {nlp.meta['version']} (load {load_s:.1f} s, not counted)"
        )
        for workers in (1, 2):
            out = Path(folder) / f"out{workers}.conllu"
            started = time.perf_counter()
            report = parse_texts([source], out, nlp=nlp, workers=workers, clean_parts=True)
            seconds = time.perf_counter() - started
            print(
                f"  workers={workers}: {report.sentences / seconds:7.1f} sentences/s "
                f"({report.sentences} sentences, {seconds:.1f} s)"
            )


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("ud_dir", nargs="?", type=Path, default=DEFAULT_UD)
    parser.add_argument("--repeat", type=int, default=10)
    parser.add_argument("--skip-parse", action="store_true")
    args = parser.parse_args(argv)
    files = sorted(args.ud_dir.glob("*.conllu"))
    if not files:
        parser.error(f"no .conllu file in {args.ud_dir}")
    bench_reader(files)
    bench_frames(files, args.repeat)
    if not args.skip_parse:
        bench_parse(args.ud_dir / "fr_gsd-ud-test.conllu")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
