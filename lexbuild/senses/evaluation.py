"""Evaluation of induced senses against gold sense annotations, one verb at a time.

All metrics are computed from the contingency table of (gold, predicted) labels, so they run
in O(n + k_gold * k_pred) and need no scikit-learn at run time.
"""

from __future__ import annotations

import csv
import json
import math
from collections import defaultdict
from collections.abc import Hashable, Iterable, Mapping, Sequence
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any, TypeVar

import numpy as np
import numpy.typing as npt

from lexbuild.errors import CorpusError, InductionError, SourceLocation

Key = tuple[str, int]  # (sent_id, token id)
Triple = tuple[float, float, float]
K = TypeVar("K", bound=Hashable)


def _contingency(gold: Sequence[Hashable], pred: Sequence[Hashable]) -> npt.NDArray[np.int64]:
    """Rows: gold classes, columns: predicted clusters."""
    if len(gold) != len(pred):
        raise InductionError(f"gold has {len(gold)} labels, prediction {len(pred)}")
    if len(gold) == 0:
        raise InductionError("cannot evaluate an empty labelling")
    gi: dict[Hashable, int] = {}
    pi: dict[Hashable, int] = {}
    g = np.fromiter((gi.setdefault(x, len(gi)) for x in gold), dtype=np.int64, count=len(gold))
    p = np.fromiter((pi.setdefault(x, len(pi)) for x in pred), dtype=np.int64, count=len(pred))
    table = np.zeros((len(gi), len(pi)), dtype=np.int64)
    np.add.at(table, (g, p), 1)
    return table


def _f1(p: float, r: float) -> float:
    return 0.0 if p + r == 0 else 2 * p * r / (p + r)


def bcubed(gold: Sequence[Hashable], pred: Sequence[Hashable]) -> Triple:
    """B-cubed precision, recall and F1 (Bagga and Baldwin 1998; Amigó et al. 2009).

    Per item: precision = |same cluster and same class| / |same cluster|, recall likewise over
    the class; both averaged over items. Summed over a contingency cell with count c, the
    items of the cell contribute c * c / |cluster| (precision) and c * c / |class| (recall).
    """
    t = _contingency(gold, pred).astype(np.float64)
    n = t.sum()
    sq = t * t
    precision = float((sq / t.sum(axis=0, keepdims=True)).sum() / n)
    recall = float((sq / t.sum(axis=1, keepdims=True)).sum() / n)
    return precision, recall, _f1(precision, recall)


