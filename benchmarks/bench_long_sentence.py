"""Extraction time per word on one ever longer sentence: linear means a flat ratio.

The sentence is a chain of ``conj`` verbs ("Maëlle pêche, rame, pêche ..."), each the
conjunct of the one before, as built by tests/test_occurrences.py. Before the walks up such
chains were memoised, 1,000 words took 1.8 s and 4,000 words 22 s (quadratic). Prints seconds
and microseconds per word for each length, and the ratio of each to the shortest (1.0: linear).

    python benchmarks/bench_long_sentence.py [--lengths 1000 4000 20000]
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))  # the tests' sentence builder
from lexbuild.corpus.occurrences import extract_occurrences, profile_for  # noqa: E402
from tests.test_occurrences import chained_conjuncts  # noqa: E402


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--lengths", type=int, nargs="+", default=[1_000, 4_000, 20_000])
    args = parser.parse_args(argv)
    profile = profile_for("fr")
    reference = 0.0
    print(f"{'verbs':>8}{'seconds':>10}{'us/word':>10}{'ratio':>8}")
    for length in sorted(args.lengths):
        sentence = chained_conjuncts(length)
        started = time.perf_counter()
        occurrences = extract_occurrences(sentence, profile)
        seconds = time.perf_counter() - started
        assert len(occurrences) == length
        per_word = seconds / len(sentence.tokens) * 1e6
        reference = reference or per_word
        print(f"{length:>8}{seconds:>10.3f}{per_word:>10.1f}{per_word / reference:>8.2f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
