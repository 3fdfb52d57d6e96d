"""Guided against unguided sense induction on sense-annotated gold, and what guiding costs.

Gold sets (``--gold``):

* ``demo``: the shipped demo corpus (lexbuild/data/demo), parsed with the embedded pipeline,
  and its gold sense labels;
* ``devset``: the project's own real-polysemy development set (tests/devset/fr_senses), on
  the shared UD treebanks.

Per verb, the embedded default representation encodes every gold-labelled token once. The
unguided run clusters them all at one threshold. A guided run with ``n`` examples per sense
draws ``n`` tokens of each gold sense as the curated examples (fixed by random_state, repeated
over ``--repeats`` draws), assigns the other tokens (``guide.guided_labels``) and is scored on
those other tokens only, never on the examples it was given. Scores: adjusted Rand index,
B-cubed F1, V-measure (lexbuild.senses.evaluation), induced senses per verb against gold.

Cost: wall time of clustering a verb unguided against assigning it guided (vectors excluded:
both need the same ones), summed over verbs, as a ratio measured in the same run.

    python benchmarks/bench_guided.py --gold demo
    python benchmarks/bench_guided.py --gold devset --examples 1 3 5
"""

from __future__ import annotations

import argparse
import sys
import time
from collections import defaultdict
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from lexbuild.corpus.occurrences import Occurrence  # noqa: E402
from lexbuild.senses.agglomerative import DEFAULT_THRESHOLDS  # noqa: E402
from lexbuild.senses.agglomerative import AgglomerativeClusterer as SenseClusterer  # noqa: E402
from lexbuild.senses.evaluation import evaluate_verb  # noqa: E402
from lexbuild.senses.guide import ASSIGNERS, DEFAULT_MAX_DISTANCE, guided_labels  # noqa: E402
from lexbuild.senses.static import StaticSyntacticVectors  # noqa: E402
from lexbuild.senses.vectors import VectorCache, encode_cached  # noqa: E402


@dataclass
class GoldVerb:
    lemma: str
    occurrences: list[Occurrence]
    gold: list[str]


def demo_gold(work: Path) -> list[GoldVerb]:
    """The demo corpus parsed (cached under ``work``) and its gold labels, per verb."""
    from lexbuild.corpus.conllu import read_sentences
    from lexbuild.corpus.occurrences import extract_occurrences, profile_for
    from lexbuild.corpus.textparse import parse_texts
    from lexbuild.demo_corpus import corpus_files, gold_labels_for, read_gold

    conllu = work / "brevenn.conllu"
    if not conllu.exists():
        parse_texts(corpus_files(), conllu)
    sentences = list(read_sentences(conllu))
    labels = gold_labels_for(sentences, read_gold())
    french = profile_for("fr")
    by_verb: dict[str, GoldVerb] = {}
    for sentence in sentences:
        for occ in extract_occurrences(sentence, french):
            sense = labels.get((occ.sentence_id, occ.token + 1))
            if sense is None or not sense.startswith(occ.lemma + "."):
                continue
            verb = by_verb.setdefault(occ.lemma, GoldVerb(occ.lemma, [], []))
            verb.occurrences.append(occ)
            verb.gold.append(sense)
    return [by_verb[lemma] for lemma in sorted(by_verb)]


def devset_gold(folder: Path = ROOT / "tests" / "devset" / "fr_senses",
                ud: Path = ROOT.parent / "shared" / "corpora" / "ud") -> list[GoldVerb]:
    """The development set's labelled tokens (``?`` left out), per verb, read off the UD files."""
    import csv

    from lexbuild.corpus.conllu import read_sentences
    from lexbuild.corpus.occurrences import extract_occurrences, profile_for

    wanted: dict[tuple[str, str, int], tuple[str, str]] = {}
    with open(folder / "gold.tsv", encoding="utf-8", newline="") as handle:
        for row in csv.DictReader(handle, delimiter="\t", quoting=csv.QUOTE_NONE):
            if row["sense"] != "?":
                key = (row["file"], row["sent_id"], int(row["token_id"]))
                wanted[key] = (row["lemma"], row["sense"])
    french = profile_for("fr")
    by_verb: dict[str, GoldVerb] = {}
    for name in sorted({file for file, _, _ in wanted}):
        sent_ids = {sid for file, sid, _ in wanted if file == name}
        for sentence in read_sentences(ud / name):
            if sentence.id not in sent_ids:
                continue
            for occ in extract_occurrences(sentence, french):
                found = wanted.get((name, occ.sentence_id, occ.token + 1))
                if found is None or found[0] != occ.lemma:
                    continue
                verb = by_verb.setdefault(occ.lemma, GoldVerb(occ.lemma, [], []))
                verb.occurrences.append(occ)
                verb.gold.append(found[1])
    return [by_verb[lemma] for lemma in sorted(by_verb)]


