"""Merging induction results into curated sources (lexbuild.editions.merge).

Induction folders are built here directly in the documented format (entries via
``sources.dump_entry``, ``numpy.savez`` centroids, ``assignments.tsv``), so these tests do not
depend on the induction stage.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import itertools
import json
import os
import shutil
import signal
import subprocess
import sys
import time
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from lexbuild.editions.merge import (
    MergeSettings,
    match_senses,
    merge_induction,
    merge_lexicon,
)
from lexbuild.errors import SourceError
from lexbuild.lexicon import ids, sources
from lexbuild.lexicon.model import (
    Entry,
    Example,
    Frame,
    Induction,
    Lexicon,
    LexiconMeta,
    Sense,
    SourceRef,
    Status,
)
from lexbuild.senses.agglomerative import AgglomerativeClusterer as SenseClusterer
from lexbuild.senses.induction_folder import (
    CENTROIDS_FILE,
    InducedFolder,
    read_centroids,
    read_induction,
    write_centroids,
)

PROJECT = Path(__file__).resolve().parent.parent
CORPUS = "brevenn"


# ----------------------------------------------------------------------------- builders


@dataclass
class InducedSense:
    sentences: list[str]  # sentence ids clustered into this sense
    centroid: np.ndarray | None = None
    frames: list[tuple[str, int]] = field(default_factory=lambda: [("subj:NP obj:NP", 5)])
    examples: int = 2  # how many of the sentences become example candidates


def build_induction(folder: Path, run: str, verbs: dict[str, list[InducedSense]]) -> Path:
    """An induction folder in the format of INTERFACES.md (what ``lexbuild induce`` writes)."""
    (folder / "entries").mkdir(parents=True)
    centroids: dict[str, np.ndarray] = {}
    rows = ["lemma\tsense\tcorpus\tsent_id\ttoken"]
    for lemma, senses in verbs.items():
        entry = ids.entry_id(lemma)
        built = []
        for number, spec in enumerate(senses, start=1):
            sid = ids.sense_id(entry, number)
            frames = [
                Frame(id=ids.frame_id(sid, n), pattern=pattern, frequency=count)
                for n, (pattern, count) in enumerate(spec.frames, start=1)
            ]
            examples = [
                Example(
                    id=ids.example_id(sid, n),
                    text=f"Phrase {sentence} : on {lemma} au port.",
                    source=SourceRef(corpus=CORPUS, sentence=sentence),
                    verb=(len(f"Phrase {sentence} : on "), len(f"Phrase {sentence} : on {lemma}")),
                    frame=frames[0].id,
                )
                for n, sentence in enumerate(spec.sentences[: spec.examples], start=1)
            ]
            built.append(
                Sense(
                    id=sid,
                    frames=frames,
                    examples=examples,
                    induction=Induction(
                        cluster_size=len(spec.sentences), threshold=0.5,
                        representation="test-vectors", model="none", centroid=sid, run=run,
                    ),
                )
            )
            if spec.centroid is not None:
                vector = np.asarray(spec.centroid, dtype=np.float32)
                centroids[sid] = vector / np.linalg.norm(vector)
            rows += [f"{lemma}\t{sid}\t{CORPUS}\t{sentence}\t3" for sentence in spec.sentences]
        (folder / "entries" / f"{entry}.yaml").write_text(
            sources.dump_entry(Entry(id=entry, lemma=lemma, senses=built)), encoding="utf-8"
        )
    np.savez(folder / CENTROIDS_FILE, **centroids)  # type: ignore[arg-type]
    (folder / "assignments.tsv").write_text("\n".join(rows) + "\n", encoding="utf-8")
    (folder / "induction.json").write_text(
        json.dumps({"run": run, "representation": {"id": "test-vectors"}, "threshold": 0.5}),
        encoding="utf-8",
    )
    return folder


def meta(retired: Sequence[str] = ()) -> LexiconMeta:
    return LexiconMeta(
        title="Essai", language="fr", edition=1, release_date=dt.date(2026, 12, 1),
        licence="CC-BY-4.0", retired_ids=list(retired),
    )


def build_sources(folder: Path, entries: Sequence[Entry], retired: Sequence[str] = ()) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    sources.write_meta(folder, meta(retired))
    for entry in entries:
        sources.write_entry(folder, entry)
    return folder


def example(sense: str, n: int, sentence: str) -> Example:
    return Example(
        id=ids.example_id(sense, n), text=f"Phrase {sentence}.",
        source=SourceRef(corpus=CORPUS, sentence=sentence), verb=(0, 6),
    )


def curated_sense(entry: str, n: int, sentences: Sequence[str], **fields: object) -> Sense:
    sid = ids.sense_id(entry, n)
    return Sense(
        id=sid,
        frames=[Frame(id=ids.frame_id(sid, 1), pattern="subj:NP obj:NP", frequency=3)],
        examples=[example(sid, k, s) for k, s in enumerate(sentences, start=1)],
        **fields,  # type: ignore[arg-type]
    )


def tree_digest(folder: Path) -> dict[str, str]:
    return {
        str(path.relative_to(folder)): hashlib.sha256(path.read_bytes()).hexdigest()
        for path in sorted(folder.rglob("*"))
        if path.is_file()
    }


def unit(*values: float) -> np.ndarray:
    vector = np.asarray(values, dtype=np.float32)
    return vector / np.linalg.norm(vector)


# ----------------------------------------------------------------------------- matching


def brute_force_best(similarity: np.ndarray, minimum: float) -> float:
    """Reference: best total over every partial one-to-one assignment, by enumeration."""
    rows, cols = similarity.shape
    best = 0.0
    for k in range(min(rows, cols) + 1):
        for chosen_rows in itertools.combinations(range(rows), k):
            for chosen_cols in itertools.permutations(range(cols), k):
                pairs = list(zip(chosen_rows, chosen_cols, strict=True))
                if all(similarity[r, c] >= minimum for r, c in pairs):
                    best = max(best, sum(similarity[r, c] for r, c in pairs))
    return best


@pytest.mark.parametrize("random_state", range(20))
def test_matching_is_optimal_against_brute_force(random_state: int) -> None:
    rng = np.random.default_rng(random_state)
    similarity = rng.random((rng.integers(1, 5), rng.integers(1, 5)))
    pairs = match_senses(similarity, 0.4)
    assert len({r for r, _ in pairs}) == len(pairs) == len({c for _, c in pairs})
    assert all(similarity[r, c] >= 0.4 for r, c in pairs)
    total = sum(similarity[r, c] for r, c in pairs)
    assert total == pytest.approx(brute_force_best(similarity, 0.4))


# ------------------------------------------------------------------------------ merging


def test_new_verb_becomes_draft_entry_with_centroids(tmp_path: Path) -> None:
    src = build_sources(tmp_path / "src", [])
    induced = build_induction(
        tmp_path / "ind", "run1",
        {"hisser": [InducedSense(["a.1", "a.2"], unit(1, 0)), InducedSense(["a.3"], unit(0, 1))]},
    )
    report = merge_induction(induced, src)
    assert report.entries_added == ["hisser"]
    assert report.corpora_declared == ["brevenn"]  # cited by the new examples
    merged = sources.load_lexicon(src).lexicon
    assert [(c.id, c.title) for c in merged.meta.corpora] == [("brevenn", "brevenn")]
    entry = merged.entry("hisser")
    assert entry is not None
    assert [s.id for s in entry.senses] == ["hisser.s1", "hisser.s2"]
    assert {s.status for s in entry.senses} == {Status.DRAFT}
    assert entry.senses[0].induction is not None
    assert entry.senses[0].induction.centroid == "hisser.s1"
    assert entry.senses[0].examples[0].frame == "hisser.s1.f1"
    # numpy reads the sources' centroid table back (reference reader: numpy.load)
    with np.load(src / CENTROIDS_FILE) as table:
        assert sorted(table.files) == ["hisser.s1", "hisser.s2"]
        np.testing.assert_allclose(table["hisser.s2"], unit(0, 1))
    assert not list(tmp_path.glob(".src*")), "staging folder left behind"


def _sentence_ids(sense: Sense) -> list[str]:
    return [x.source.sentence for x in sense.examples if x.source is not None]


def test_sample_lexicon_curation_survives(tmp_path: Path, sample_lexicon_dir: Path) -> None:
    src = tmp_path / "src"
    shutil.copytree(sample_lexicon_dir, src)
    path = src / "entries" / "agir.yaml"
    original = path.read_text(encoding="utf-8")
    assert "\nlemma: agir\n" in original
    edited = original.replace("\nlemma: agir\n", "\nlemma: agir  # citation\n")
    path.write_text("# relu le 2 décembre\n" + edited, encoding="utf-8")  # an editor's comments
    comments = [
        "# relu le 2 décembre",
        "lemma: agir  # citation",
        *(line for line in original.splitlines() if line.startswith("#")),
    ]
    before = sources.load_lexicon(src).lexicon.entry("agir")
    assert before is not None and len(before.senses) == 2
    old1, old2 = before.senses
    new_pattern = "subj:EXPL refl:CLITIC[se] comp:CLAUSE[que]"
    assert new_pattern not in {f.pattern for f in old2.frames}
    # Induced order is the reverse of the curated one: s1 holds the impersonal uses.
    induced = build_induction(
        tmp_path / "ind", "run2",
        {
            "agir": [
                InducedSense(
                    [*_sentence_ids(old2), "g.10", "g.11"],
                    frames=[(old2.frames[0].pattern, 30), (new_pattern, 4)],
                    examples=len(old2.examples) + 2,
                ),
                InducedSense([*_sentence_ids(old1), "p.20"],
                             frames=[(old1.frames[0].pattern, 14)]),
            ]
        },
    )
    report = merge_induction(induced, src)
    after = sources.load_lexicon(src).lexicon.entry("agir")
    assert after is not None
    assert [(m.induced, m.sense) for m in report.matched] == [
        ("agir.s1", "agir.s2"), ("agir.s2", "agir.s1"),
    ]
    assert [s.id for s in after.senses] == ["agir.s1", "agir.s2"]
    for old, new in zip(before.senses, after.senses, strict=True):
        assert (new.gloss, new.status, new.note) == (old.gloss, old.status, old.note)
        assert new.examples[: len(old.examples)] == old.examples
        assert [(f.id, f.pattern) for f in new.frames[: len(old.frames)]] == [
            (f.id, f.pattern) for f in old.frames
        ]
    s2 = after.senses[1]
    assert s2.frames[0].frequency == 30  # refreshed
    assert [f.frequency for f in s2.frames[1: len(old2.frames)]] == [
        f.frequency for f in old2.frames[1:]
    ]  # not seen this time: kept as curated
    n = len(old2.frames)
    assert (s2.frames[n].id, s2.frames[n].pattern) == (f"agir.s2.f{n + 1}", new_pattern)
    added = s2.examples[len(old2.examples):]
    expected = min(2, MergeSettings().max_examples - len(old2.examples))
    assert [x.id for x in added] == [
        f"agir.s2.x{len(old2.examples) + k}" for k in range(1, expected + 1)
    ]
    assert [x.source for x in added] == [
        SourceRef(corpus=CORPUS, sentence=f"g.1{k}") for k in range(expected)
    ]
    # the editor's comments survive the machine update
    text = path.read_text(encoding="utf-8")
    assert all(line in text.splitlines() for line in comments)
    assert report.files_written == ["entries/agir.yaml"]  # the induction had no centroids


def test_unsupported_sense_is_flagged_not_deleted(tmp_path: Path) -> None:
    entry = Entry(id="ramer", lemma="ramer", senses=[
        curated_sense("ramer", 1, ["r.1", "r.2"], gloss="avancer à la rame",
                      status=Status.APPROVED),
        curated_sense("ramer", 2, ["r.3", "r.4"], gloss="peiner", status=Status.APPROVED),
    ])
    src = build_sources(tmp_path / "src", [entry])
    induced = build_induction(tmp_path / "ind", "run7",
                              {"ramer": [InducedSense(["r.1", "r.2", "r.9"])]})
    report = merge_induction(induced, src)
    after = sources.load_lexicon(src).lexicon.entry("ramer")
    assert after is not None
    assert [s.id for s in after.senses] == ["ramer.s1", "ramer.s2"]
    assert report.unsupported == ["ramer.s2"]
    assert after.senses[1].flags == ["unsupported:run7"]
    assert after.senses[1].status is Status.APPROVED
    # A later run that finds it again clears the flag.
    induced2 = build_induction(tmp_path / "ind2", "run8", {
        "ramer": [InducedSense(["r.1", "r.2"]), InducedSense(["r.3", "r.4"])]
    })
    merge_induction(induced2, src)
    again = sources.load_lexicon(src).lexicon.entry("ramer")
    assert again is not None and again.senses[1].flags == []


def test_split_is_reported_and_not_applied_to_approved_sense(tmp_path: Path) -> None:
    approved = curated_sense("tenir", 1, ["t.1", "t.2", "t.3", "t.4"], gloss="garder en main",
                             status=Status.APPROVED)
    src = build_sources(tmp_path / "src", [Entry(id="tenir", lemma="tenir", senses=[approved])])
    induced = build_induction(tmp_path / "ind", "r", {"tenir": [
        InducedSense(["t.1", "t.2", "t.3", "t.8"]), InducedSense(["t.4", "t.9"]),
    ]})
    report = merge_induction(induced, src)
    assert report.splits == [
        {"entry": "tenir", "sense": "tenir.s1", "into": ["tenir.s1", "tenir.s2"]}
    ]
    after = sources.load_lexicon(src).lexicon.entry("tenir")
    assert after is not None
    s1, s2 = after.senses
    assert s1.examples[:4] == approved.examples and s1.status is Status.APPROVED
    assert (s2.status, s2.flags) == (Status.DRAFT, ["split-from:tenir.s1"])
    assert "Proposed splits" in report.to_markdown()


def test_merge_is_reported_and_flagged(tmp_path: Path) -> None:
    entry = Entry(id="porter", lemma="porter", senses=[
        curated_sense("porter", 1, ["p.1", "p.2", "p.3"], status=Status.APPROVED),
        curated_sense("porter", 2, ["p.4"], status=Status.REVIEWED),
    ])
    src = build_sources(tmp_path / "src", [entry])
    induced = build_induction(tmp_path / "ind", "r",
                              {"porter": [InducedSense(["p.1", "p.2", "p.3", "p.4"])]})
    report = merge_induction(induced, src)
    assert report.merges == [
        {"entry": "porter", "senses": ["porter.s1", "porter.s2"], "into": "porter.s1"}
    ]
    after = sources.load_lexicon(src).lexicon.entry("porter")
    assert after is not None
    assert after.senses[1].flags == ["unsupported:r", "merge-into:porter.s1"]
    assert after.senses[1].status is Status.REVIEWED
    data = json.loads(report.to_json())
    assert data["summary"]["merges"] == 1 and data["summary"]["unsupported"] == 1


def test_retired_ids_are_never_reused(tmp_path: Path) -> None:
    entry = Entry(id="virer", lemma="virer", senses=[curated_sense("virer", 1, ["v.1"])])
    src = build_sources(tmp_path / "src", [entry], retired=["virer.s2", "virer.s1.f2"])
    induced = build_induction(tmp_path / "ind", "r", {"virer": [
        InducedSense(["v.1"], frames=[("subj:NP obj:NP", 4), ("subj:NP", 2)]),
        InducedSense(["v.5", "v.6"]),
    ]})
    merge_induction(induced, src)
    after = sources.load_lexicon(src).lexicon.entry("virer")
    assert after is not None
    assert [s.id for s in after.senses] == ["virer.s1", "virer.s3"]
    assert [f.id for f in after.senses[0].frames] == ["virer.s1.f1", "virer.s1.f3"]


def test_retired_entry_id_is_not_added_back(tmp_path: Path) -> None:
    src = build_sources(tmp_path / "src", [], retired=["larguer"])
    induced = build_induction(tmp_path / "ind", "r", {"larguer": [InducedSense(["l.1"])]})
    report = merge_induction(induced, src)
    assert [row["entry"] for row in report.entries_skipped] == ["larguer"]
    assert not (src / "entries" / "larguer.yaml").exists()


def test_dry_run_writes_nothing(tmp_path: Path, sample_lexicon_dir: Path) -> None:
    src = tmp_path / "src"
    shutil.copytree(sample_lexicon_dir, src)
    before = tree_digest(src)
    induced = build_induction(tmp_path / "ind", "r", {"hisser": [InducedSense(["h.1"])]})
    report = merge_induction(induced, src, dry_run=True)
    assert report.dry_run and report.entries_added == ["hisser"]
    assert "dry run" in report.to_markdown()
    assert tree_digest(src) == before


def test_bad_assignments_line_is_named(tmp_path: Path) -> None:
    induced = build_induction(tmp_path / "ind", "r", {"hisser": [InducedSense(["h.1"])]})
    with (induced / "assignments.tsv").open("a", encoding="utf-8") as handle:
        handle.write("hisser\thisser.s1\tbrevenn\n")
    with pytest.raises(SourceError) as caught:
        read_induction(induced)
    assert caught.value.location is not None and caught.value.location.line == 3
    assert "assignments.tsv" in str(caught.value)


def test_centroid_file_is_deterministic_and_numpy_readable(tmp_path: Path) -> None:
    table = {"b.s1": unit(1, 2, 3), "a.s1": unit(3, 2, 1)}
    write_centroids(tmp_path / "one.npz", table)
    time.sleep(1.1)  # zip entries carry a time stamp: it must not be the clock's
    write_centroids(tmp_path / "two.npz", dict(reversed(table.items())))
    assert (tmp_path / "one.npz").read_bytes() == (tmp_path / "two.npz").read_bytes()
    back = read_centroids(tmp_path / "one.npz")
    assert sorted(back) == ["a.s1", "b.s1"]
    np.testing.assert_array_equal(back["b.s1"], table["b.s1"])


# -------------------------------------------------------------- three growing inductions


def _induce_synthetic(
    folder: Path, run: str, corpus: dict[str, np.ndarray], order_state: int
) -> Path:
    """Cluster synthetic vectors with the project's real clusterer, write an induction."""
    names = sorted(corpus)
    rng = np.random.default_rng(order_state)
    rng.shuffle(names)  # a different occurrence order each run: induced numbering changes
    X = np.stack([corpus[name] for name in names])
    clusterer = SenseClusterer(threshold=0.5, min_cluster_size=2).fit(X)
    senses = []
    for label in range(clusterer.n_clusters_):
        members = sorted(n for n, lab in zip(names, clusterer.labels_, strict=True) if lab == label)
        senses.append(InducedSense(members, clusterer.centroids_[label], examples=2))
    return build_induction(folder, run, {"amarrer": senses})


