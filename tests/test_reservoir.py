"""Per-verb caps applied while reading (bottom-k reservoirs of fixed priorities), and induction
that holds at most ``cap`` occurrences of a verb. Data: UD French-Sequoia dev
(../shared/corpora/ud)."""

from __future__ import annotations

import random
from collections import Counter
from pathlib import Path

import pytest

from lexbuild.corpus.occurrences import Occurrence, iter_occurrences
from lexbuild.senses.reservoir import (
    CorpusSample,
    VerbReservoir,
    occurrence_priority,
    occurrence_ref,
    sample_corpus,
)


@pytest.fixture(scope="module")
def occurrences(ud_dir: Path) -> list[Occurrence]:
    return list(iter_occurrences(ud_dir / "fr_sequoia-ud-dev.conllu"))


def _samples(sample: CorpusSample) -> dict[str, list[tuple[str, str, int]]]:
    return {lemma: [occurrence_ref(o) for o in occs] for lemma, occs in sample.iter_samples()}


def test_the_sample_is_the_cap_smallest_priorities(occurrences: list[Occurrence]) -> None:
    cap = 7
    sample = sample_corpus(occurrences, cap, random_state=3)
    by_lemma: dict[str, list[Occurrence]] = {}
    for occ in occurrences:
        by_lemma.setdefault(occ.lemma, []).append(occ)
    # Reference: sort every occurrence of the verb by priority and take the first cap.
    expected = {
        lemma: [
            occurrence_ref(o)
            for o in sorted(occs, key=lambda o: (occurrence_priority(3, o), occurrence_ref(o)))
        ][:cap]
        for lemma, occs in by_lemma.items()
    }
    assert _samples(sample) == expected
    assert sample.counts == {lemma: len(occs) for lemma, occs in by_lemma.items()}


def test_the_sample_ignores_reading_order_and_sharding(occurrences: list[Occurrence]) -> None:
    whole = sample_corpus(occurrences, 10, random_state=0)
    shuffled = list(occurrences)
    random.Random(1).shuffle(shuffled)
    cuts = sorted(random.Random(2).sample(range(1, len(shuffled)), 6))
    merged = CorpusSample(10, 0)
    for start, end in zip([0, *cuts], [*cuts, len(shuffled)], strict=True):
        merged.merge(sample_corpus(shuffled[start:end], 10, random_state=0))
    assert _samples(merged) == _samples(whole)
    assert merged.counts == whole.counts
    # The order-free digest of every occurrence (the run id's input) does not change either.
    assert {k: v.digest for k, v in merged.verbs.items()} == {
        k: v.digest for k, v in whole.verbs.items()
    }
    # Another random_state draws another sample.
    assert _samples(sample_corpus(occurrences, 10, random_state=1)) != _samples(whole)


def test_a_reservoir_never_holds_more_than_its_cap(occurrences: list[Occurrence]) -> None:
    reservoir = VerbReservoir(cap=5)
    for occ in occurrences:
        reservoir.offer(occ, occurrence_priority(0, occ))
        assert reservoir.held <= 5
    assert reservoir.count == len(occurrences) and reservoir.held == 5


def test_the_sample_is_uniform(occurrences: list[Occurrence]) -> None:
    """Each occurrence is drawn with the same probability cap/n (chi-square goodness of fit,
    scipy.stats.chisquare; 400 random_states, a p-value under 0.001 would mean a bias)."""
    from scipy.stats import chisquare

    lemma = Counter(o.lemma for o in occurrences).most_common(1)[0][0]
    pool = [o for o in occurrences if o.lemma == lemma]
    n, cap, draws = len(pool), 10, 400
    assert n > 4 * cap
    hits: Counter[tuple[str, str, int]] = Counter()
    for random_state in range(draws):
        sample = sample_corpus(pool, cap, random_state)
        hits.update(occurrence_ref(o) for o in sample.verbs[lemma].sample())
    observed = [hits[occurrence_ref(o)] for o in pool]
    assert sum(observed) == cap * draws
    assert chisquare(observed).pvalue > 0.001
