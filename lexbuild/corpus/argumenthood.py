"""Arguments told from adjuncts by corpus evidence, not by one label.

Treebanks and parsers mark the argument/adjunct split of obliques differently (UD French
Sequoia and GSD: ``obl:arg``/``obl:mod``; other treebanks: plain ``obl`` everywhere; spaCy's
French pipelines: ``obl:mod`` far too often), so frames that trust the label change with the
convention. Here the decision is taken per verb and oblique slot (``obl:PP[à]``,
``obl:CLITIC[en]``...) over the whole corpus, in two steps that shard and merge:

1. ``ObliqueCounts``: counts over occurrences (``add``), summed across shards with ``+``.
2. ``decide(counts)``: a pure function of those counts, returning a ``Decision`` with, per
   (verb, slot), a score, its verdict and the evidence behind it; ``apply`` then admits each
   occurrence's obliques (``occurrences.readmit``).

The evidence, each term a log-odds-like number added to the score (argument when > 0):

* **association** of the verb with the slot against the slot's rate with all verbs: signed
  log-likelihood ratio G² (Dunning 1993) of the 2x2 table (this verb / other verbs, with / without
  the slot), scaled and capped; the binomial tail P(X >= k) of the same counts (Brent 1993) is
  reported beside it; a pair seen once has none (its verdict rests on the rest);
* a **back-off** for sparse verbs (Korhonen 2002): the share of the slot's tokens, over all
  verbs, that fall in significantly associated pairs (G² >= 3.84, p < 0.05): a preposition
  selected by many verbs (de, à) starts higher than one that goes with any verb (dans, pendant);
* the **class of the noun**: share of the pair's tokens whose noun is a time, place or manner
  expression (the profile's lexicon; four-digit years), the textbook adjuncts;
* **position**: share of the pair's tokens before the verb (not clitics): a sentence adverbial's
  place;
* **the same PP with other verbs**: share of the pair's tokens whose (slot, noun) also occurs
  with at least ``spread_verbs`` other verbs ("en 2005", "à Paris" go with any verb);
* the **labels**, when the corpus has them: (arg - mod) / tokens, weighted by the trust the
  corpus earns: 0 when it has no ``obl:arg`` at all (a plain ``obl`` then says nothing), else
  how often its labels agree with the verdict of the other evidence (0.5 -> 0, 1.0 -> 1),
  shrunk towards a prior agreement of 0.75 while few tokens are labelled.

Per token, an admitted pair still leaves out a fronted PP and a PP whose noun is a time
expression, unless most of the pair's tokens are such (the verb selects them: "dater de 1820").
"""

from __future__ import annotations

import math
from collections import Counter
from collections.abc import Iterable, Iterator
from dataclasses import dataclass, field
from pathlib import Path

from lexbuild.corpus.conllu import OnError
from lexbuild.corpus.occurrences import (
    LanguageProfile,
    Oblique,
    Occurrence,
    iter_occurrences,
    readmit,
)

__all__ = [
    "Decision",
    "DecisionSettings",
    "ObliqueCounts",
    "Verdict",
    "apply",
    "binomial_tail",
    "count_obliques",
    "decide",
    "log_likelihood",
]

_CLASSES = ("time", "place", "manner")