def test_ids_stable_over_three_growing_inductions(tmp_path: Path) -> None:
    rng = np.random.default_rng(3)
    directions = np.eye(12)[:3]  # three well-separated senses (cosine distance 1 apart)

    def sentences(sense: int, start: int, stop: int) -> dict[str, np.ndarray]:
        return {
            f"s{sense}.{k}": directions[sense] + rng.normal(0, 0.08, 12)
            for k in range(start, stop)
        }

    corpus = {**sentences(0, 0, 10), **sentences(1, 0, 10)}
    src = build_sources(tmp_path / "src", [])
    merge_induction(_induce_synthetic(tmp_path / "i1", "run1", corpus, 1), src)
    first = sources.load_lexicon(src).lexicon.entry("amarrer")
    assert first is not None and len(first.senses) == 2
    sense_of = {  # which synthetic sense each id stands for
        s.id: s.examples[0].source.sentence.split(".")[0]  # type: ignore[union-attr]
        for s in first.senses
    }
    # the editor approves and glosses the first sense
    edited = first.model_copy(update={"senses": [
        first.senses[0].model_copy(update={"status": Status.APPROVED, "gloss": "attacher"}),
        first.senses[1],
    ]})
    sources.write_entry(src, edited)

    corpus |= {**sentences(0, 10, 25), **sentences(1, 10, 25)}
    report2 = merge_induction(_induce_synthetic(tmp_path / "i2", "run2", corpus, 2), src)
    assert report2.senses_added == [] and len(report2.matched) == 2
    corpus |= {**sentences(0, 25, 30), **sentences(1, 25, 30), **sentences(2, 0, 15)}
    report3 = merge_induction(_induce_synthetic(tmp_path / "i3", "run3", corpus, 3), src)
    final = sources.load_lexicon(src).lexicon.entry("amarrer")
    assert final is not None
    assert [s.id for s in final.senses] == ["amarrer.s1", "amarrer.s2", "amarrer.s3"]
    for sense in final.senses[:2]:
        assert {x.source.sentence.split(".")[0] for x in sense.examples} == {  # type: ignore[union-attr]
            sense_of[sense.id]
        }
        assert sense.flags == []
    assert final.senses[2].examples[0].source.sentence.startswith("s2.")  # type: ignore[union-attr]
    assert (final.senses[0].status, final.senses[0].gloss) == (Status.APPROVED, "attacher")
    assert [row["sense"] for row in report3.senses_added] == ["amarrer.s3"]
    assert final.senses[0].induction is not None and final.senses[0].induction.run == "run3"


