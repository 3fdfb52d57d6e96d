"""Frames from occurrences: thresholds, the optional-slot rule, ids, and the UD treebanks."""

from __future__ import annotations

from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from lexbuild.corpus.occurrences import Argument, Occurrence, iter_occurrences
from lexbuild.corpus.valency import (
    FrameCount,
    FrameThresholds,
    count_frames,
    frames_for,
    match_frame,
)
from lexbuild.lexicon.model import Frame, parse_frame


def _occurrence(lemma: str, pattern: str, number: int) -> Occurrence:
    """An occurrence realising ``pattern`` (arguments unexpressed: only the slots matter here)."""
    arguments = tuple(Argument(slot, -1, "", (-1, -1)) for slot in parse_frame(pattern))
    return Occurrence(
        lemma=lemma,
        sentence_id=f"brevenn.{number}",
        source="brevenn.conllu",
        text="",
        token=0,
        char_span=(-1, -1),
        words=(),
        lemmas=(),
        arguments=arguments,
    )


def _corpus(lemma: str, counts: dict[str, int]) -> list[Occurrence]:
    occurrences: list[Occurrence] = []
    for pattern, count in counts.items():
        occurrences.extend(_occurrence(lemma, pattern, len(occurrences) + i) for i in range(count))
    return occurrences


def test_noise_is_dropped_by_count_and_by_share() -> None:
    occurrences = _corpus(
        "amarrer",
        {
            "subj:NP obj:NP": 60,
            "subj:NP obl:PP[à]": 30,
            "subj:NP obl:PP[sur]": 4,  # 4 %: below the 5 % share
            "subj:NP pred:AP": 1,  # below 2 occurrences
        },
    )
    frames = frames_for(occurrences, parent_id="amarrer.s1")
    assert [(f.id, f.pattern, f.frequency) for f in frames] == [
        ("amarrer.s1.f1", "subj:NP obj:NP", 60),
        ("amarrer.s1.f2", "subj:NP obl:PP[à]", 30),
    ]
    looser = frames_for(
        occurrences, parent_id="amarrer.s1", thresholds=FrameThresholds(min_share=0.04)
    )
    assert [f.pattern for f in looser][-1] == "subj:NP obl:PP[sur]"


def test_optional_slot_when_frame_occurs_with_and_without_it() -> None:
    occurrences = _corpus(
        "donner",
        {"subj:NP obj:NP iobj:PP[à]": 40, "subj:NP obj:NP": 25, "subj:NP comp:CLAUSE[que]": 10},
    )
    frames = frames_for(occurrences, parent_id="donner.s1")
    assert [(f.pattern, f.frequency, f.slot_frequencies) for f in frames] == [
        ("subj:NP obj:NP iobj:PP[à]?", 65, [65, 65, 40]),
        ("subj:NP comp:CLAUSE[que]", 10, [10, 10]),
    ]
    apart = frames_for(
        occurrences, parent_id="donner.s1", thresholds=FrameThresholds(merge_optional=False)
    )
    assert [f.pattern for f in apart] == [
        "subj:NP obj:NP iobj:PP[à]",
        "subj:NP obj:NP",
        "subj:NP comp:CLAUSE[que]",
    ]


def test_below_threshold_variant_does_not_make_a_slot_optional() -> None:
    occurrences = _corpus("donner", {"subj:NP obj:NP iobj:PP[à]": 50, "subj:NP obj:NP": 1})
    assert [f.pattern for f in frames_for(occurrences, parent_id="d")] == [
        "subj:NP obj:NP iobj:PP[à]"
    ]


def test_at_most_one_optional_slot_and_no_chains() -> None:
    occurrences = _corpus(
        "permettre",
        {
            "subj:NP iobj:PP[à] comp:INF[de]": 30,
            "subj:NP comp:INF[de]": 20,  # absorbed: iobj optional
            "subj:NP iobj:PP[à]": 12,  # lacks another slot: not absorbed by the first too
            "subj:NP": 8,  # absorbed by "subj:NP iobj:PP[à]", which is still free
        },
    )
    frames = frames_for(occurrences, parent_id="p")
    assert [(f.pattern, f.frequency) for f in frames] == [
        ("subj:NP iobj:PP[à]? comp:INF[de]", 50),
        ("subj:NP iobj:PP[à]?", 20),
    ]
    # Once "subj:NP comp:INF[de]" is absorbed, "subj:NP" cannot chain through it.
    occurrences = _corpus(
        "permettre",
        {"subj:NP iobj:PP[à] comp:INF[de]": 30, "subj:NP comp:INF[de]": 20, "subj:NP": 8},
    )
    assert [(f.pattern, f.frequency) for f in frames_for(occurrences, parent_id="p")] == [
        ("subj:NP iobj:PP[à]? comp:INF[de]", 50),
        ("subj:NP", 8),
    ]
    assert all(f.pattern.count("?") <= 1 for f in frames)


