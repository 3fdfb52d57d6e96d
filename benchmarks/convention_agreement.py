"""Frames whatever the treebank's convention: subtypes of obl kept vs stripped.

For each French UD treebank file (and all of them as one corpus), the occurrences are extracted
twice: from the trees as they are (``obl:arg``/``obl:mod``) and from the same trees with every
``obl:*`` subtype but ``obl:agent`` written as plain ``obl`` (a treebank without the
distinction). Printed per corpus: the share of verb tokens whose whole frame is the same both
ways, with obliques decided by corpus evidence (lexbuild.corpus.argumenthood, the default) and,
for reference, by the labels alone; the label trust the decision measured; the agreement of the
decision taken on the stripped trees with the ``obl:arg`` labels, token by token.

    python benchmarks/convention_agreement.py [UD_DIR]
"""

from __future__ import annotations

import argparse
from dataclasses import replace
from pathlib import Path

from lexbuild.corpus.argumenthood import ObliqueCounts, apply
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


def measure(files: list[Path]) -> tuple[int, float, float, float, float, float]:
    kept: list[Occurrence] = []
    bare: list[Occurrence] = []
    for sentence in iter_sentences(files):
        kept.extend(extract_occurrences(sentence, PROFILE))
        bare.extend(extract_occurrences(strip_subtypes(sentence), PROFILE))
    kept_decision = ObliqueCounts().update(kept).decide()
    bare_decision = ObliqueCounts().update(bare).decide()
    decided_kept = list(apply(kept, kept_decision, PROFILE))
    decided_bare = list(apply(bare, bare_decision, PROFILE))
    agree = total = 0
    for with_labels, without in zip(kept, bare, strict=True):
        for labelled, plain in zip(with_labels.obliques, without.obliques, strict=True):
            total += 1
            agree += (labelled.label == "arg") == bare_decision.admits(without.lemma, plain)
    return (
        len(kept),
        _same(decided_kept, decided_bare),
        _same(kept, bare),
        kept_decision.label_trust,
        agree / max(total, 1),
        _same(kept, decided_kept),
    )


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("ud", nargs="?", type=Path, default=DEFAULT_UD)
    args = parser.parse_args(argv)
    files = sorted(args.ud.glob("fr_*.conllu"))
    print(
        f"{'corpus':<28}{'verbs':>7}{'evidence':>10}{'labels':>8}{'trust':>7}"
        f"{'vs obl:arg':>11}{'vs labels':>10}"
    )
    for name, group in [(f.name, [f]) for f in files] + [("all French", files)]:
        verbs, evidence, labels, trust, tokens, kept_vs_labels = measure(group)
        print(
            f"{name:<28}{verbs:>7}{evidence:>10.3f}{labels:>8.3f}{trust:>7.2f}"
            f"{tokens:>11.3f}{kept_vs_labels:>10.3f}"
        )
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