# ---------------------------------------------------------------- interrupted merge


def _run_merge(induced: Path, src: Path, pause: str | None) -> subprocess.Popen[bytes]:
    env = dict(os.environ)
    env.pop("LEXBUILD_MERGE_PAUSE", None)
    if pause is not None:
        env["LEXBUILD_MERGE_PAUSE"] = pause
    code = (
        "import sys; from lexbuild.editions.merge import merge_induction; "
        "merge_induction(sys.argv[1], sys.argv[2])"
    )
    return subprocess.Popen(
        [sys.executable, "-c", code, str(induced), str(src)], env=env, cwd=PROJECT,
    )


def test_killed_merge_leaves_sources_untouched(
    tmp_path: Path, sample_lexicon_dir: Path
) -> None:
    verbs = {
        lemma: [InducedSense([f"{lemma}.{k}" for k in range(3)])]
        for lemma in ("hisser", "larguer", "virer", "gréer", "caréner")
    }
    induced = build_induction(tmp_path / "ind", "r", verbs)
    src = tmp_path / "work" / "src"
    shutil.copytree(sample_lexicon_dir, src)
    before = tree_digest(src)
    process = _run_merge(induced, src, pause="2")
    deadline = time.monotonic() + 60
    stage: list[Path] = []
    while time.monotonic() < deadline:  # wait until files are being written in the stage
        stage = [p for p in src.parent.glob(".src.*.partial") if (p / "entries").is_dir()]
        if stage and any((stage[0] / "entries").glob("hisser.yaml")):
            break
        time.sleep(0.05)
    assert stage, "the merge never started writing"
    process.send_signal(signal.SIGKILL)
    process.wait()
    assert tree_digest(src) == before
    # a clean rerun merges fully, the same bytes as a merge that was never interrupted
    reference = tmp_path / "ref" / "src"
    shutil.copytree(sample_lexicon_dir, reference)
    merge_induction(induced, reference)
    assert _run_merge(induced, src, pause=None).wait() == 0
    assert tree_digest(src) == tree_digest(reference) != before


