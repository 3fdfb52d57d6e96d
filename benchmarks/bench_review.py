"""Time to build the review site of a large dictionary, against the TEI export of the same.

    python benchmarks/bench_review.py [--entries 10000]

The reference is ``to_tei`` on the same lexicon, measured in the same run: the site is written
on every release, so it should cost about what an export costs, not many times more.
"""

from __future__ import annotations

import argparse
import datetime as dt
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from bench_lexicon import synthetic_entry

from lexbuild.lexicon.model import Corpus, Lexicon, LexiconMeta


def main() -> None:
    from lexbuild.formats.tei import to_tei
    from lexbuild.review import SiteInputs, build_site

    parser = argparse.ArgumentParser()
    parser.add_argument("--entries", type=int, default=10_000)
    args = parser.parse_args()
    meta = LexiconMeta(title="Synthetic benchmark lexicon", language="fr", edition=1,
                       release_date=dt.date(2026, 12, 1), licence="CC-BY-4.0",
                       corpora=[Corpus(id="synthetic", title="Synthetic benchmark corpus")])
    lexicon = Lexicon(meta=meta, entries=[synthetic_entry(n) for n in range(args.entries)])
    start = time.perf_counter()
    tei = to_tei(lexicon)
    reference = time.perf_counter() - start
    start = time.perf_counter()
    files = build_site(SiteInputs(lexicon, edition_page=True))
    site = time.perf_counter() - start
    size = sum(len(data) for data in files.values())
    print(f"entries            {args.entries}")
    print(f"TEI export         {reference:8.2f} s  ({len(tei) / 1e6:.1f} MB)")
    print(f"review site        {site:8.2f} s  ({len(files)} files, {size / 1e6:.1f} MB)")
    print(f"site / TEI export  {site / reference:8.2f}")


if __name__ == "__main__":
    main()
