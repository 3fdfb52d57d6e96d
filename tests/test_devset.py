"""Integrity of the project's own sense-annotated development set (tests/devset/fr_senses).

Every gold row is checked against the UD French treebanks it cites, read with the `conllu`
package (an outside reference parser, not lexbuild's reader); the inventory and the counts
promised in the set's README are checked against the gold file itself.
"""

from __future__ import annotations

import csv
import importlib.util
import re
from collections import Counter, defaultdict
from pathlib import Path
from types import ModuleType

import conllu
import pytest
import yaml

from lexbuild.senses.evaluation import UNDECIDED, read_gold_tsv

DEVSET = Path(__file__).parent / "devset" / "fr_senses"
HEADER = ["file", "sent_id", "token_id", "lemma", "form", "sense"]
MIN_DECIDED = 40
MIN_VERBS = 12

Row = dict[str, str]


def _gold_rows() -> list[Row]:
    with open(DEVSET / "gold.tsv", encoding="utf-8", newline="") as fh:
        reader = csv.reader(fh, delimiter="\t", quoting=csv.QUOTE_NONE)
        header = next(reader)
        assert header == HEADER
        return [dict(zip(header, row, strict=True)) for row in reader]


def _inventory() -> dict[str, list[dict[str, str]]]:
    with open(DEVSET / "inventory.yaml", encoding="utf-8") as fh:
        data = yaml.safe_load(fh)
    assert isinstance(data, dict)
    return data


def _selection_module() -> ModuleType:
    spec = importlib.util.spec_from_file_location("select_tokens", DEVSET / "select_tokens.py")
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


ROWS = _gold_rows()
INVENTORY = _inventory()


@pytest.fixture(scope="module")
def treebank_tokens(ud_dir: Path) -> dict[tuple[str, str, int], conllu.models.Token]:
    """(file, sent_id, token id) -> token, for the files the gold cites, parsed by `conllu`."""
    out: dict[tuple[str, str, int], conllu.models.Token] = {}
    for name in sorted({r["file"] for r in ROWS}):
        with open(ud_dir / name, encoding="utf-8") as fh:
            for sentence in conllu.parse_incr(fh):
                sent_id = sentence.metadata["sent_id"]
                for tok in sentence:
                    if isinstance(tok["id"], int):
                        out[(name, sent_id, tok["id"])] = tok
    return out


def test_every_row_points_at_a_verb_token_of_that_lemma(
    treebank_tokens: dict[tuple[str, str, int], conllu.models.Token],
) -> None:
    wrong = []
    for r in ROWS:
        tok = treebank_tokens.get((r["file"], r["sent_id"], int(r["token_id"])))
        if tok is None:
            wrong.append((r, "no such token"))
        elif (tok["lemma"], tok["form"], tok["upos"]) != (r["lemma"], r["form"], "VERB"):
            wrong.append((r, f"treebank has {tok['form']}/{tok['lemma']}/{tok['upos']}"))
        elif tok["deprel"].startswith("aux"):
            wrong.append((r, "attached as an auxiliary"))
    assert not wrong, wrong[:5]


def test_rows_are_unique_even_without_the_file_name() -> None:
    # lexbuild's gold readers key on (sent_id, token id), so that pair must be unique too.
    full = Counter((r["file"], r["sent_id"], r["token_id"]) for r in ROWS)
    short = Counter((r["sent_id"], r["token_id"]) for r in ROWS)
    assert [k for k, n in full.items() if n > 1] == []
    assert [k for k, n in short.items() if n > 1] == []


def test_inventory_shape() -> None:
    assert len(INVENTORY) >= MIN_VERBS
    for lemma, senses in INVENTORY.items():
        assert 2 <= len(senses) <= 7, lemma
        ids = [s["id"] for s in senses]
        assert len(set(ids)) == len(ids), lemma
        for sense in senses:
            assert set(sense) == {"id", "guideline"}, sense
            assert sense["id"].startswith(f"{lemma}."), sense["id"]
            assert sense["guideline"].strip() and "\n" not in sense["guideline"].strip()


def test_every_sense_is_in_its_verbs_inventory() -> None:
    known = {lemma: {s["id"] for s in senses} for lemma, senses in INVENTORY.items()}
    unknown = [
        r for r in ROWS if r["sense"] != UNDECIDED and r["sense"] not in known.get(r["lemma"], ())
    ]
    assert unknown == []
    assert {r["lemma"] for r in ROWS} == set(INVENTORY)


def test_every_verb_has_enough_decided_tokens_and_two_senses() -> None:
    senses: dict[str, Counter[str]] = defaultdict(Counter)
    for r in ROWS:
        if r["sense"] != UNDECIDED:
            senses[r["lemma"]][r["sense"]] += 1
    assert len(senses) >= MIN_VERBS
    for lemma, counts in senses.items():
        assert sum(counts.values()) >= MIN_DECIDED, lemma
        assert len(counts) >= 2, lemma


def test_selection_is_reproducible(ud_dir: Path) -> None:
    """The rows of each verb are exactly the tokens select_tokens.py picks (README method)."""
    selection = _selection_module()
    by_verb: dict[str, list[tuple[str, str, int]]] = defaultdict(list)
    for r in ROWS:
        by_verb[r["lemma"]].append((r["file"], r["sent_id"], int(r["token_id"])))
    listed = selection.verb_tokens(set(by_verb), ud_dir)
    for lemma, rows in by_verb.items():
        picked = [(f, s, t) for f, s, t, _form, _text in selection.sample(listed[lemma])]
        assert rows == picked, lemma


def test_lexbuild_gold_reader_reads_the_named_columns() -> None:
    gold = read_gold_tsv(DEVSET / "gold.tsv")
    decided = {(r["sent_id"], int(r["token_id"])): r["sense"] for r in ROWS if r["sense"] != "?"}
    assert gold == decided
    assert UNDECIDED not in gold.values()


def test_gold_reader_column_order_and_undecided(tmp_path: Path) -> None:
    path = tmp_path / "g.tsv"
    path.write_text("sense\tnote\ttoken_id\tsent_id\nx.a\t-\t3\ts1\n?\t-\t4\ts1\nx.b\t\t5\ts2\n")
    assert read_gold_tsv(path) == {("s1", 3): "x.a", ("s2", 5): "x.b"}


def test_readme_counts_match_the_gold() -> None:
    """The README's table states each verb's decided tokens, senses used and majority share."""
    readme = (DEVSET / "README.md").read_text(encoding="utf-8")
    senses: dict[str, Counter[str]] = defaultdict(Counter)
    for r in ROWS:
        if r["sense"] != UNDECIDED:
            senses[r["lemma"]][r["sense"]] += 1
    for lemma, counts in senses.items():
        n = sum(counts.values())
        share = max(counts.values()) / n
        row = re.search(
            rf"^\| {re.escape(lemma)} \| (\d+) \| (\d+) \| (\d+) \| ([\d.]+) \|", readme, re.M
        )
        assert row is not None, lemma
        assert (int(row[2]), int(row[3]), float(row[4])) == (n, len(counts), round(share, 2)), lemma
