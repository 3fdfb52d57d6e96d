"""The argument/adjunct decision over a corpus, and the pronominal use across conventions.

Statistics are checked against scipy; the decision against the UD French treebanks (Sequoia and
GSD), with their obl:arg/obl:mod subtypes kept and stripped. Facts about French verbs are facts
of the trade written from memory (no dictionary consulted), chosen among the verbs the shared
treebanks actually contain (counted first: e.g. mettre 102 tokens with 67 en-PPs, participer 22
with 22 à-PPs; "compter sur" has only 2 and is left out).
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Callable
from dataclasses import replace
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.stats import binom, chi2_contingency

from lexbuild.corpus.argumenthood import (
    DecisionSettings,
    ObliqueCounts,
    apply,
    binomial_tail,
    count_obliques,
    decide,
    log_likelihood,
)
from lexbuild.corpus.conllu import Sentence, iter_sentences
from lexbuild.corpus.occurrences import Occurrence, extract_occurrences, profile_for
from lexbuild.corpus.valency import FrameCount, FrameThresholds, count_frames

FR = profile_for("fr")

# ------------------------------------------------------------------------------ statistics


@settings(max_examples=80, deadline=None)
@given(st.integers(0, 60), st.integers(1, 60), st.integers(0, 400), st.integers(1, 400))
def test_log_likelihood_is_scipy_g_test(k: int, n: int, rest_k: int, rest_n: int) -> None:
    k, rest_k = min(k, n), min(rest_k, rest_n)
    ours = log_likelihood(k, n, rest_k, rest_n)
    table = [[k, n - k], [rest_k, rest_n - rest_k]]
    if (k + rest_k) in (0, n + rest_n):
        assert ours == 0.0
        return
    # scipy.stats.chi2_contingency with the log-likelihood statistic is G² (Dunning 1993).
    g2 = chi2_contingency(table, correction=False, lambda_="log-likelihood")[0]
    assert abs(abs(ours) - g2) <= 1e-7 * max(1.0, g2)
    assert (ours >= 0) == (k / n >= rest_k / rest_n) or abs(ours) < 1e-9


@settings(max_examples=80, deadline=None)
@given(st.integers(0, 80), st.integers(1, 80), st.floats(0.001, 0.999))
def test_binomial_tail_is_scipy_survival(k: int, n: int, p: float) -> None:
    k = min(k, n)
    # P(X >= k) = binom.sf(k - 1, n, p) (scipy.stats).
    assert binomial_tail(k, n, p) == pytest.approx(binom.sf(k - 1, n, p), rel=1e-9, abs=1e-15)


# ------------------------------------------------------------------------- the treebanks


def _strip(sentence: Sentence) -> Sentence:
    """The same tree with obl:arg / obl:mod written as plain obl (a treebank without them)."""
    tokens = tuple(
        replace(t, deprel="obl") if t.deprel.startswith("obl:") and t.deprel != "obl:agent" else t
        for t in sentence.tokens
    )
    return replace(sentence, tokens=tokens)


def _fr_files(ud_dir: Path) -> list[Path]:
    files = sorted(ud_dir.glob("fr_sequoia-ud-*.conllu")) + sorted(
        ud_dir.glob("fr_gsd-ud-*.conllu")
    )
    assert len(files) >= 4, f"French UD files expected in {ud_dir}"
    return files


def _occurrences(files: list[Path], transform: Callable[[Sentence], Sentence]) -> list[Occurrence]:
    return [
        occurrence
        for sentence in iter_sentences(files)
        for occurrence in extract_occurrences(transform(sentence), FR)
    ]


@pytest.fixture(scope="module")
def labelled(ud_dir: Path) -> list[Occurrence]:
    return _occurrences(_fr_files(ud_dir), lambda s: s)


@pytest.fixture(scope="module")
def stripped(ud_dir: Path) -> list[Occurrence]:
    return _occurrences(_fr_files(ud_dir), _strip)


def _decided(occurrences: list[Occurrence]) -> list[Occurrence]:
    return list(apply(occurrences, ObliqueCounts().update(occurrences).decide(), FR))


@pytest.fixture(scope="module")
def tables(
    labelled: list[Occurrence], stripped: list[Occurrence]
) -> dict[str, dict[str, list[FrameCount]]]:
    return {
        "kept": count_frames(_decided(labelled)),
        "stripped": count_frames(_decided(stripped)),
        "labels only": count_frames(labelled),
    }


# From memory: verbs that take these prepositional complements (s'agir de: lemma agir).
COMPLEMENTS = [
    ("mettre", "en"),
    ("participer", "à"),
    ("dépendre", "de"),
    ("bénéficier", "de"),
    ("provenir", "de"),
    ("contribuer", "à"),
    ("parler", "de"),
    ("appartenir", "à"),
    ("répondre", "à"),
    ("souffrir", "de"),
    ("aboutir", "à"),
    ("résulter", "de"),
    ("agir", "de"),
    ("assister", "à"),
    ("reposer", "sur"),
    ("procéder", "à"),
]
# From memory: "en <year>" with these verbs is a time adjunct (créé en 1820, né en 1950...);
# the treebanks give each of them several such PPs.
TIME_ADJUNCT_VERBS = ["créer", "naître", "publier", "signer", "mourir", "décéder", "ouvrir"]


@pytest.mark.parametrize("convention", ["kept", "stripped"])
def test_prepositional_complements_head_a_top_frame(
    tables: dict[str, dict[str, list[FrameCount]]], convention: str
) -> None:
    table = tables[convention]
    missing = [
        (verb, marker)
        for verb, marker in COMPLEMENTS
        if not any(f"PP[{marker}]" in row.frame for row in table[verb][:3])
    ]
    assert missing == []


@pytest.mark.parametrize("convention", ["kept", "stripped"])
def test_time_adjuncts_do_not_head_a_frame(
    tables: dict[str, dict[str, list[FrameCount]]], convention: str
) -> None:
    table = tables[convention]
    headed = [v for v in TIME_ADJUNCT_VERBS if any("PP[en]" in r.frame for r in table[v])]
    assert headed == []


def test_labels_alone_lose_the_complements_once_stripped(stripped: list[Occurrence]) -> None:
    # What the evidence fixes: with plain obl everywhere, the labels admit no PP at all.
    table = count_frames(stripped)
    assert not any("obl:PP" in row.frame for rows in table.values() for row in rows)


def test_frames_agree_with_and_without_subtypes(
    labelled: list[Occurrence], stripped: list[Occurrence]
) -> None:
    # Issue target: at least 85 % of verb tokens get the same frame (measured: 0.944).
    kept, bare = _decided(labelled), _decided(stripped)
    same = sum(a.frame == b.frame for a, b in zip(kept, bare, strict=True))
    assert same / len(kept) >= 0.85


def test_label_trust_is_measured_on_the_corpus(
    labelled: list[Occurrence], stripped: list[Occurrence]
) -> None:
    with_labels = ObliqueCounts().update(labelled).decide()
    without = ObliqueCounts().update(stripped).decide()
    assert without.label_trust == 0.0  # no obl:arg at all: plain obl says nothing
    assert 0.2 < with_labels.label_trust <= 1.0
    assert with_labels.label_agreement > 0.6


def test_counts_reduce_across_shards(ud_dir: Path) -> None:
    # The decision is a pure function of counts that add up: two shards give what one does.
    files = _fr_files(ud_dir)
    whole = count_obliques(files)
    shards = count_obliques(files[:2]) + count_obliques(files[2:])
    assert shards == whole
    assert decide(shards) == decide(whole)


def test_explained_verdict_names_its_evidence(labelled: list[Occurrence]) -> None:
    decision = ObliqueCounts().update(labelled).decide()
    verdict = decision.verdicts["participer", "obl:PP[à]"]
    assert verdict.argument and verdict.tokens >= 15
    names = [name for name, _ in verdict.evidence]
    assert names == ["association", "backoff", "class", "position", "spread", "bias", "labels"]
    assert verdict.score == pytest.approx(sum(value for _, value in verdict.evidence))
    assert verdict.g2 > 3.84 and verdict.p_value < 0.05  # strongly associated
    pendant = [v for (verb, slot), v in decision.verdicts.items() if slot == "obl:PP[pendant]"]
    assert pendant and not any(v.argument for v in pendant)  # "pendant" is never selected


def test_a_pair_seen_once_has_no_association(stripped: list[Occurrence]) -> None:
    # One token of a preposition with a verb seen once is "associated" by G² whatever it is;
    # collocation extraction sets a frequency threshold for that reason (common practice).
    counts = ObliqueCounts().update(stripped)
    decision = counts.decide()
    once = [v for v in decision.verdicts.values() if v.tokens == 1]
    assert len(once) > 1000
    assert sum(v.g2 >= 3.84 for v in once) > 0.25 * len(once)  # G² says "significant"
    assert all(dict(v.evidence)["association"] == 0.0 for v in once)
    assert all(dict(v.evidence)["association"] != 0.0 for v in decision.verdicts.values()
               if v.tokens >= 2 and v.g2 != 0.0)  # fmt: skip
    # Without the threshold (the decision of before) single tokens decide 82 verdicts.
    loose = counts.decide(DecisionSettings(association_min_tokens=1))
    changed = sum(loose.verdicts[v.verb, v.slot].argument != v.argument for v in once)
    assert changed >= 75


def test_significance_test_replaces_the_share_cut_off(labelled: list[Occurrence]) -> None:
    occurrences = _decided(labelled)
    thresholds = FrameThresholds(significance=0.05, noise_rate=0.02, merge_optional=False)
    tested = count_frames(occurrences, thresholds)
    shared = count_frames(occurrences, replace(thresholds, significance=None))
    raw: dict[str, Counter[str]] = {}
    for occurrence in occurrences:
        raw.setdefault(occurrence.lemma, Counter())[occurrence.frame] += 1
    differ = 0
    for lemma, frames in raw.items():
        n = sum(frames.values())
        # Kept: P(X >= count | n, noise) < alpha, by scipy.stats.binom (Brent 1993's test).
        expected = {f for f, c in frames.items() if c >= 2 and binom.sf(c - 1, n, 0.02) < 0.05}
        assert {r.frame for r in tested[lemma]} == expected, lemma
        differ += expected != {r.frame for r in shared[lemma]}
    assert differ >= 10  # the test is not the 5 % share under another name


# ------------------------------------------------------------------- pronominal use


def _frames_by_id(ud_dir: Path, name: str) -> dict[tuple[str, str], str]:
    found = {}
    for sentence in iter_sentences(ud_dir / name):
        for occurrence in extract_occurrences(sentence, FR):
            found[sentence.id, occurrence.words[occurrence.token]] = occurrence.frame
    return found


def test_pronominal_use_in_hand_checked_sentences(ud_dir: Path) -> None:
    # Hand-checked (French grammar, common practice: se always reflexive; me/te/nous/vous when
    # they agree with the subject).
    test = _frames_by_id(ud_dir, "fr_gsd-ud-test.conllu")
    dev = _frames_by_id(ud_dir, "fr_gsd-ud-dev.conllu")
    sequoia = _frames_by_id(ud_dir, "fr_sequoia-ud-train.conllu")
    # "je me dis que ..." (me iobj, agrees with je)
    assert "refl:CLITIC[se]" in test["fr-ud-test_00102", "dis"]
    # "à se mobiliser" (se as obj)
    assert "refl:CLITIC[se]" in test["fr-ud-test_00055", "mobiliser"]
    # "Le royaume s'est amélioré" (GSD: expl:pass)
    assert test["fr-ud-test_00033", "amélioré"] == "subj:NP refl:CLITIC[se]"
    # "allez vous restaurer" (vous obj, agrees with the imperative's 2nd person plural)
    assert "refl:CLITIC[se]" in dev["fr-ud-dev_01381", "restaurer"]
    # Not reflexive: "vous propose" (3rd person subject), "elle m'a examiné", and
    # "Permettez-moi de vous dire" (the controller of dire is moi, not vous).
    assert "refl" not in dev["fr-ud-dev_00063", "propose"]
    assert "refl" not in dev["fr-ud-dev_00084", "examiné"]
    assert "refl" not in sequoia["Europar.550_00497", "dire"]


_CONVENTIONS = {
    # How other treebanks and parsers write a reflexive clitic (spaCy fr_core_news_*:
    # expl:comp; plain objects; inherent reflexive everywhere).
    "expl:comp": lambda t: replace(t, deprel="expl:comp"),
    "obj": lambda t: replace(t, deprel="obj"),
    "expl:pv": lambda t: replace(t, deprel="expl:pv"),
    "no Reflex feature": lambda t: replace(
        t, feats="|".join(f for f in t.feats.split("|") if f != "Reflex=Yes") or "_"
    ),
}


@pytest.mark.parametrize("convention", sorted(_CONVENTIONS))
def test_pronominal_use_whatever_the_convention(ud_dir: Path, convention: str) -> None:
    rewrite = _CONVENTIONS[convention]

    def convert(sentence: Sentence) -> Sentence:
        tokens = tuple(
            rewrite(t)
            if t.form.lower() in ("se", "s'")
            and t.deprel in ("expl:pv", "obj", "iobj", "expl:pass")
            else t
            for t in sentence.tokens
        )
        return replace(sentence, tokens=tokens)

    path = [ud_dir / "fr_gsd-ud-dev.conllu"]
    original = _occurrences(path, lambda s: s)
    converted = _occurrences(path, convert)

    def reflexive(occurrences: list[Occurrence]) -> list[str]:
        return [o.key for o in occurrences if "refl:CLITIC[se]" in o.frame]

    # Counted on GSD dev: 104 expl:pv; 237 pronominal uses once se-objects and se-passives count.
    assert len(reflexive(original)) >= 200
    assert reflexive(converted) == reflexive(original)
