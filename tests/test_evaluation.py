"""Evaluation metrics against scikit-learn, brute force and a published worked example."""

from __future__ import annotations

import json
from itertools import combinations
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from sklearn.metrics import adjusted_rand_score, v_measure_score
from sklearn.metrics.cluster import pair_confusion_matrix

from lexbuild.errors import CorpusError, InductionError
from lexbuild.senses.evaluation import (
    adjusted_rand,
    bcubed,
    evaluate,
    evaluate_verb,
    paired_f,
    read_gold_conllu,
    read_gold_tsv,
    report_json,
    report_markdown,
    v_measure,
)

labelings = st.integers(min_value=1, max_value=60).flatmap(
    lambda n: st.tuples(
        st.lists(st.integers(0, 5), min_size=n, max_size=n),
        st.lists(st.integers(0, 7), min_size=n, max_size=n),
    )
)


def _bcubed_brute(gold: list[int], pred: list[int]) -> tuple[float, float]:
    """Per-item precision and recall by explicit loops (definition of Bagga and Baldwin 1998)."""
    n = len(gold)
    p_sum = r_sum = 0.0
    for i in range(n):
        same_cluster = [j for j in range(n) if pred[j] == pred[i]]
        same_class = [j for j in range(n) if gold[j] == gold[i]]
        both = [j for j in same_cluster if gold[j] == gold[i]]
        p_sum += len(both) / len(same_cluster)
        r_sum += len(both) / len(same_class)
    return p_sum / n, r_sum / n


@settings(max_examples=200, deadline=None)
@given(labelings)
def test_ari_and_v_measure_equal_sklearn(pair: tuple[list[int], list[int]]) -> None:
    # Reference: sklearn.metrics.adjusted_rand_score and v_measure_score.
    gold, pred = pair
    assert adjusted_rand(gold, pred) == pytest.approx(adjusted_rand_score(gold, pred), abs=1e-9)
    assert v_measure(gold, pred) == pytest.approx(v_measure_score(gold, pred), abs=1e-9)


@settings(max_examples=200, deadline=None)
@given(labelings)
def test_bcubed_equals_brute_force(pair: tuple[list[int], list[int]]) -> None:
    gold, pred = pair
    p, r, f = bcubed(gold, pred)
    bp, br = _bcubed_brute(gold, pred)
    assert p == pytest.approx(bp) and r == pytest.approx(br)
    assert f == pytest.approx(2 * bp * br / (bp + br))


@settings(max_examples=200, deadline=None)
@given(labelings)
def test_paired_f_equals_pair_counts(pair: tuple[list[int], list[int]]) -> None:
    # Reference: explicit pair enumeration, and sklearn.metrics.cluster.pair_confusion_matrix
    # (which counts ordered pairs, hence the same ratios).
    gold, pred = pair
    pairs = list(combinations(range(len(gold)), 2))
    in_pred = {(i, j) for i, j in pairs if pred[i] == pred[j]}
    in_gold = {(i, j) for i, j in pairs if gold[i] == gold[j]}
    p, r, _ = paired_f(gold, pred)
    assert p == pytest.approx(len(in_pred & in_gold) / len(in_pred) if in_pred else 0.0)
    assert r == pytest.approx(len(in_pred & in_gold) / len(in_gold) if in_gold else 0.0)
    c = pair_confusion_matrix(gold, pred)
    if c[1, 1] + c[0, 1]:
        assert p == pytest.approx(c[1, 1] / (c[1, 1] + c[0, 1]))


def test_bcubed_bagga_baldwin_worked_example() -> None:
    # Bagga and Baldwin 1998, the 12-entity example (recalled from memory; numbers computed
    # by hand here): truth {1-5}, {6,7}, {8-12}. Merging {6,7} into {8-12} gives precision
    # (5*1 + 2*2/7 + 5*5/7)/12 = 64/84 ~ 0.76; merging {1-5} with {8-12} gives
    # (10*5/10 + 2*1)/12 = 7/12 ~ 0.58. Recall is 1 in both; MUC cannot tell them apart.
    gold = [0] * 5 + [1] * 2 + [2] * 5
    merge_small = [0] * 5 + [1] * 7
    merge_large = [0] * 5 + [1] * 2 + [0] * 5
    p, r, _ = bcubed(gold, merge_small)
    assert p == pytest.approx(64 / 84) and r == 1.0
    p, r, _ = bcubed(gold, merge_large)
    assert p == pytest.approx(7 / 12) and r == 1.0


def test_one_cluster_baseline() -> None:
    gold = [0, 0, 1, 1, 1, 2, 2, 0]
    pred = [0] * len(gold)
    assert adjusted_rand(gold, pred) == pytest.approx(0.0)
    assert bcubed(gold, pred)[1] == 1.0
    assert paired_f(gold, pred)[1] == 1.0


