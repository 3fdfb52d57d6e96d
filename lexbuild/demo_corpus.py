"""The shipped demo corpus: raw French sentences set on the island of Brévenn, with gold senses.

Layout of ``lexbuild/data/demo/``::

    corpus/<theme>.txt   one sentence per line, UTF-8, no blank lines
    gold.tsv             file, line, lemma, form, sense (one row per target-verb occurrence)

``form`` is the verb's surface form exactly as written in the line: the lexical verb only (in a
compound tense, the participle; in a pronominal use, without its clitic).

Matching gold rows to parsed sentences (:func:`gold_labels_for`)
----------------------------------------------------------------
The raw-text parser names sentences ``<file stem>.<n>``, ``n`` being the 1-based sentence number
within the file. A parser that keeps one sentence per line gives ``n`` = line number, but one
that splits a line into two sentences (or joins two lines) shifts every later number. So lines
are aligned with sentences by text: the sentences of a file are read in order of ``n`` and
consumed while their texts, whitespace removed, make up the line's text. A gold row is then
looked for in the sentences aligned with its line, as the word whose FORM equals the gold form
(several such words: the one whose lemma is the gold lemma, else the first tagged VERB, else the
first). When a file's sentences do not spell out its lines (a parser that rewrites the text),
the fallback is the sentence numbered like the line.
"""

from __future__ import annotations

import csv
import re
from collections import defaultdict
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from importlib.resources import files
from pathlib import Path
from typing import Literal

from lexbuild.corpus.conllu import Sentence, Token
from lexbuild.errors import CorpusError, SourceLocation

__all__ = [
    "GOLD_HEADER",
    "GoldRow",
    "corpus_files",
    "demo_dir",
    "gold_labels_for",
    "read_gold",
    "read_lines",
]

GOLD_HEADER = ("file", "line", "lemma", "form", "sense")
_SENSE = re.compile(r"^[a-zà-ÿ]+\.[a-z][a-z_]*$")
_SPACE = re.compile(r"\s+")
OnMissing = Literal["raise", "skip"]


@dataclass(frozen=True, slots=True)
class GoldRow:
    """One gold-labelled verb occurrence of the demo corpus."""

    file: str  # file name in corpus/, e.g. 'port.txt'
    line: int  # 1-based line in that file
    lemma: str
    form: str  # surface form of the verb as written in the line
    sense: str  # '<lemma>.<key>', e.g. 'compter.count'
    gold_line: int = 0  # 1-based line in gold.tsv (for messages)

    @property
    def stem(self) -> str:
        """The file stem, the prefix of the parser's sentence ids for this file."""
        return Path(self.file).stem


def demo_dir() -> Path:
    """The folder of the shipped demo data (``lexbuild/data/demo``)."""
    folder = files("lexbuild") / "data" / "demo"
    if not isinstance(folder, Path):  # e.g. a zipped install: the data must be on disk
        raise CorpusError(f"the demo data is not a folder on disk ({folder!r})")
    return folder


def corpus_files(folder: Path | None = None) -> list[Path]:
    """The corpus text files, sorted by name (the order the parser reads them in)."""
    corpus = (folder if folder is not None else demo_dir()) / "corpus"
    found = sorted(corpus.glob("*.txt"))
    if not found:
        raise CorpusError("no .txt file in the demo corpus", SourceLocation.of(corpus))
    return found


def read_lines(path: Path) -> list[str]:
    """Lines of a corpus file, without line ends; rejects non-UTF-8 text."""
    try:
        return path.read_text(encoding="utf-8").splitlines()
    except UnicodeDecodeError as exc:
        raise CorpusError(f"not UTF-8 ({exc.reason})", SourceLocation.of(path)) from None


def _whole_word(form: str, text: str) -> bool:
    return re.search(r"(?<!\w)" + re.escape(form) + r"(?!\w)", text) is not None