# ------------------------------------------------------------------- property tests

POOL = [f"q.{n}" for n in range(12)]


@st.composite
def curated_lexicons(draw: st.DrawFn) -> Lexicon:
    """One verb with 1-4 senses carrying random editor work, and a few retired ids."""
    entry_id = "filer"
    senses = []
    for n in range(1, draw(st.integers(1, 4)) + 1):
        sid = ids.sense_id(entry_id, n)
        sentences = draw(st.lists(st.sampled_from(POOL), max_size=4, unique=True))
        hand_frames = draw(st.lists(
            st.sampled_from(["subj:NP", "subj:NP obl:PP[de]", "subj:NP comp:CLAUSE[que]"]),
            max_size=2, unique=True,
        ))
        senses.append(Sense(
            id=sid,
            gloss=draw(st.sampled_from(["", "glisser", "partir vite"])),
            status=draw(st.sampled_from(list(Status))),
            note=draw(st.sampled_from([None, "à revoir"])),
            frames=[Frame(id=ids.frame_id(sid, k), pattern=p, frequency=1)
                    for k, p in enumerate(hand_frames, start=1)],
            examples=[example(sid, k, s) for k, s in enumerate(sentences, start=1)],
        ))
    order = draw(st.permutations(senses))  # manual sense order
    retired = draw(st.lists(st.sampled_from(
        [f"{entry_id}.s{n}" for n in range(5, 8)] + [f"{entry_id}.s1.f{n}" for n in range(3, 5)]
    ), unique=True))
    return Lexicon(meta=meta(retired), entries=[Entry(id=entry_id, lemma="filer",
                                                      senses=list(order))])