def draw_examples(gold: Sequence[str], n: int, random_state: int) -> dict[int, str]:
    """``n`` token indices per gold sense (all of a sense's tokens but one when it has few)."""
    rng = np.random.default_rng(random_state)
    by_sense: dict[str, list[int]] = defaultdict(list)
    for index, sense in enumerate(gold):
        by_sense[sense].append(index)
    chosen: dict[int, str] = {}
    for sense in sorted(by_sense):
        members = by_sense[sense]
        take = min(n, max(1, len(members) - 1))
        for index in rng.choice(members, take, replace=False):
            chosen[int(index)] = sense
    return chosen


def unguided(X: np.ndarray, threshold: float) -> np.ndarray:
    return SenseClusterer(threshold=threshold).fit(X).labels_


def guided(
    X: np.ndarray,
    examples: dict[int, str],
    *,
    threshold: float,
    method: str,
    max_distance: float,
) -> np.ndarray:
    senses = sorted(set(examples.values()))
    number = {s: i for i, s in enumerate(senses)}
    rows = sorted(examples)
    anchors = [(row, number[examples[row]]) for row in rows]
    result = guided_labels(
        X, anchors, X[rows], len(senses), threshold=threshold, method=method,
        max_distance=max_distance,
    )
    return result.labels


def summarise(scores: list, gold_senses: list[int]) -> dict[str, float]:
    return {
        "ari": float(np.mean([s.ari for s in scores])),
        "bcubed_f1": float(np.mean([s.bcubed_f1 for s in scores])),
        "v_measure": float(np.mean([s.v_measure for s in scores])),
        "senses": float(np.mean([s.induced_senses for s in scores])),
        "gold": float(np.mean(gold_senses)),
        "below0": float(sum(1 for s in scores if s.ari < 0)),
    }


def run(
    verbs: list[GoldVerb],
    representation: StaticSyntacticVectors,
    cache: VectorCache | None,
    *,
    threshold: float,
    examples: Sequence[int],
    method: str,
    max_distance: float,
    repeats: int,
) -> dict[str, dict[str, float]]:
    rows: dict[str, dict[str, float]] = {}
    vectors = {v.lemma: encode_cached(representation, v.occurrences, cache) for v in verbs}
    # Warm-up: the first clustering pays for imports, which neither run should be charged.
    unguided(vectors[verbs[0].lemma], threshold)
    guided(vectors[verbs[0].lemma], draw_examples(verbs[0].gold, 1, 0), threshold=threshold,
           method=method, max_distance=max_distance)
    t0 = time.perf_counter()
    plain = [evaluate_verb(v.gold, unguided(vectors[v.lemma], threshold).tolist(), v.lemma)
             for v in verbs]
    unguided_time = time.perf_counter() - t0
    rows["unguided"] = summarise(plain, [s.gold_senses for s in plain])
    rows["unguided"]["seconds"] = unguided_time
    for n in examples:
        per_repeat = []
        guided_time = 0.0
        for repeat in range(repeats):
            scores = []
            for v in verbs:
                chosen = draw_examples(v.gold, n, repeat)
                t0 = time.perf_counter()
                labels = guided(vectors[v.lemma], chosen, threshold=threshold, method=method,
                                max_distance=max_distance)
                guided_time += time.perf_counter() - t0
                held_out = [i for i in range(len(v.gold)) if i not in chosen]
                scores.append(evaluate_verb([v.gold[i] for i in held_out],
                                            [int(labels[i]) for i in held_out], v.lemma))
            per_repeat.append(summarise(scores, [len(set(v.gold)) for v in verbs]))
        row = {key: float(np.mean([r[key] for r in per_repeat])) for key in per_repeat[0]}
        row["seconds"] = guided_time / repeats
        rows[f"guided {n}"] = row
    return rows