@dataclass
class ObliqueCounts:
    """Sufficient statistics of the decision; ``+`` merges the counts of two shards."""

    verbs: Counter[str] = field(default_factory=Counter)  # verb tokens per lemma
    pairs: Counter[tuple[str, str]] = field(default_factory=Counter)  # (verb, slot) tokens
    labels: Counter[tuple[str, str, str]] = field(default_factory=Counter)  # (verb, slot, label)
    fronted: Counter[tuple[str, str]] = field(default_factory=Counter)
    classes: Counter[tuple[str, str, str]] = field(default_factory=Counter)  # (verb, slot, cls)
    nouns: Counter[tuple[str, str, str]] = field(default_factory=Counter)  # (slot, noun, verb)

    def add(self, occurrence: Occurrence) -> None:
        verb = occurrence.lemma
        self.verbs[verb] += 1
        for oblique in occurrence.obliques:
            slot = str(oblique.slot)
            self.pairs[verb, slot] += 1
            self.labels[verb, slot, oblique.label] += 1
            if oblique.fronted:
                self.fronted[verb, slot] += 1
            if oblique.noun_class:
                self.classes[verb, slot, oblique.noun_class] += 1
            self.nouns[slot, oblique.lemma.lower(), verb] += 1

    def update(self, occurrences: Iterable[Occurrence]) -> ObliqueCounts:
        for occurrence in occurrences:
            self.add(occurrence)
        return self

    def decide(self, settings: DecisionSettings | None = None) -> Decision:
        return decide(self, settings or DecisionSettings())

    def __add__(self, other: ObliqueCounts) -> ObliqueCounts:
        return ObliqueCounts(
            self.verbs + other.verbs,
            self.pairs + other.pairs,
            self.labels + other.labels,
            self.fronted + other.fronted,
            self.classes + other.classes,
            self.nouns + other.nouns,
        )


@dataclass(frozen=True)
class DecisionSettings:
    """Weights of the evidence: tuned on UD French Sequoia train (agreement of the decision on
    the tree with its subtypes stripped with the obl:arg/obl:mod labels), then the bias and the
    label weight on GSD dev and test parsed from raw text (agreement with the gold trees); see
    the README table."""

    association_scale: float = 8.0  # G² divided by this ...
    association_cap: float = 3.0  # ... and capped at +/- this
    # A pair seen fewer times has no association evidence: one token of a rare preposition
    # with a verb seen once is "perfectly associated" (G² and the binomial tail both say so),
    # whatever it is. A frequency threshold as in collocation extraction (common practice);
    # 1 gives the decision of before 2026-12-04. (The back-off always counts pairs of 2+.)
    association_min_tokens: int = 2
    backoff_weight: float = 4.0  # (backoff share - backoff_centre) * weight
    backoff_centre: float = 0.5
    class_weight: float = 2.0
    fronted_weight: float = 3.0
    spread_weight: float = 1.0
    spread_verbs: int = 3
    label_weight: float = 2.0
    # Agreement assumed of labels before any is measured, and how many tokens it is worth.
    trust_prior: float = 0.75
    trust_prior_weight: float = 20.0
    # Slot tokens at which the back-off and the bias count half (a small corpus measures badly).
    backoff_support: float = 20.0
    bias: float = -1.0  # an oblique is an adjunct until the evidence says otherwise


@dataclass(frozen=True, slots=True)
class Verdict:
    """The decision for one verb and oblique slot, with its evidence."""

    verb: str
    slot: str
    argument: bool
    score: float
    tokens: int  # the pair's tokens (k)
    verb_tokens: int  # the verb's tokens (n)
    expected: float  # k expected from the slot's rate with all verbs
    g2: float  # signed log-likelihood ratio (negative: less often than expected)
    p_value: float  # binomial P(X >= k | n, rate)
    evidence: tuple[tuple[str, float], ...]  # (name, contribution to the score)
    time_share: float  # share of its tokens whose noun is a time expression

    def explain(self) -> str:
        return " ".join(f"{name}={value:+.2f}" for name, value in self.evidence)


@dataclass(frozen=True)
class Decision:
    """Verdicts per (verb, slot) and the corpus-level measures they rest on."""

    verdicts: dict[tuple[str, str], Verdict]
    label_trust: float
    label_agreement: float  # share of labelled tokens whose label agrees with the other evidence
    backoff: dict[str, float]  # per slot: share of its tokens in significant pairs

    def admits(self, verb: str, oblique: Oblique) -> bool:
        verdict = self.verdicts.get((verb, str(oblique.slot)))
        if verdict is None or not verdict.argument:
            return False
        if oblique.fronted:
            return False
        return not (oblique.noun_class == "time" and verdict.time_share < 0.5)