def test_one_cluster_per_instance_has_zero_paired_f() -> None:
    # SemEval-2010 convention (from memory): singletons generate no pairs.
    gold = [0, 0, 1, 1]
    p, r, f = paired_f(gold, [0, 1, 2, 3])
    assert (p, r, f) == (0.0, 0.0, 0.0)
    assert bcubed(gold, [0, 1, 2, 3])[0] == 1.0


def test_perfect_and_renamed() -> None:
    s = evaluate_verb(["a", "a", "b"], [7, 7, 3], lemma="x")
    assert s.bcubed_f1 == s.paired_f1 == s.ari == s.v_measure == pytest.approx(1.0)
    assert (s.n, s.gold_senses, s.induced_senses) == (3, 2, 2)


def test_length_mismatch_and_empty() -> None:
    with pytest.raises(InductionError):
        bcubed([0, 1], [0])
    with pytest.raises(InductionError):
        adjusted_rand([], [])


def test_evaluate_per_verb_macro_and_missing() -> None:
    assignments = {
        ("s1", 2): ("manger", "m1"),
        ("s2", 3): ("manger", "m1"),
        ("s3", 1): ("manger", "m2"),
        ("s4", 5): ("dire", "d1"),
        ("s5", 5): ("dire", "d1"),
        ("s9", 1): ("dire", "d2"),  # no gold
    }
    gold = {
        ("s1", 2): "eat",
        ("s2", 3): "eat",
        ("s3", 1): "consume",
        ("s4", 5): "say",
        ("s5", 5): "tell",
        ("s8", 4): "x",  # not assigned
    }
    rep = evaluate(assignments, gold)
    assert [v.lemma for v in rep.verbs] == ["dire", "manger"]
    assert rep.n_evaluated == 5
    assert rep.missing_in_gold == 1 and rep.missing_in_assignments == 1
    manger = rep.verbs[1]
    assert manger.ari == pytest.approx(1.0)
    dire = rep.verbs[0]
    assert dire.bcubed_precision == pytest.approx(0.5)
    assert rep.macro["bcubed_precision"] == pytest.approx(0.75)
    md = report_markdown(rep)
    assert "| manger | 3 | 2 | 2 |" in md and "**macro**" in md
    data = json.loads(report_json(rep))
    assert data["n_evaluated"] == 5 and len(data["verbs"]) == 2


def test_read_gold_tsv(tmp_path: Path) -> None:
    with_header = tmp_path / "a.tsv"
    with_header.write_text("sent_id\ttoken\tsense\ns1\t3\tmanger-1\n\ns2\t10\tmanger-2\n")
    without = tmp_path / "b.tsv"
    without.write_text("s1\t3\tmanger-1\ns2\t10\tmanger-2\n")
    expected = {("s1", 3): "manger-1", ("s2", 10): "manger-2"}
    assert read_gold_tsv(with_header) == expected
    assert read_gold_tsv(without) == expected
    bad = tmp_path / "c.tsv"
    bad.write_text("s1\t3\tx\ns2\tfoo\ty\n")
    with pytest.raises(CorpusError):
        read_gold_tsv(bad)


CONLLU = """\
# sent_id = fr-1
# text = Il mange une pomme.
1\tIl\til\tPRON\t_\t_\t2\tnsubj\t_\t_
2\tmange\tmanger\tVERB\t_\t_\t0\troot\t_\tSense=manger-1|SpaceAfter=No
3\tune\tun\tDET\t_\t_\t4\tdet\t_\t_
4\tpomme\tpomme\tNOUN\t_\t_\t2\tobj\t_\tSense=ignored

# sent_id = fr-2
1-2\tdu\t_\t_\t_\t_\t_\t_\t_\t_
1\tde\tde\tADP\t_\t_\t3\tcase\t_\t_
2\tle\tle\tDET\t_\t_\t3\tdet\t_\t_
3\tdit\tdire\tVERB\t_\t_\t0\troot\t_\tSense=dire-2
4\tva\taller\tVERB\t_\t_\t3\tconj\t_\t_
"""


def test_read_gold_conllu(tmp_path: Path) -> None:
    path = tmp_path / "g.conllu"
    path.write_text(CONLLU, encoding="utf-8")
    assert read_gold_conllu(path) == {("fr-1", 2): "manger-1", ("fr-2", 3): "dire-2"}
    assert read_gold_conllu([path, path]) == read_gold_conllu(str(path))
    broken = tmp_path / "bad.conllu"
    broken.write_text("# sent_id = x\n1\tfoo\n", encoding="utf-8")
    with pytest.raises(CorpusError):
        read_gold_conllu(broken)
