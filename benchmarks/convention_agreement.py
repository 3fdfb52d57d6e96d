"""Frames whatever the treebank's convention: subtypes of obl kept vs stripped.

For each French UD treebank file (and all of them as one corpus), the occurrences are extracted
twice: from the trees as they are (``obl:arg``/``obl:mod``) and from the same trees with every
``obl:*`` subtype but ``obl:agent`` written as plain ``obl`` (a treebank without the
distinction). Printed per corpus: the share of verb tokens whose whole frame is the same both
ways, with obliques decided by corpus evidence (lexbuild.corpus.argumenthood, the default) and,
for reference, by the labels alone; the label trust the decision measured; the agreement of the
decision taken on the stripped trees with the ``obl:arg`` labels, token by token, and its
precision and recall of "argument" over the tokens labelled ``obl:arg`` or ``obl:mod``.
``--association-min-tokens 1`` gives single-token pairs their association back (the decision
before 2026-12-04).

    python benchmarks/convention_agreement.py [UD_DIR] [--association-min-tokens N]
"""

from __future__ import annotations

import argparse
from collections import Counter
from dataclasses import replace
from pathlib import Path
from typing import NamedTuple

from lexbuild.corpus.argumenthood import DecisionSettings, ObliqueCounts, apply
from lexbuild.corpus.conllu import Sentence, iter_sentences
from lexbuild.corpus.occurrences import Occurrence, extract_occurrences, profile_for

DEFAULT_UD = Path(__file__).resolve().parents[2] / "shared/corpora/ud"
PROFILE = profile_for("fr")


def strip_subtypes(sentence: Sentence) -> Sentence:
    tokens = tuple(
        replace(t, deprel="obl") if t.deprel.startswith("obl:") and t.deprel != "obl:agent" else t
        for t in sentence.tokens
    )
    return replace(sentence, tokens=tokens)


def _same(a: list[Occurrence], b: list[Occurrence]) -> float:
    return sum(x.frame == y.frame for x, y in zip(a, b, strict=True)) / max(len(a), 1)


class Measures(NamedTuple):
    verbs: int
    evidence: float  # same frame stripped vs kept, obliques by evidence
    labels: float  # ... by the labels alone
    trust: float  # the label trust the decision measured on the kept trees
    vs_obl_arg: float  # decision on the stripped trees vs obl:arg, token by token
    precision: float  # ... of "argument", over the tokens labelled obl:arg or obl:mod
    recall: float
    kept_vs_labels: float


def measure(files: list[Path], settings: DecisionSettings | None = None) -> Measures:
    kept: list[Occurrence] = []
    bare: list[Occurrence] = []
    for sentence in iter_sentences(files):
        kept.extend(extract_occurrences(sentence, PROFILE))
        bare.extend(extract_occurrences(strip_subtypes(sentence), PROFILE))
    kept_decision = ObliqueCounts().update(kept).decide(settings)
    bare_decision = ObliqueCounts().update(bare).decide(settings)
    decided_kept = list(apply(kept, kept_decision, PROFILE))
    decided_bare = list(apply(bare, bare_decision, PROFILE))
    agree = total = 0
    outcomes: Counter[tuple[bool, bool]] = Counter()  # (labelled arg, admitted)
    for with_labels, without in zip(kept, bare, strict=True):
        for labelled, plain in zip(with_labels.obliques, without.obliques, strict=True):
            admitted = bare_decision.admits(without.lemma, plain)
            total += 1
            agree += (labelled.label == "arg") == admitted
            if labelled.label in ("arg", "mod"):
                outcomes[labelled.label == "arg", admitted] += 1
    hits = outcomes[True, True]
    return Measures(
        verbs=len(kept),
        evidence=_same(decided_kept, decided_bare),
        labels=_same(kept, bare),
        trust=kept_decision.label_trust,
        vs_obl_arg=agree / max(total, 1),
        precision=hits / max(hits + outcomes[False, True], 1),
        recall=hits / max(hits + outcomes[True, False], 1),
        kept_vs_labels=_same(kept, decided_kept),
    )


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("ud", nargs="?", type=Path, default=DEFAULT_UD)
    parser.add_argument(
        "--association-min-tokens",
        type=int,
        default=DecisionSettings().association_min_tokens,
        help="pairs seen fewer times have no association (1: the decision before 2026-12-04)",
    )
    args = parser.parse_args(argv)
    settings = DecisionSettings(association_min_tokens=args.association_min_tokens)
    files = sorted(args.ud.glob("fr_*.conllu"))
    print(
        f"{'corpus':<28}{'verbs':>7}{'evidence':>10}{'labels':>8}{'trust':>7}"
        f"{'vs obl:arg':>11}{'P':>7}{'R':>7}{'vs labels':>10}"
    )
    for name, group in [(f.name, [f]) for f in files] + [("all French", files)]:
        m = measure(group, settings)
        print(
            f"{name:<28}{m.verbs:>7}{m.evidence:>10.3f}{m.labels:>8.3f}{m.trust:>7.2f}"
            f"{m.vs_obl_arg:>11.3f}{m.precision:>7.3f}{m.recall:>7.3f}{m.kept_vs_labels:>10.3f}"
        )
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
