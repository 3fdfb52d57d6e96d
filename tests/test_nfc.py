"""Lemmas are NFC-normalised once, at reading: corpus occurrences and YAML sources.

Reference: Python's ``unicodedata`` (Unicode Standard Annex #15): "e" + U+0301 COMBINING ACUTE
ACCENT composes to U+00E9.
"""

from __future__ import annotations

import shutil
import unicodedata
from pathlib import Path

from lexbuild.corpus.occurrences import iter_occurrences
from lexbuild.lexicon.sources import load_entry, load_lexicon

DECOMPOSED = "e\u0301veiller"  # éveiller, accent as a combining mark
COMPOSED = "\u00e9veiller"


def test_the_example_really_is_decomposed() -> None:
    assert DECOMPOSED != COMPOSED
    assert unicodedata.normalize("NFC", DECOMPOSED) == COMPOSED


def test_occurrence_lemmas_are_nfc(tmp_path: Path) -> None:
    corpus = tmp_path / "c.conllu"
    corpus.write_text(
        "# sent_id = s1\n# text = Il éveille Paul.\n"
        "1\tIl\til\tPRON\t_\t_\t2\tnsubj\t_\t_\n"
        f"2\téveille\t{DECOMPOSED}\tVERB\t_\t_\t0\troot\t_\t_\n"
        "3\tPaul\tPaul\tPROPN\t_\t_\t2\tobj\t_\tSpaceAfter=No\n"
        "4\t.\t.\tPUNCT\t_\t_\t2\tpunct\t_\t_\n\n",
        encoding="utf-8",
    )
    (occurrence,) = iter_occurrences(corpus)
    assert occurrence.lemma == COMPOSED
    # Asking for either spelling finds it.
    assert [o.lemma for o in iter_occurrences(corpus, lemmas=[DECOMPOSED])] == [COMPOSED]
    assert [o.lemma for o in iter_occurrences(corpus, lemmas=[COMPOSED])] == [COMPOSED]


def test_source_lemmas_are_nfc(tmp_path: Path, sample_lexicon_dir: Path) -> None:
    sources = tmp_path / "sources"
    shutil.copytree(sample_lexicon_dir, sources)
    path = sources / "entries" / "douter.yaml"
    path.write_text(
        path.read_text(encoding="utf-8").replace("lemma: douter", "lemma: dou\u0301ter"),
        encoding="utf-8",
    )
    assert load_entry(path).lemma == "do\u00fater"
    assert load_lexicon(sources).lexicon.entry("douter").lemma == "do\u00fater"  # type: ignore[union-attr]