def test_shorter_pattern_goes_to_its_most_frequent_superset() -> None:
    occurrences = _corpus(
        "penser", {"subj:NP": 20, "subj:NP obl:PP[à]": 15, "subj:NP comp:CLAUSE[que]": 40}
    )
    assert [f.pattern for f in frames_for(occurrences, parent_id="p")] == [
        "subj:NP comp:CLAUSE[que]?",
        "subj:NP obl:PP[à]",
    ]


def test_match_frame_honours_optional_slots() -> None:
    frames = [
        Frame(id="d.f1", pattern="subj:NP obj:NP iobj:PP[à]?"),
        Frame(id="d.f2", pattern="subj:NP obj:NP"),
    ]
    assert match_frame(parse_frame("subj:NP obj:NP"), frames) is frames[0]
    assert match_frame(parse_frame("subj:NP obj:NP iobj:PP[à]"), frames) is frames[0]
    assert match_frame(parse_frame("subj:NP iobj:PP[à]"), frames) is None


def test_thresholds_are_checked() -> None:
    with pytest.raises(ValueError, match="min_share"):
        FrameThresholds(min_share=1.5)
    with pytest.raises(ValueError, match="min_count"):
        FrameThresholds(min_count=0)


@settings(max_examples=60, deadline=None)
@given(
    st.dictionaries(
        st.sampled_from(
            [
                "subj:NP",
                "subj:NP obj:NP",
                "subj:NP obj:NP iobj:PP[à]",
                "subj:NP obl:PP[de]",
                "subj:NP obj:NP obl:PP[de]",
                "subj:EXPL refl:CLITIC[se] obl:PP[de]",
                "subj:NP comp:CLAUSE[que]",
            ]
        ),
        st.integers(min_value=1, max_value=40),
        min_size=1,
    ),
    st.integers(min_value=1, max_value=5),
    st.floats(min_value=0.0, max_value=0.3),
)
def test_frames_are_consistent_with_counts(
    counts: dict[str, int], min_count: int, min_share: float
) -> None:
    occurrences = _corpus("verbe", counts)
    thresholds = FrameThresholds(min_count=min_count, min_share=min_share)
    frames = frames_for(occurrences, parent_id="v", thresholds=thresholds)
    total = len(occurrences)
    kept = {p for p, c in counts.items() if c >= min_count and c / total >= min_share}
    # Every kept pattern is realised by exactly one frame; no dropped pattern is.
    for pattern in counts:
        matched = [f for f in frames if match_frame(parse_frame(pattern), [f]) is not None]
        assert len(matched) == (1 if pattern in kept else 0), pattern
    assert sum(f.frequency or 0 for f in frames) == sum(counts[p] for p in kept)
    assert [f.id for f in frames] == [f"v.f{n}" for n in range(1, len(frames) + 1)]
    frequencies = [f.frequency or 0 for f in frames]
    assert frequencies == sorted(frequencies, reverse=True)
    for frame in frames:
        assert frame.slot_frequencies is not None
        assert max(frame.slot_frequencies) == frame.frequency
    # count_frames gives the same frames, with shares of the lemma's occurrences.
    rows = count_frames(occurrences, thresholds)["verbe"] if frames else []
    assert [(r.frame, r.count) for r in rows] == [(f.pattern, f.frequency) for f in frames]
    assert all(abs(r.share - r.count / total) < 1e-12 for r in rows)


def test_order_of_occurrences_does_not_change_frames() -> None:
    occurrences = _corpus(
        "donner", {"subj:NP obj:NP iobj:PP[à]": 9, "subj:NP obj:NP": 9, "subj:NP obj:CLITIC": 9}
    )
    assert frames_for(occurrences, parent_id="d") == frames_for(occurrences[::-1], parent_id="d")


# ---------------------------------------------------------------------------- UD treebanks


@pytest.fixture(scope="module")
def fr_table(ud_dir: Path) -> dict[str, list[FrameCount]]:
    files = sorted(ud_dir.glob("fr_sequoia-ud-*.conllu")) + sorted(
        ud_dir.glob("fr_gsd-ud-*.conllu")
    )
    lemmas = ["donner", "agir", "permettre", "dépendre"]
    return count_frames(iter_occurrences(files, language="fr", lemmas=lemmas))


def test_french_frame_tables(fr_table: dict[str, list[FrameCount]]) -> None:
    # From memory (facts of the trade): s'agir is pronominal, impersonal, with a de-complement;
    # donner has an object and an à-dative; permettre a de-infinitive; dépendre a de-complement.
    agir = fr_table["agir"]
    assert agir[0].frame == "subj:EXPL refl:CLITIC[se] obl:PP[de]"
    assert agir[0].share >= 0.5
    donner = fr_table["donner"]
    assert any("obj:NP" in r.frame and "iobj:" in r.frame for r in donner)
    assert sum(r.share for r in donner if "obj:NP" in r.frame) >= 0.6
    assert sum(r.share for r in fr_table["permettre"] if "comp:INF[de]" in r.frame) >= 0.6
    assert fr_table["dépendre"][0].frame == "subj:NP obl:PP[de]"
    for rows in fr_table.values():
        assert sum(r.share for r in rows) <= 1.0 + 1e-9
        for row in rows:
            assert row.count >= 2 and row.share >= 0.05