# ---------------------------------------------------------------------------- statistics


def _xlogx(count: float, expected: float) -> float:
    return count * math.log(count / expected) if count > 0 else 0.0


def log_likelihood(k: int, n: int, rest_k: int, rest_n: int) -> float:
    """Signed G² (Dunning 1993) of the table [[k, n-k], [rest_k, rest_n-rest_k]]: positive
    when this row has the event more often than the rest."""
    total = n + rest_n
    events = k + rest_k
    if n == 0 or rest_n == 0 or events in (0, total):
        return 0.0
    g2 = 0.0
    for observed, row, has_event in (
        (k, n, True),
        (n - k, n, False),
        (rest_k, rest_n, True),
        (rest_n - rest_k, rest_n, False),
    ):
        column = events if has_event else total - events
        g2 += _xlogx(observed, row * column / total)
    g2 = max(2.0 * g2, 0.0)
    return g2 if k / n >= rest_k / rest_n else -g2


def binomial_tail(k: int, n: int, p: float) -> float:
    """P(X >= k) for X ~ Binomial(n, p) (the test of Brent 1993)."""
    if k <= 0:
        return 1.0
    if k > n or p <= 0.0:
        return 0.0
    if p >= 1.0:
        return 1.0
    log_p, log_q = math.log(p), math.log1p(-p)
    terms = [
        math.lgamma(n + 1)
        - math.lgamma(i + 1)
        - math.lgamma(n - i + 1)
        + i * log_p
        + (n - i) * log_q
        for i in range(k, n + 1)
    ]
    top = max(terms)
    return min(1.0, math.exp(top) * sum(math.exp(t - top) for t in terms))


# ------------------------------------------------------------------------------ decision

_SIGNIFICANT = 3.84  # chi-square, 1 degree of freedom, p = 0.05


def _clip(value: float, cap: float) -> float:
    return max(-cap, min(cap, value))