@st.composite
def inductions(draw: st.DrawFn) -> InducedFolder:
    n = draw(st.integers(1, 4))
    senses = []
    assignments: dict[str, set[tuple[str, str]]] = {}
    centroids: dict[str, np.ndarray] = {}
    for k in range(1, n + 1):
        sid = f"filer.s{k}"
        sentences = draw(st.lists(st.sampled_from(POOL), min_size=1, max_size=6, unique=True))
        patterns = draw(st.lists(st.sampled_from(
            ["subj:NP", "subj:NP obj:NP", "subj:NP obl:PP[de]"]), min_size=1, max_size=2,
            unique=True))
        frames = [Frame(id=f"{sid}.f{j}", pattern=p, frequency=draw(st.integers(1, 50)))
                  for j, p in enumerate(patterns, start=1)]
        senses.append(Sense(
            id=sid, frames=frames,
            examples=[Example(id=f"{sid}.x{j}", text=f"Phrase {s}.",
                              source=SourceRef(corpus=CORPUS, sentence=s), verb=(0, 6),
                              frame=frames[0].id)
                      for j, s in enumerate(sentences[:3], start=1)],
            induction=Induction(cluster_size=len(sentences), threshold=0.5,
                                representation="t", centroid=sid, run="p"),
        ))
        assignments[sid] = {(CORPUS, s) for s in sentences}
        centroids[sid] = unit(*draw(st.lists(st.floats(0.1, 1.0), min_size=3, max_size=3)))
    return InducedFolder({"run": "p"}, [Entry(id="filer", lemma="filer", senses=senses)],
                           centroids, assignments)


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(curated_lexicons(), inductions(), inductions())
def test_curated_fields_never_lost_and_ids_never_reused(
    lexicon: Lexicon, first: InducedFolder, second: InducedFolder
) -> None:
    state: Lexicon = lexicon
    centroids: dict[str, np.ndarray] = {}
    for result in (first, second):
        previous = state
        state, centroids, _ = merge_lexicon(state, centroids, result, MergeSettings())
        old_entry, new_entry = previous.entries[0], state.entries[0]
        # sense order, ids, curated fields, frames (id + pattern) and examples all kept
        assert [s.id for s in new_entry.senses[: len(old_entry.senses)]] == [
            s.id for s in old_entry.senses
        ]
        for old, new in zip(old_entry.senses, new_entry.senses, strict=False):
            assert (new.gloss, new.status, new.note) == (old.gloss, old.status, old.note)
            assert [(f.id, f.pattern) for f in new.frames[: len(old.frames)]] == [
                (f.id, f.pattern) for f in old.frames
            ]
            assert new.examples[: len(old.examples)] == old.examples
        # every id handed out is new: never one in use, never a retired one
        added = state.all_ids() - previous.all_ids()
        assert not added & previous.all_ids()
        assert not added & set(lexicon.meta.retired_ids)
        listed = [i for s in new_entry.senses for i in
                  [s.id, *(f.id for f in s.frames), *(x.id for x in s.examples)]]
        assert len(listed) == len(set(listed)), "duplicate id"
        for sense in new_entry.senses[len(old_entry.senses):]:
            assert sense.status is Status.DRAFT


