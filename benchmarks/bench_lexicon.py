"""Benchmark of the dictionary core on a synthetic lexicon (run on demand, not a test).

Generates N entries x 3 senses x 2 frames x 3 examples as YAML sources, then times, as separate
figures: YAML load, check, TEI export, LMF export, validation of both exports.

    python benchmarks/bench_lexicon.py [--entries 10000] [--schemas DIR]
"""

from __future__ import annotations

import argparse
import datetime as dt
import tempfile
import time
from collections.abc import Callable
from pathlib import Path
from typing import TypeVar

from lexbuild.lexicon import ids
from lexbuild.lexicon.model import (
    Corpus,
    Entry,
    Example,
    Frame,
    LexiconMeta,
    Sense,
    SourceRef,
    Status,
)

T = TypeVar("T")
PATTERNS = (
    "subj:NP obj:NP",
    "subj:NP obl:PP[de]?",
    "subj:NP comp:CLAUSE[que]",
    "subj:NP iobj:PP[à]",
)


def synthetic_entry(number: int) -> Entry:
    lemma = f"verbe{number}er"
    entry = ids.entry_id(lemma)
    senses = []
    for s in range(1, 4):
        sense = ids.sense_id(entry, s)
        frames = [
            Frame(
                id=ids.frame_id(sense, f), pattern=PATTERNS[(number + s + f) % 4], frequency=10 * f
            )
            for f in (1, 2)
        ]
        text = f"Le patron du port {lemma.removesuffix('er')}e la cargaison numéro {number}."
        start = text.index(lemma.removesuffix("er"))
        examples = [
            Example(
                id=ids.example_id(sense, x),
                text=text,
                source=SourceRef(corpus="synthetic", sentence=f"s{number}.{s}.{x}"),
                verb=(start, start + len(lemma) - 1),
                frame=frames[0].id,
            )
            for x in (1, 2, 3)
        ]
        senses.append(
            Sense(
                id=sense,
                gloss=f"sens {s}",
                status=Status.REVIEWED,
                frames=frames,
                examples=examples,
            )
        )
    return Entry(id=entry, lemma=lemma, senses=senses)


def timed(label: str, figures: dict[str, float], action: Callable[[], T]) -> T:
    start = time.perf_counter()
    result = action()
    figures[label] = time.perf_counter() - start
    print(f"{label:<22} {figures[label]:8.2f} s", flush=True)
    return result


def main() -> None:
    from lexbuild.formats import lmf, tei, validate
    from lexbuild.lexicon import checks, sources

    parser = argparse.ArgumentParser()
    parser.add_argument("--entries", type=int, default=10_000)
    parser.add_argument("--schemas", default=None)
    args = parser.parse_args()
    meta = LexiconMeta(
        title="Synthetic benchmark lexicon",
        language="fr",
        edition=1,
        release_date=dt.date(2026, 12, 1),
        licence="CC-BY-4.0",
        corpora=[Corpus(id="synthetic", title="Synthetic benchmark corpus")],
    )
    figures: dict[str, float] = {}
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        sources.write_meta(folder, meta)
        (folder / "entries").mkdir()
        for number in range(args.entries):
            entry = synthetic_entry(number)
            (folder / "entries" / f"{entry.id}.yaml").write_text(
                sources.dump_entry(entry), encoding="utf-8"
            )
        loaded = timed("YAML load", figures, lambda: sources.load_lexicon(folder))
        findings = timed("check", figures, lambda: checks.check_lexicon(loaded))
        tei_bytes = timed("TEI export", figures, lambda: tei.to_tei(loaded.lexicon))
        lmf_bytes = timed("LMF export", figures, lambda: lmf.to_lmf(loaded.lexicon))
        problems = timed(
            "validate TEI + LMF",
            figures,
            lambda: (
                validate.validate_bytes(tei_bytes, schemas_dir=args.schemas)
                + validate.validate_bytes(lmf_bytes, schemas_dir=args.schemas)
            ),
        )
    total = sum(figures.values())
    slowest = max(figures, key=lambda label: figures[label])
    print(
        f"{'whole chain':<22} {total:8.2f} s  (target < 60 s; slowest: {slowest}, "
        f"{figures[slowest] / total:.0%})"
    )
    print(
        f"findings: {len(findings)}, validation problems: {len(problems)}, "
        f"TEI {len(tei_bytes) / 1e6:.1f} MB, LMF {len(lmf_bytes) / 1e6:.1f} MB"
    )


if __name__ == "__main__":
    main()