def decide(counts: ObliqueCounts, settings: DecisionSettings = DecisionSettings()) -> Decision:
    """Verdicts for every (verb, slot) of the counts: a pure function of them."""
    total_verbs = sum(counts.verbs.values())
    per_slot: Counter[str] = Counter()
    for (_, slot), k in counts.pairs.items():
        per_slot[slot] += k
    # Association of every pair, and the back-off per slot.
    g2: dict[tuple[str, str], float] = {}
    significant: Counter[str] = Counter()
    for (verb, slot), k in counts.pairs.items():
        n = counts.verbs[verb]
        k_eff = min(k, n)  # a verb token with two PPs of the slot counts once
        value = log_likelihood(k_eff, n, max(per_slot[slot] - k, 0), max(total_verbs - n, 0))
        g2[verb, slot] = value
        if value >= _SIGNIFICANT and k >= 2:  # a rare slot seen once is "significant" by chance
            significant[slot] += k
    backoff = {slot: significant[slot] / per_slot[slot] for slot in sorted(per_slot)}
    # How far the slot's corpus-wide behaviour is measured: the back-off (per slot) and the
    # leaning towards adjuncts (per corpus) count fully only with enough tokens; in a tiny
    # corpus the labels speak.
    support = {m: per_slot[m] / (per_slot[m] + settings.backoff_support) for m in per_slot}
    observed = sum(per_slot.values())
    corpus_support = observed / (observed + settings.backoff_support)
    # The same PP with other verbs: distinct verbs per (slot, noun).
    spread: Counter[tuple[str, str]] = Counter()
    for slot, noun, _ in counts.nouns:
        spread[slot, noun] += 1
    promiscuous: Counter[tuple[str, str]] = Counter()
    for (slot, noun, verb), k in counts.nouns.items():
        if spread[slot, noun] > settings.spread_verbs:  # this verb and spread_verbs others
            promiscuous[verb, slot] += k

    def unlabelled(verb: str, slot: str) -> tuple[float, list[tuple[str, float]]]:
        k = counts.pairs[verb, slot]
        association = _clip(g2[verb, slot] / settings.association_scale, settings.association_cap)
        evidence = [
            ("association", association if k >= settings.association_min_tokens else 0.0),
            (
                "backoff",
                (backoff[slot] - settings.backoff_centre) * settings.backoff_weight * support[slot],
            ),
            (
                "class",
                -settings.class_weight * sum(counts.classes[verb, slot, c] for c in _CLASSES) / k,
            ),
            ("position", -settings.fronted_weight * counts.fronted[verb, slot] / k),
            ("spread", -settings.spread_weight * promiscuous[verb, slot] / k),
        ]
        evidence.append(("bias", settings.bias * corpus_support))
        return sum(value for _, value in evidence), evidence

    base = {pair: unlabelled(*pair) for pair in counts.pairs}
    # How far the corpus's labels can be trusted: both labels must occur, and agree with the
    # verdict of the other evidence more often than chance.
    label_totals: Counter[str] = Counter()
    agree = labelled = 0
    for (verb, slot, label), k in counts.labels.items():
        if not slot.startswith("obl:CLITIC"):  # a clitic's "arg" comes from iobj, not obl:arg
            label_totals[label] += k
        if label in ("arg", "mod"):
            labelled += k
            agree += k * ((label == "arg") == (base[verb, slot][0] > 0))
    agreement = agree / labelled if labelled else 0.0
    # Few labelled tokens measure little: shrink towards a prior agreement (a small corpus has
    # little other evidence either, so its labels keep some say).
    smoothed = (agree + settings.trust_prior * settings.trust_prior_weight) / (
        labelled + settings.trust_prior_weight
    )
    trust = max(0.0, min(1.0, (smoothed - 0.5) / 0.5)) if label_totals["arg"] else 0.0
    verdicts: dict[tuple[str, str], Verdict] = {}
    for verb, slot in sorted(counts.pairs):
        k, n = counts.pairs[verb, slot], counts.verbs[verb]
        score, evidence = base[verb, slot]
        balance = (counts.labels[verb, slot, "arg"] - counts.labels[verb, slot, "mod"]) / k
        label_term = settings.label_weight * trust * balance
        evidence = [*evidence, ("labels", label_term)]
        score += label_term
        rate = per_slot[slot] / total_verbs if total_verbs else 0.0
        verdicts[verb, slot] = Verdict(
            verb=verb,
            slot=slot,
            argument=score > 0,
            score=score,
            tokens=k,
            verb_tokens=n,
            expected=n * rate,
            g2=g2[verb, slot],
            p_value=binomial_tail(min(k, n), n, rate),
            evidence=tuple(evidence),
            time_share=counts.classes[verb, slot, "time"] / k,
        )
    return Decision(verdicts, trust, agreement, backoff)


def apply(
    occurrences: Iterable[Occurrence], decision: Decision, profile: LanguageProfile
) -> Iterator[Occurrence]:
    """The occurrences with their obliques admitted by the decision."""
    for occurrence in occurrences:
        if not occurrence.obliques:
            yield occurrence
            continue
        flags = [decision.admits(occurrence.lemma, o) for o in occurrence.obliques]
        yield readmit(occurrence, flags, profile)


def count_obliques(
    paths: str | Path | Iterable[str | Path],
    *,
    language: str = "fr",
    on_error: OnError = "raise",
    include_auxiliaries: bool = False,
) -> ObliqueCounts:
    """The counts of a corpus's files (every verb): the first of the two passes."""
    occurrences = iter_occurrences(
        paths,
        language=language,
        on_error=on_error,
        errors=[],  # reported by the second pass
        include_auxiliaries=include_auxiliaries,
        obliques="labels",
    )
    return ObliqueCounts().update(occurrences)