def _pairs(counts: npt.NDArray[np.int64]) -> int:
    return int((counts * (counts - 1) // 2).sum())


def paired_f(gold: Sequence[Hashable], pred: Sequence[Hashable]) -> Triple:
    """Paired precision, recall and F1 over instance pairs (SemEval-2010 WSI task).

    A pair counts when both instances share a cluster. As in the SemEval-2010 scoring (recalled
    from memory: Manandhar et al. 2010), a singleton cluster generates no pairs, and a side
    with no pairs at all scores 0 rather than being undefined (so one-cluster-per-instance
    gets F = 0).
    """
    t = _contingency(gold, pred)
    common = _pairs(t)
    pred_pairs = _pairs(t.sum(axis=0))
    gold_pairs = _pairs(t.sum(axis=1))
    precision = common / pred_pairs if pred_pairs else 0.0
    recall = common / gold_pairs if gold_pairs else 0.0
    return precision, recall, _f1(precision, recall)


def adjusted_rand(gold: Sequence[Hashable], pred: Sequence[Hashable]) -> float:
    """Adjusted Rand index (Hubert and Arabie 1985), from the contingency table."""
    t = _contingency(gold, pred)
    n = int(t.sum())
    index = float(_pairs(t))
    a = float(_pairs(t.sum(axis=1)))
    b = float(_pairs(t.sum(axis=0)))
    total = n * (n - 1) / 2
    if total == 0:
        return 1.0
    expected = a * b / total
    maximum = (a + b) / 2
    if maximum == expected:
        # Both labellings trivial in the same way (e.g. one cluster each): perfect agreement,
        # the convention scikit-learn follows too.
        return 1.0
    return (index - expected) / (maximum - expected)


def _entropy(counts: npt.NDArray[np.float64]) -> float:
    n = counts.sum()
    p = counts[counts > 0] / n
    return float(-(p * np.log(p)).sum())


def v_measure(gold: Sequence[Hashable], pred: Sequence[Hashable], beta: float = 1.0) -> float:
    """V-measure (Rosenberg and Hirschberg 2007): weighted mean of homogeneity, completeness."""
    h, c = homogeneity_completeness(gold, pred)
    if h + c == 0:
        return 0.0
    return (1 + beta) * h * c / (beta * h + c)


def homogeneity_completeness(
    gold: Sequence[Hashable], pred: Sequence[Hashable]
) -> tuple[float, float]:
    t = _contingency(gold, pred).astype(np.float64)
    n = t.sum()
    h_gold = _entropy(t.sum(axis=1))
    h_pred = _entropy(t.sum(axis=0))
    nz = t > 0
    # Mutual information from the joint distribution of the table.
    outer = np.outer(t.sum(axis=1), t.sum(axis=0))
    mi = float((t[nz] / n * np.log(t[nz] * n / outer[nz])).sum())
    mi = max(mi, 0.0)
    homogeneity = 1.0 if h_gold == 0 else mi / h_gold
    completeness = 1.0 if h_pred == 0 else mi / h_pred
    return homogeneity, completeness


@dataclass(frozen=True)
class VerbScores:
    """All metrics for one verb, plus the sizes they were computed from."""

    lemma: str
    n: int
    gold_senses: int
    induced_senses: int
    bcubed_precision: float
    bcubed_recall: float
    bcubed_f1: float
    paired_precision: float
    paired_recall: float
    paired_f1: float
    ari: float
    v_measure: float


_METRICS = (
    "bcubed_precision",
    "bcubed_recall",
    "bcubed_f1",
    "paired_precision",
    "paired_recall",
    "paired_f1",
    "ari",
    "v_measure",
)


def evaluate_verb(
    gold: Sequence[Hashable], pred: Sequence[Hashable], lemma: str = ""
) -> VerbScores:
    bp, br, bf = bcubed(gold, pred)
    pp, pr, pf = paired_f(gold, pred)
    return VerbScores(
        lemma=lemma,
        n=len(gold),
        gold_senses=len(set(gold)),
        induced_senses=len(set(pred)),
        bcubed_precision=bp,
        bcubed_recall=br,
        bcubed_f1=bf,
        paired_precision=pp,
        paired_recall=pr,
        paired_f1=pf,
        ari=adjusted_rand(gold, pred),
        v_measure=v_measure(gold, pred),
    )


@dataclass(frozen=True)
class EvaluationReport:
    """Per-verb scores, their unweighted (macro) mean, and coverage counts."""

    verbs: tuple[VerbScores, ...]
    macro: dict[str, float] = field(default_factory=dict)
    n_evaluated: int = 0
    missing_in_gold: int = 0  # assigned occurrences without a gold sense
    missing_in_assignments: int = 0  # gold occurrences the system did not assign


def evaluate(
    assignments: Mapping[K, tuple[str, Hashable]],
    gold: Mapping[K, Hashable],
) -> EvaluationReport:
    """Score each verb on the keys present in both mappings.

    ``assignments`` maps an occurrence key to (lemma, induced sense); ``gold`` maps the same
    kind of key to a gold sense. Gold senses are compared within a verb only.
    """
    by_verb: dict[str, tuple[list[Hashable], list[Hashable]]] = defaultdict(lambda: ([], []))
    shared = 0
    for key in sorted(assignments, key=repr):  # sorted: stable output order
        if key not in gold:
            continue
        lemma, sense = assignments[key]
        g, p = by_verb[lemma]
        g.append(gold[key])
        p.append(sense)
        shared += 1
    verbs = tuple(evaluate_verb(g, p, lemma) for lemma, (g, p) in sorted(by_verb.items()))
    macro = {m: float(np.mean([getattr(v, m) for v in verbs])) for m in _METRICS} if verbs else {}
    if verbs:  # senses per verb, induced against gold
        macro["gold_senses"] = float(np.mean([v.gold_senses for v in verbs]))
        macro["induced_senses"] = float(np.mean([v.induced_senses for v in verbs]))
    return EvaluationReport(
        verbs=verbs,
        macro=macro,
        n_evaluated=shared,
        missing_in_gold=len(assignments) - shared,
        missing_in_assignments=len(gold) - shared,
    )


UNDECIDED = "?"  # an annotator's undecidable token: kept in the gold file, left out of scores
NAMED_COLUMNS = ("sent_id", "token_id", "sense")


def read_gold_tsv(path: str | Path) -> dict[Key, str]:
    """Read ``sent_id<TAB>token id<TAB>sense`` rows; a header row is optional.

    A header naming ``sent_id``, ``token_id`` and ``sense`` picks those columns wherever they
    stand, other columns aside (the development set's ``file sent_id token_id lemma form sense``).
    Rows whose sense is ``?`` (undecided) are left out.
    """
    out: dict[Key, str] = {}
    columns: tuple[int, ...] = (0, 1, 2)
    with open(path, encoding="utf-8", newline="") as fh:
        for lineno, row in enumerate(csv.reader(fh, delimiter="\t"), start=1):
            if not row or not "".join(row).strip() or row[0].startswith("#"):
                continue
            names = [c.strip() for c in row]
            if lineno == 1 and set(NAMED_COLUMNS) <= set(names):
                columns = tuple(names.index(n) for n in NAMED_COLUMNS)
                continue
            if len(row) <= max(columns):
                raise CorpusError(
                    f"expected {max(columns) + 1} tab-separated columns",
                    SourceLocation.of(path, lineno),
                )
            sent_id, token, sense = (row[i].strip() for i in columns)
            try:
                tok = int(token)
            except ValueError:
                if lineno == 1:  # header
                    continue
                raise CorpusError(
                    f"token id {token!r} is not an integer", SourceLocation.of(path, lineno)
                ) from None
            if sense == UNDECIDED:
                continue
            out[(sent_id, tok)] = sense
    return out


def read_gold_conllu(paths: str | Path | Iterable[str | Path]) -> dict[Key, str]:
    """Collect ``Sense=...`` from the MISC column of verb tokens in CoNLL-U files.

    A small local parser on purpose: only sent_id comments and the ID, UPOS and MISC columns
    matter here. Multiword ranges (``1-2``) and empty nodes (``1.1``) are skipped.
    """
    if isinstance(paths, str | Path):
        paths = [paths]
    out: dict[Key, str] = {}
    for path in paths:
        sent_id: str | None = None
        with open(path, encoding="utf-8") as fh:
            for lineno, raw in enumerate(fh, start=1):
                line = raw.rstrip("\n")
                if not line.strip():
                    sent_id = None
                    continue
                if line.startswith("#"):
                    body = line[1:].strip()
                    if body.startswith("sent_id") and "=" in body:
                        sent_id = body.split("=", 1)[1].strip()
                    continue
                cols = line.split("\t")
                if len(cols) != 10:
                    raise CorpusError(
                        f"expected 10 columns, found {len(cols)}", SourceLocation.of(path, lineno)
                    )
                if not cols[0].isdigit() or cols[3] not in ("VERB", "AUX"):
                    continue
                sense = _misc_value(cols[9], "Sense")
                if sense is None:
                    continue
                if sent_id is None:
                    raise CorpusError("sentence without sent_id", SourceLocation.of(path, lineno))
                out[(sent_id, int(cols[0]))] = sense
    return out


def _misc_value(misc: str, name: str) -> str | None:
    if misc == "_":
        return None
    for item in misc.split("|"):
        k, sep, v = item.partition("=")
        if sep and k == name:
            return v
    return None


def report_json(report: EvaluationReport) -> str:
    return json.dumps(asdict(report), indent=2, ensure_ascii=False, sort_keys=True)


def _fmt(x: float) -> str:
    return "nan" if math.isnan(x) else f"{x:.3f}"


def report_markdown(report: EvaluationReport) -> str:
    head = "| verb | n | gold | induced | B³ P | B³ R | B³ F | pair P | pair R | pair F | ARI | V |"
    lines = [
        "# Sense induction evaluation",
        "",
        f"Evaluated occurrences: {report.n_evaluated}; "
        f"without gold sense: {report.missing_in_gold}; "
        f"gold not assigned: {report.missing_in_assignments}.",
        "",
        head,
        "|" + "---|" * 12,
    ]
    for v in report.verbs:
        cells: list[Any] = [v.lemma, v.n, v.gold_senses, v.induced_senses]
        cells += [_fmt(getattr(v, m)) for m in _METRICS]
        lines.append("| " + " | ".join(str(c) for c in cells) + " |")
    if report.macro:
        cells = ["**macro**", "", f"{report.macro['gold_senses']:.2f}",
                 f"{report.macro['induced_senses']:.2f}"]
        cells += [_fmt(report.macro[m]) for m in _METRICS]
        lines.append("| " + " | ".join(str(c) for c in cells) + " |")
    return "\n".join(lines) + "\n"
