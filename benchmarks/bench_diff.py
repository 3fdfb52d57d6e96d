"""Benchmark of ``lexbuild diff`` on two released editions (run on demand, not a test).

Builds a synthetic lexicon of N entries x 3 senses x 2 frames x 3 examples, a second edition
with about 1 % of entries added and removed and changes of every kind on 5 % of the senses,
exports both to TEI Lex-0, then times the diff from the two TEI files (safe read-back of both,
comparison, Markdown/JSON/HTML rendering). Reference measured in the same run: a bare lxml
parse of the same two files (no model, no comparison). Target: < 10 s for 10,000 entries.

    python benchmarks/bench_diff.py [--entries 10000] [--with-read-tei]
"""

from __future__ import annotations

import argparse
import datetime as dt
import gc
import tempfile
import time
from collections.abc import Callable
from pathlib import Path
from typing import TypeVar

from bench_lexicon import synthetic_entry  # the same synthetic entries (run from benchmarks/)
from lxml import etree

from lexbuild.lexicon import ids
from lexbuild.lexicon.model import Entry, Frame, Lexicon, LexiconMeta, SourceRef, Status

T = TypeVar("T")
ADDED_FRAME = "subj:NP"


def entry(number: int, variant: int = 0) -> Entry:
    """The first edition's entry (bench_lexicon's generator); in the second, 5 % of entries
    carry changes of every kind: frequency, added frame, swapped example, approval, gloss."""
    base = synthetic_entry(number)
    if not (variant and number % 20 == 0):
        return base
    s1, s2, s3 = base.senses
    f1 = s1.frames[0]
    f1 = f1.model_copy(update={"frequency": (f1.frequency or 0) + 3})
    s1 = s1.model_copy(
        update={
            "status": Status.APPROVED,
            "frames": [f1, *s1.frames[1:]],
            "examples": [
                *s1.examples[:2],
                s1.examples[2].model_copy(
                    update={
                        "id": ids.example_id(s1.id, 4),
                        "source": SourceRef(corpus="synthetic", sentence=f"s{number}.1.4"),
                    }
                ),
            ],
        }
    )
    added = Frame(id=ids.frame_id(s2.id, 3), pattern=ADDED_FRAME, frequency=2)
    s2 = s2.model_copy(update={"frames": [*s2.frames, added]})
    s3 = s3.model_copy(update={"gloss": f"{s3.gloss} (revu)"})
    return base.model_copy(update={"senses": [s1, s2, s3]})


def lexicon(count: int, variant: int, edition: int) -> Lexicon:
    meta = LexiconMeta(title="Synthetic", language="fr", edition=edition,
                       release_date=dt.date(2026, 12, edition), licence="CC-BY-4.0")
    numbers = range(count) if not variant else [
        n for n in range(count + count // 100) if n % 100 != 7
    ]
    return Lexicon(meta=meta, entries=[entry(n, variant) for n in numbers])


def timed(label: str, figures: dict[str, float], action: Callable[[], T]) -> T:
    """Wall-clock seconds (kept) and CPU seconds of this process (printed: on a shared machine
    they show what the step costs when it has the cores to itself)."""
    start, cpu = time.perf_counter(), time.process_time()
    result = action()
    figures[label] = time.perf_counter() - start
    print(f"{label:<28} {figures[label]:8.2f} s wall {time.process_time() - cpu:8.2f} s CPU",
          flush=True)
    return result


def main() -> None:
    from lexbuild.editions.diff import diff_lexicons, diff_paths, to_html, to_json, to_markdown
    from lexbuild.formats.tei import read_tei, to_tei

    parser = argparse.ArgumentParser()
    parser.add_argument("--entries", type=int, default=10_000)
    parser.add_argument("--with-read-tei", action="store_true",
                        help="also time the full typed read-back (tei.read_tei) of both files")
    args = parser.parse_args()
    figures: dict[str, float] = {}
    with tempfile.TemporaryDirectory() as tmp:
        old_file, new_file = Path(tmp) / "e1.tei.xml", Path(tmp) / "e2.tei.xml"
        models = [lexicon(args.entries, 0, 1), lexicon(args.entries, 1, 2)]
        old_file.write_bytes(to_tei(models[0]))
        new_file.write_bytes(to_tei(models[1]))
        print(f"editions: {len(models[0].entries)} and {len(models[1].entries)} entries, TEI "
              f"{old_file.stat().st_size / 1e6:.1f} + {new_file.stat().st_size / 1e6:.1f} MB")
        timed("compare (typed models)", figures, lambda: diff_lexicons(*models))
        models.clear()  # the command holds no typed model: neither does the timing
        gc.collect()
        timed("reference: lxml parse x2", figures,
              lambda: (etree.parse(str(old_file)), etree.parse(str(new_file))))
        if args.with_read_tei:
            timed("read_tei x2 (typed model)", figures,
                  lambda: (read_tei(old_file), read_tei(new_file)))
        result = timed("diff from TEI files (all)", figures,
                       lambda: diff_paths(old_file, new_file))
        timed("render md + json + html", figures,
              lambda: (to_markdown(result), to_json(result), to_html(result)))
    total = figures["diff from TEI files (all)"] + figures["render md + json + html"]
    print(f"{'whole diff command':<28} {total:8.2f} s  (target < 10 s; "
          f"{total / figures['reference: lxml parse x2']:.1f} x a bare lxml parse)")
    print("changes:", {kind: n for kind, n in result.summary.items() if n})


if __name__ == "__main__":
    main()