def read_gold(gold: Path | None = None, corpus: Path | None = None) -> list[GoldRow]:
    """Read and check ``gold.tsv`` against the corpus files.

    Each row must name an existing file of ``corpus`` (a plain file name), an existing line, a
    form that occurs in that line as a whole word, and a sense ``<lemma>.<key>``. Errors are
    :class:`CorpusError` located at the gold file's line.
    """
    base = demo_dir()
    gold_path = gold if gold is not None else base / "gold.tsv"
    corpus_dir = corpus if corpus is not None else base / "corpus"
    cache: dict[str, list[str]] = {}
    rows: list[GoldRow] = []
    seen: set[tuple[str, int, str]] = set()
    with gold_path.open(encoding="utf-8", newline="") as handle:
        for lineno, cols in enumerate(csv.reader(handle, delimiter="\t", quoting=csv.QUOTE_NONE),
                                      start=1):
            where = SourceLocation.of(gold_path, lineno)
            if lineno == 1:
                if tuple(cols) != GOLD_HEADER:
                    raise CorpusError(f"header must be {'<TAB>'.join(GOLD_HEADER)!r}, found "
                                      f"{'<TAB>'.join(cols)!r}", where)
                continue
            if len(cols) != len(GOLD_HEADER):
                raise CorpusError(f"expected {len(GOLD_HEADER)} tab-separated fields "
                                  f"({', '.join(GOLD_HEADER)}), found {len(cols)}", where)
            name, line_s, lemma, form, sense = cols
            if not name or Path(name).name != name:
                raise CorpusError(f"field 'file': {name!r} must be a plain file name in "
                                  f"{corpus_dir}", where)
            path = corpus_dir / name
            if not path.is_file():
                raise CorpusError(f"field 'file': {name!r} does not exist in {corpus_dir}", where)
            if not line_s.isdigit() or int(line_s) < 1:
                raise CorpusError(f"field 'line': {line_s!r} is not a positive integer", where)
            line = int(line_s)
            if name not in cache:
                cache[name] = read_lines(path)
            lines = cache[name]
            if line > len(lines):
                raise CorpusError(f"field 'line': {name} has {len(lines)} lines, not {line}",
                                  where)
            text = lines[line - 1]
            if not form or not _whole_word(form, text):
                raise CorpusError(f"field 'form': {form!r} does not occur as a whole word in "
                                  f"{name}:{line} ({text!r})", where)
            if not _SENSE.match(sense) or sense.split(".")[0] != lemma:
                raise CorpusError(f"field 'sense': {sense!r} must read '{lemma}.<key>' (key in "
                                  "lower-case letters and '_')", where)
            key = (name, line, form)
            if key in seen:
                raise CorpusError(f"{name}:{line} form {form!r} is labelled twice", where)
            seen.add(key)
            rows.append(GoldRow(name, line, lemma, form, sense, lineno))
    return rows


# ------------------------------------------------------------------ gold rows -> sentence words


def _squash(text: str) -> str:
    return _SPACE.sub("", text)


def _split_id(sent_id: str) -> tuple[str, int] | None:
    stem, _, number = sent_id.rpartition(".")
    return (stem, int(number)) if stem and number.isdigit() else None


def _align(lines: Sequence[str], sentences: Sequence[Sentence]) -> dict[int, list[Sentence]] | None:
    """Line number -> the sentences spelling it out, or None when the texts do not fit."""
    out: dict[int, list[Sentence]] = {}
    index = 0
    for number, line in enumerate(lines, start=1):
        target, built, group = _squash(line), "", []
        while len(built) < len(target) and index < len(sentences):
            piece = _squash(sentences[index].text)
            if not target.startswith(built + piece):
                return None
            built += piece
            group.append(sentences[index])
            index += 1
        if built != target:
            return None
        out[number] = group
    return out if index == len(sentences) else None


def _pick(tokens: Sequence[Token], row: GoldRow) -> Token | None:
    same = [t for t in tokens if t.form == row.form]
    for test in (lambda t: t.lemma == row.lemma, lambda t: t.upos == "VERB", lambda t: True):
        chosen = [t for t in same if test(t)]
        if chosen:
            return chosen[0]
    return None


def gold_labels_for(
    sentences: Iterable[Sentence],
    rows: Sequence[GoldRow],
    *,
    corpus: Path | None = None,
    on_missing: OnMissing = "raise",
) -> dict[tuple[str, int], str]:
    """Map (sent_id, word id) of parsed sentences to gold senses (see the module docstring).

    ``sentences`` come from parsing the corpus files of ``corpus`` (default: the shipped
    demo) with ids ``<file stem>.<n>``; the keys are those of :mod:`lexbuild.senses.evaluation`. A
    row whose form is not found among the words raises :class:`CorpusError` (or is left out
    with ``on_missing="skip"``).
    """
    corpus_dir = corpus if corpus is not None else demo_dir() / "corpus"
    by_stem: dict[str, list[tuple[int, Sentence]]] = defaultdict(list)
    for sentence in sentences:
        parts = _split_id(sentence.id)
        if parts is not None:
            by_stem[parts[0]].append((parts[1], sentence))
    aligned: dict[str, dict[int, list[Sentence]]] = {}
    for stem, name in sorted({(row.stem, row.file) for row in rows}):
        ordered = [s for _, s in sorted(by_stem.get(stem, []), key=lambda pair: pair[0])]
        path = corpus_dir / name
        fitted = _align(read_lines(path), ordered) if path.is_file() and ordered else None
        if fitted is None:  # fallback: sentence n is line n
            fitted = {n: [s] for n, s in by_stem.get(stem, [])}
        aligned[stem] = fitted
    labels: dict[tuple[str, int], str] = {}
    for row in rows:
        token, owner = None, None
        for sentence in aligned[row.stem].get(row.line, []):
            token = _pick(sentence.tokens, row)
            if token is not None:
                owner = sentence
                break
        if token is None or owner is None:
            if on_missing == "skip":
                continue
            raise CorpusError(f"no parsed word {row.form!r} for {row.file}:{row.line} (sentence "
                              f"id '{row.stem}.{row.line}' or the sentences covering that line)",
                              SourceLocation.of("gold.tsv", row.gold_line))
        labels[(owner.id, token.id)] = row.sense
    return labels