@settings(max_examples=100, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(inductions(), inductions(), st.data())
def test_edits_made_after_a_merge_survive_the_next(
    first: InducedFolder, second: InducedFolder, data: st.DataObject
) -> None:
    """Machine proposes, editor curates the proposal, machine proposes again."""
    empty = Lexicon(meta=meta(["filer.s9"]), entries=[])
    state, centroids, _ = merge_lexicon(empty, {}, first)
    entry = state.entries[0]
    senses = []
    for sense in entry.senses:
        update: dict[str, object] = {}
        if data.draw(st.booleans()):
            update["gloss"] = data.draw(st.sampled_from(["tordre", "s'en aller", "suivre"]))
        if data.draw(st.booleans()):
            update["status"] = data.draw(st.sampled_from(list(Status)))
        if data.draw(st.booleans()):
            update["note"] = "vu par l'éditrice"
        if data.draw(st.booleans()):
            update["frames"] = [*sense.frames, Frame(id=f"{sense.id}.f7",
                                                     pattern="subj:NP comp:INF[de]")]
        if data.draw(st.booleans()):
            update["examples"] = [*sense.examples, example(sense.id, 8, "main.1")]
        if data.draw(st.booleans()) and sense.examples:
            update["examples"] = sense.examples[1:]  # the editor deleted a candidate
        senses.append(sense.model_copy(update=update))
    curated = data.draw(st.permutations(senses))
    edited = state.model_copy(update={"entries": [entry.model_copy(update={"senses": curated})]})
    merged, _, _ = merge_lexicon(edited, centroids, second)
    after = merged.entries[0].senses
    assert [s.id for s in after[: len(curated)]] == [s.id for s in curated]
    for old, new in zip(curated, after, strict=False):
        assert (new.gloss, new.status, new.note) == (old.gloss, old.status, old.note)
        assert new.examples[: len(old.examples)] == old.examples
        assert [(f.id, f.pattern) for f in new.frames[: len(old.frames)]] == [
            (f.id, f.pattern) for f in old.frames
        ]
    added = merged.all_ids() - edited.all_ids()
    assert "filer.s9" not in added and not added & edited.all_ids()


def test_reads_what_the_induction_stage_writes(tmp_path: Path) -> None:
    """Format compatibility with the real writer, lexbuild.senses.induce.write_induction."""
    from lexbuild.senses.induce import Assignment
    from lexbuild.senses.inducer import InductionResult as Written
    from lexbuild.senses.induction_folder import write_induction
    from lexbuild.senses.settings import InductionSettings

    sid = "hisser.s1"
    entry = Entry(id="hisser", lemma="hisser", senses=[Sense(
        id=sid, frames=[Frame(id=f"{sid}.f1", pattern="subj:NP obj:NP", frequency=2)],
        induction=Induction(cluster_size=2, threshold=0.6, representation="r", centroid=sid,
                            run="run-x"),
    )])
    written = Written(
        entries=[entry], centroids={sid: unit(1, 1)},
        assignments=[Assignment("hisser", sid, "c.conllu", 'odd "id"\t2', 3),
                     Assignment("hisser", sid, "c.conllu", "s2", 1)],
        settings=InductionSettings(), representation="r", model=None,
        representation_settings={}, run="run-x",
    )
    folder = write_induction(written, tmp_path / "ind")
    result = read_induction(folder)
    assert result.run == "run-x"
    assert result.assignments == {sid: {("c.conllu", 'odd "id"\t2'), ("c.conllu", "s2")}}
    np.testing.assert_array_equal(result.centroids[sid], unit(1, 1))
    assert result.entries == [entry]


def test_merging_the_same_induction_twice_changes_nothing(tmp_path: Path) -> None:
    # "m.3" holds the verb twice, once in each sense: it must not read as a split or merge.
    induced = build_induction(tmp_path / "ind", "r", {"mouiller": [
        InducedSense(["m.1", "m.2", "m.3"], unit(1, 0.1), examples=3),
        InducedSense(["m.3", "m.4", "m.5"], unit(0.1, 1), examples=3),
    ]})
    src = build_sources(tmp_path / "src", [])
    first = merge_induction(induced, src)
    assert first.splits == [] and first.merges == []
    before = tree_digest(src)
    again = merge_induction(induced, src)
    assert (again.files_written, again.splits, again.merges) == ([], [], [])
    assert [m.similarity for m in again.matched] == [1.0, 1.0]
    assert tree_digest(src) == before


def test_fallback_swap_and_recovery(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, sample_lexicon_dir: Path
) -> None:
    """Where renameat2 is missing: two renames, and a crash between them is undone."""
    import lexbuild._atomic as atomic_module
    import lexbuild.editions.merge as merge_module

    monkeypatch.setattr(atomic_module, "exchange_dirs", lambda a, b: False)
    induced = build_induction(tmp_path / "ind", "r", {"hisser": [InducedSense(["h.1"])]})
    src = tmp_path / "src"
    shutil.copytree(sample_lexicon_dir, src)
    merge_induction(induced, src)
    assert (src / "entries" / "hisser.yaml").is_file()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["ind", "src"]
    # a crash after the first rename: the sources sit in the backup folder
    before = tree_digest(src)
    backup = tmp_path / ".src.swap-backup"
    os.rename(src, backup)
    assert merge_module.recover_interrupted(src)
    assert tree_digest(src) == before and not backup.exists()


def test_new_corpus_matches_by_centroid_alone(tmp_path: Path) -> None:
    """Examples from a corpus the new run did not see neither help nor hurt the match."""
    src = build_sources(tmp_path / "src", [])
    merge_induction(build_induction(tmp_path / "i1", "r1", {"caler": [
        InducedSense(["a.1", "a.2"], unit(1, 0, 0.1)),
        InducedSense(["a.3", "a.4"], unit(0, 1, 0.1)),
    ]}), src)
    report = merge_induction(build_induction(tmp_path / "i2", "r2", {"caler": [
        InducedSense(["b.1", "b.2"], unit(0.1, 1, 0.1)), InducedSense(["b.3"], unit(1, 0.1, 0.1)),
    ]}), src)
    assert [(m.induced, m.sense, m.shared_examples) for m in report.matched] == [
        ("caler.s1", "caler.s2", None), ("caler.s2", "caler.s1", None),
    ]
    assert report.senses_added == [] and report.unsupported == []


def test_second_concurrent_merge_is_refused(tmp_path: Path, sample_lexicon_dir: Path) -> None:
    from lexbuild.errors import MergeError

    induced = build_induction(tmp_path / "ind", "r", {"hisser": [InducedSense(["h.1"])]})
    src = tmp_path / "work" / "src"
    shutil.copytree(sample_lexicon_dir, src)
    process = _run_merge(induced, src, pause="3")
    try:
        deadline = time.monotonic() + 60
        while time.monotonic() < deadline and not list(src.parent.glob(".src.*.partial")):
            time.sleep(0.05)
        with pytest.raises(MergeError, match="another merge"):
            merge_induction(induced, src)
    finally:
        process.send_signal(signal.SIGKILL)
        process.wait()
    merge_induction(induced, src)  # the killed merge's lock went with its process
    assert (src / "entries" / "hisser.yaml").is_file()