def full_path_cost(
    verbs: list[GoldVerb],
    representation: StaticSyntacticVectors,
    cache: VectorCache,
    *,
    threshold: float,
    repeats: int = 3,
) -> tuple[float, float]:
    """Seconds of ``SenseInducer.fit`` over all verbs, unguided and guided by 3 curated
    examples per sense (cited by corpus, sentence and span), vectors already cached: what
    guiding adds to a run (locating anchors, assigning) against clustering alone."""
    from lexbuild.lexicon.model import Example, SourceRef, Status
    from lexbuild.senses.guide import CuratedSense, Guide, corpus_name
    from lexbuild.senses.inducer import SenseInducer

    senses = {}
    for v in verbs:
        by_sense: dict[str, list[Example]] = defaultdict(list)
        for index, sense in sorted(draw_examples(v.gold, 3, 0).items()):
            occ = v.occurrences[index]
            by_sense[sense].append(Example(
                text=occ.text, verb=occ.char_span,
                source=SourceRef(corpus=corpus_name(occ.source), sentence=occ.sentence_id),
            ))
        senses[v.lemma] = tuple(CuratedSense(s, v.lemma, Status.APPROVED, tuple(x))
                                for s, x in sorted(by_sense.items()))
    guide = Guide(senses)
    occurrences = [o for v in verbs for o in v.occurrences]
    timings: dict[str, list[float]] = {"unguided": [], "guided": []}
    for _ in range(repeats + 1):  # the first round warms up
        for name, given in (("unguided", None), ("guided", guide)):
            t0 = time.perf_counter()
            SenseInducer(representation, threshold=threshold, cache=cache,
                         guide=given).fit(occurrences)
            timings[name].append(time.perf_counter() - t0)
    return min(timings["unguided"][1:]), min(timings["guided"][1:])


def main(argv: Sequence[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--gold", choices=("demo", "devset"), default="demo")
    parser.add_argument("--examples", type=int, nargs="+", default=[1, 3, 5])
    parser.add_argument("--threshold", type=float, default=DEFAULT_THRESHOLDS["average"])
    parser.add_argument("--method", choices=ASSIGNERS, default="centroid")
    parser.add_argument("--max-distance", type=float, default=DEFAULT_MAX_DISTANCE)
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--work", type=Path, default=Path("/tmp/lexbuild-bench-guided"))
    args = parser.parse_args(argv)
    args.work.mkdir(parents=True, exist_ok=True)
    verbs = demo_gold(args.work) if args.gold == "demo" else devset_gold()
    with VectorCache(args.work / "vectors.sqlite") as cache:
        representation = StaticSyntacticVectors()
        rows = run(
            verbs, representation, cache, threshold=args.threshold,
            examples=args.examples, method=args.method, max_distance=args.max_distance,
            repeats=args.repeats,
        )
        blind_s, guided_s = full_path_cost(verbs, representation, cache,
                                           threshold=args.threshold)
        # The embedded default before this benchmark's tuning: no pronominal cue, cut 0.7.
        before = run(
            verbs, StaticSyntacticVectors(weights={"pronominal": 0.0}), cache, threshold=0.7,
            examples=[], method=args.method, max_distance=args.max_distance, repeats=1,
        )
        rows = {"unguided, previous default": before["unguided"], **rows}
    print(f"{args.gold}: {len(verbs)} verbs, {sum(len(v.gold) for v in verbs)} tokens, "
          f"threshold {args.threshold}, assigner {args.method}, max distance {args.max_distance}")
    header = "| run | mean ARI | B-cubed F1 | V-measure | senses/verb (gold) | verbs ARI<0 |"
    print(header)
    print("|---|---|---|---|---|---|")
    for name, row in rows.items():
        print(f"| {name} | {row['ari']:.3f} | {row['bcubed_f1']:.3f} | {row['v_measure']:.3f} | "
              f"{row['senses']:.1f} ({row['gold']:.1f}) | {row['below0']:.0f} |")
    print(f"cost of a whole induction run (SenseInducer.fit, vectors cached), guided by 3 "
          f"examples per sense / unguided: {guided_s / blind_s:.2f}x "
          f"({guided_s:.3f}s / {blind_s:.3f}s)")
    print(f"unguided now / previous default: "
          f"{rows['unguided']['ari'] / rows['unguided, previous default']['ari']:.2f}x mean ARI")
    base = rows["unguided"]["seconds"]
    for name, row in rows.items():
        if name.startswith("guided"):
            print(f"cost {name} / unguided: {row['seconds'] / max(base, 1e-9):.2f}x "
                  f"({row['seconds']:.3f}s / {base:.3f}s)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
