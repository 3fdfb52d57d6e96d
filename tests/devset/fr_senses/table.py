"""Print the development set's table (README): counts per verb and, given induction folders,
the scores of each run against the gold.

Run from the project root:
``python tests/devset/fr_senses/table.py [INDUCTION_FOLDER ...]``
"""

from __future__ import annotations

import csv
import sys
from collections import Counter, defaultdict
from pathlib import Path

import yaml

from lexbuild.senses.evaluation import UNDECIDED, bcubed, evaluate, read_gold_tsv
from lexbuild.senses.induction_folder import read_assignments

HERE = Path(__file__).resolve().parent


def counts_table(run: str | None = None) -> str:
    """Counts per verb; with ``run`` (an induction folder) its ARI and senses per verb too."""
    with open(HERE / "gold.tsv", encoding="utf-8", newline="") as fh:
        rows = list(csv.DictReader(fh, delimiter="\t", quoting=csv.QUOTE_NONE))
    inventory = yaml.safe_load((HERE / "inventory.yaml").read_text(encoding="utf-8"))
    listed: Counter[str] = Counter(r["lemma"] for r in rows)
    labels: dict[str, list[str]] = defaultdict(list)
    for r in rows:
        if r["sense"] != UNDECIDED:
            labels[r["lemma"]].append(r["sense"])
    scores = {}
    if run is not None:
        report = evaluate(read_assignments(run), read_gold_tsv(HERE / "gold.tsv"))
        scores = {v.lemma: f" {v.ari:.3f} | {v.induced_senses} |" for v in report.verbs}
    extra = " ARI | induced senses |" if run else ""
    lines = [
        "| verb | tokens | decided | senses used | majority share | inventory | one-cluster B³ F1 |"
        + extra,
        "|---|---|---|---|---|---|---|" + ("---|---|" if run else ""),
    ]
    shares, singles, used = [], [], []
    for lemma in sorted(labels):
        gold = labels[lemma]
        counts = Counter(gold)
        share = max(counts.values()) / len(gold)
        single = bcubed(gold, [0] * len(gold))[2]  # every token in one cluster
        shares.append(share)
        singles.append(single)
        used.append(len(counts))
        lines.append(
            f"| {lemma} | {listed[lemma]} | {len(gold)} | {len(counts)} | {share:.2f} "
            f"| {len(inventory[lemma])} | {single:.3f} |" + scores.get(lemma, "")
        )
    n = len(labels)
    lines.append(
        f"| **all {n} verbs** | {sum(listed.values())} | {sum(len(v) for v in labels.values())} "
        f"| {sum(used) / n:.2f} | {sum(shares) / n:.2f} "
        f"| {sum(len(inventory[v]) for v in labels) / n:.2f} | {sum(singles) / n:.3f} |"
        + (" | |" if run else "")
    )
    return "\n".join(lines)


def scores_table(folders: list[str]) -> str:
    gold = read_gold_tsv(HERE / "gold.tsv")
    lines = [
        "| run | mean ARI | verbs below 0 | B³ F1 | V-measure | senses per verb (gold) |",
        "|---|---|---|---|---|---|",
    ]
    for folder in folders:
        report = evaluate(read_assignments(folder), gold)
        below = sum(v.ari < 0 for v in report.verbs)
        m = report.macro
        lines.append(
            f"| {Path(folder).name} | {m['ari']:.3f} | {below} | {m['bcubed_f1']:.3f} "
            f"| {m['v_measure']:.3f} | {m['induced_senses']:.2f} ({m['gold_senses']:.2f}) |"
        )
    return "\n".join(lines)


if __name__ == "__main__":
    print(counts_table(sys.argv[1] if sys.argv[1:] else None))
    if sys.argv[1:]:
        print()
        print(scores_table(sys.argv[1:]))
