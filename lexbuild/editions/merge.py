"""Bring an induction result into the curated YAML sources without losing an editor's work.

Inputs: an induction folder (``induction.json``, ``entries/*.yaml``, ``centroids.npz``,
``assignments.tsv``; read by ``lexbuild.senses.induction_folder``) and a sources folder. The
similarity and the one-to-one matching live in ``lexbuild.editions.matching``, the report in
``lexbuild.editions.merge_report``, the folder swap in ``lexbuild._atomic``.

Matching. For each induced verb, the induced senses are matched one-to-one to the existing
senses of the entries with the same lemma and part of speech, by the Hungarian method
(``scipy.optimize.linear_sum_assignment``) on a similarity that averages what is known of

* shared examples: the share of an existing sense's example sentences (``SourceRef``) that the
  induced sense clustered (its rows of ``assignments.tsv`` plus its own examples), counting only
  the sentences this run clustered at all, into one sense of the verb; and
* centroid cosine: the induced centroid against the centroid recorded for the existing sense;

pairs below ``MergeSettings.min_similarity`` stay unmatched.

Where existing senses' centroids live: ``SOURCES/centroids.npz`` (``CENTROIDS_FILE``), one
float32 L2-normalised vector per *curated sense id*. Every merge copies the centroid of each
matched or newly added induced sense there under the sense's id in the sources, and the sense's
``induction.centroid`` names that key; an unmatched sense keeps the centroid it had. A centroid of
another dimension (another representation) is ignored: the shared examples decide alone.

What the machine may change and what it never touches:

* never: entry and sense ids, lemma, part of speech, notes, glosses, statuses, the order of the
  senses, any frame id or pattern, any existing example; no sense or entry is ever removed;
* a matched sense gets refreshed frame frequencies, new frames (fresh ids), new example
  candidates (fresh ids, up to ``max_examples`` per sense, never a sentence the entry already
  cites) and the new induction provenance; a matched *retired* sense stays retired and only gets
  frequencies and provenance;
* an unmatched induced sense becomes a new draft sense, appended, with a fresh id from
  ``ids.next_free_id`` over every id in use or retired (``meta.retired_ids``): ids are never reused;
* an existing sense that the induction no longer supports is flagged ``unsupported:<run>``;
* a corpus cited by an added example and not declared in ``lexicon.yaml`` is declared there
  (id = the corpus name, path from ``induction.json`` when known); nothing else in the metadata
  changes;
* splits (one existing sense's examples spread over several induced senses) and merges (one
  induced sense holding examples of several existing senses) are reported and flagged
  (``split-from:<id>``, ``merge-into:<id>``), never applied to the existing senses.

Flags with those three prefixes are the merge's own: each merge recomputes them for the entries
it touches; other flags are left alone.

Atomicity: the whole sources folder is copied to a staging sibling, updated there, and swapped in
by ``_atomic.swap_dir``: one ``renameat2(RENAME_EXCHANGE)`` where the system has it (Linux);
elsewhere two renames with a backup folder that ``recover_interrupted`` puts back. An
interrupted merge leaves the sources untouched or fully merged; a staging folder
``.<name>.*.partial`` may be left behind and can be deleted. One merge at a time: an advisory
lock (``flock``) on the sources folder refuses a second concurrent merge and dies with its
process. ``LEXBUILD_MERGE_PAUSE`` (seconds) sleeps after each staged file: a test hook to
interrupt a merge half-way.
"""

from __future__ import annotations

import contextlib
import os
import shutil
import time
from collections.abc import Iterator, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import numpy.typing as npt

from lexbuild._atomic import recover_swap, staging_dir, swap_dir
from lexbuild.editions.matching import (
    MergeSettings,
    combined_similarity,
    example_key,
    match_senses,
    sentence_of,
)
from lexbuild.editions.matching import cosine as centroid_cosine
from lexbuild.editions.merge_report import MergeReport, SenseMatch
from lexbuild.errors import MergeError, SourceLocation
from lexbuild.lexicon import ids
from lexbuild.lexicon.model import (
    Corpus,
    Entry,
    Example,
    Frame,
    Lexicon,
    LexiconMeta,
    Sense,
    Status,
)
from lexbuild.senses.induction_folder import (
    CENTROIDS_FILE,
    InducedFolder,
    read_centroids,
    read_induction,
    write_centroids,
)

__all__ = [
    "FLAG_PREFIXES",
    "MergeReport",
    "MergeSettings",
    "SenseMatch",
    "match_senses",
    "merge_induction",
    "merge_lexicon",
    "recover_interrupted",
]

PAUSE_ENV = "LEXBUILD_MERGE_PAUSE"
UNSUPPORTED = "unsupported:"
SPLIT_FROM = "split-from:"
MERGE_INTO = "merge-into:"
FLAG_PREFIXES = (UNSUPPORTED, SPLIT_FROM, MERGE_INTO)

Vector = npt.NDArray[np.float32]
Sentence = tuple[str, str]  # (corpus, sentence id)


# -------------------------------------------------------------------------------- merging


@dataclass
class _Pools:
    used: set[str]  # every id in use or retired, plus those handed out in this merge

    def fresh(self, parent: str, kind: str) -> str:
        new = ids.next_free_id(parent, kind, self.used)
        self.used.add(new)
        return new


def _strip_own_flags(flags: Sequence[str]) -> list[str]:
    return [flag for flag in flags if not flag.startswith(FLAG_PREFIXES)]


def _add_flag(sense: Sense, flag: str) -> Sense:
    if flag in sense.flags:
        return sense
    return sense.model_copy(update={"flags": [*sense.flags, flag]})


def _refresh(
    sense: Sense,
    induced: Sense,
    run: str,
    pools: _Pools,
    cited: set[tuple[str, str]],
    settings: MergeSettings,
    report: MergeReport,
) -> Sense:
    """A matched existing sense with the induction's news; editor content wins."""
    induced_frames = {frame.pattern: frame for frame in induced.frames}
    frames: list[Frame] = []
    pattern_to_id: dict[str, str | None] = {}
    for frame in sense.frames:
        fresh = induced_frames.get(frame.pattern)
        if fresh is not None and (
            fresh.frequency != frame.frequency or fresh.slot_frequencies != frame.slot_frequencies
        ):
            report.frequencies_refreshed.append(
                {"frame": frame.id or f"{sense.id}:{frame.pattern}", "old": frame.frequency,
                 "new": fresh.frequency}
            )
            frame = frame.model_copy(
                update={"frequency": fresh.frequency, "slot_frequencies": fresh.slot_frequencies}
            )
        frames.append(frame)
        pattern_to_id.setdefault(frame.pattern, frame.id)
    retired = sense.status is Status.RETIRED
    examples = list(sense.examples)
    if not retired:
        for pattern, fresh in induced_frames.items():
            if pattern in pattern_to_id:
                continue
            new_id = pools.fresh(sense.id, "f")
            frames.append(fresh.model_copy(update={"id": new_id}))
            pattern_to_id[pattern] = new_id
            report.frames_added.append({"frame": new_id, "pattern": pattern})
        examples += _candidates(sense.id, induced, pattern_to_id, len(examples), pools, cited,
                                settings, report)
    induction = sense.induction
    if induced.induction is not None:
        induction = induced.induction.model_copy(update={"centroid": sense.id, "run": run})
    return sense.model_copy(
        update={"frames": frames, "examples": examples, "induction": induction}
    )


def _candidates(
    sense_id: str,
    induced: Sense,
    pattern_to_id: Mapping[str, str | None],
    have: int,
    pools: _Pools,
    cited: set[tuple[str, str]],
    settings: MergeSettings,
    report: MergeReport,
) -> list[Example]:
    induced_patterns = {frame.id: frame.pattern for frame in induced.frames if frame.id}
    added: list[Example] = []
    for example in induced.examples:
        if have + len(added) >= settings.max_examples:
            break
        key = example_key(example)
        if key in cited:
            continue
        cited.add(key)
        new_id = pools.fresh(sense_id, "x")
        pattern = induced_patterns.get(example.frame) if example.frame else None
        frame = pattern_to_id.get(pattern) if pattern is not None else None
        added.append(example.model_copy(update={"id": new_id, "frame": frame}))
        report.examples_added.append(
            {"example": new_id, "source": "#".join(key) if key[0] else "(no source)"}
        )
    return added


def _new_sense(
    entry_id: str,
    induced: Sense,
    run: str,
    pools: _Pools,
    cited: set[tuple[str, str]],
    settings: MergeSettings,
) -> Sense:
    sense_id = pools.fresh(entry_id, "s")
    frames: list[Frame] = []
    pattern_to_id: dict[str, str | None] = {}
    for frame in induced.frames:
        if frame.pattern in pattern_to_id:
            continue
        new_id = pools.fresh(sense_id, "f")
        frames.append(frame.model_copy(update={"id": new_id}))
        pattern_to_id[frame.pattern] = new_id
    scratch = MergeReport(run=run)  # a new sense's own frames/examples are not listed one by one
    examples = _candidates(sense_id, induced, pattern_to_id, 0, pools, cited, settings, scratch)
    induction = (
        induced.induction.model_copy(update={"centroid": sense_id, "run": run})
        if induced.induction is not None
        else None
    )
    return Sense(
        id=sense_id,
        gloss=induced.gloss,
        status=Status.DRAFT,
        frames=frames,
        examples=examples,
        flags=_strip_own_flags(induced.flags),
        induction=induction,
    )


def _coverage(
    existing: Sequence[Sense], induced: Sequence[Sense], result: InducedFolder
) -> tuple[list[int], npt.NDArray[np.int64]]:
    """For each existing sense, how many of its example sentences this run clustered at all,
    and how many of them each induced sense holds.

    Example sentences the run did not cluster (another corpus, a sentence since removed) say
    nothing either way and are not counted. A sentence clustered into two or more induced senses
    of the verb (the verb occurs twice in it, in different senses) does not tell the senses apart
    and is left out too.
    """
    clustered: list[set[Sentence]] = []
    seen: dict[Sentence, int] = {}
    for sense in induced:
        sentences = set(result.assignments.get(sense.id, set()))
        sentences.update(ref for ref in map(sentence_of, sense.examples) if ref is not None)
        clustered.append(sentences)
        for sentence in sentences:
            seen[sentence] = seen.get(sentence, 0) + 1
    usable = {sentence for sentence, count in seen.items() if count == 1}
    existing_sentences = [
        {ref for ref in map(sentence_of, sense.examples) if ref is not None} & usable
        for sense in existing
    ]
    shared = np.zeros((len(induced), len(existing)), dtype=np.int64)
    for i, sentences in enumerate(clustered):
        for j, examples in enumerate(existing_sentences):
            shared[i, j] = len(examples & sentences)
    return [len(sentences) for sentences in existing_sentences], shared


def _merge_entry(
    targets: list[Entry],
    induced_entry: Entry,
    result: InducedFolder,
    centroids: dict[str, Vector],
    pools: _Pools,
    settings: MergeSettings,
    report: MergeReport,
) -> list[Entry]:
    """Merge one induced verb into its existing entries (homographs pooled); returns them."""
    run = result.run
    owners: list[int] = []
    existing: list[Sense] = []
    for index, entry in enumerate(targets):
        for sense in entry.senses:
            owners.append(index)
            existing.append(sense.model_copy(update={"flags": _strip_own_flags(sense.flags)}))
    induced = list(induced_entry.senses)
    covered, shared = _coverage(existing, induced, result)
    similarity = np.zeros((len(induced), len(existing)), dtype=np.float64)
    details: dict[tuple[int, int], tuple[float | None, float | None]] = {}
    for i, new in enumerate(induced):
        vector = result.centroids.get(new.induction.centroid or new.id) if new.induction else None
        if vector is None:
            vector = result.centroids.get(new.id)
        for j, old in enumerate(existing):
            share = shared[i, j] / covered[j] if covered[j] else None
            cosine = centroid_cosine(vector, centroids.get(old.id))
            details[i, j] = (share, cosine)
            similarity[i, j] = combined_similarity(share, cosine, settings)
    pairs = match_senses(similarity, settings.min_similarity)
    matched_of_induced = dict(pairs)
    cited = {example_key(x) for entry in targets for s in entry.senses for x in s.examples}
    updated = list(existing)
    result_id: dict[int, str] = {}
    for i, j in pairs:
        share, cosine = details[i, j]
        report.matched.append(
            SenseMatch(induced_entry.id, induced[i].id, existing[j].id,
                       round(float(similarity[i, j]), 6),
                       None if share is None else round(float(share), 6),
                       None if cosine is None else round(cosine, 6))
        )
        updated[j] = _refresh(existing[j], induced[i], run, pools, cited, settings, report)
        result_id[i] = existing[j].id
        if induced[i].id in result.centroids:
            centroids[existing[j].id] = result.centroids[induced[i].id]
    home = targets[0].id
    added: list[Sense] = []
    for i, new in enumerate(induced):
        if i in matched_of_induced:
            continue
        sense = _new_sense(home, new, run, pools, cited, settings)
        added.append(sense)
        result_id[i] = sense.id
        if new.id in result.centroids:
            centroids[sense.id] = result.centroids[new.id]
        report.senses_added.append({"entry": home, "sense": sense.id, "induced": new.id})
    matched_existing = {j for _, j in pairs}
    for j, sense in enumerate(updated):
        if j not in matched_existing and sense.status is not Status.RETIRED:
            updated[j] = _add_flag(sense, f"{UNSUPPORTED}{run}")
            report.unsupported.append(sense.id)
    # splits and merges, from shared example sentences
    added_by_id = {sense.id: n for n, sense in enumerate(added)}
    position = {sense.id: j for j, sense in enumerate(updated)}

    def flag(sense_id: str, text: str) -> None:
        if sense_id in added_by_id:
            added[added_by_id[sense_id]] = _add_flag(added[added_by_id[sense_id]], text)
        else:
            updated[position[sense_id]] = _add_flag(updated[position[sense_id]], text)

    minimum = settings.split_min_examples
    for j, old in enumerate(existing):
        branches = sorted({result_id[i] for i in range(len(induced)) if shared[i, j] >= minimum})
        if len(branches) >= 2:
            report.splits.append({"entry": induced_entry.id, "sense": old.id, "into": branches})
            for branch in branches:
                if branch != old.id:
                    flag(branch, f"{SPLIT_FROM}{old.id}")
    for i in range(len(induced)):
        origins = [existing[j].id for j in range(len(existing)) if shared[i, j] >= minimum]
        if len(origins) >= 2:
            into = result_id[i]
            report.merges.append({"entry": induced_entry.id, "senses": origins, "into": into})
            for origin in origins:
                if origin != into:
                    flag(origin, f"{MERGE_INTO}{into}")
    out: list[Entry] = []
    for index, entry in enumerate(targets):
        senses = [updated[j] for j in range(len(updated)) if owners[j] == index]
        if index == 0:
            senses += added
        out.append(entry.model_copy(update={"senses": senses}))
    return out


def merge_lexicon(
    lexicon: Lexicon,
    centroids: Mapping[str, Vector],
    result: InducedFolder,
    settings: MergeSettings | None = None,
) -> tuple[Lexicon, dict[str, Vector], MergeReport]:
    """The merged lexicon, the sources' new centroid table, and the report (pure function)."""
    settings = settings or MergeSettings()
    report = MergeReport(run=result.run)
    pools = _Pools(lexicon.all_ids())
    retired = set(lexicon.meta.retired_ids)
    new_centroids = dict(centroids)
    entries = list(lexicon.entries)
    by_lemma: dict[tuple[str, str], list[int]] = {}
    for index, entry in enumerate(entries):
        by_lemma.setdefault((entry.lemma, entry.pos), []).append(index)
    by_id = {entry.id: index for index, entry in enumerate(entries)}
    appended: list[Entry] = []
    for induced_entry in sorted(result.entries, key=lambda entry: entry.id):
        indexes = by_lemma.get((induced_entry.lemma, induced_entry.pos), [])
        if indexes:
            indexes = sorted(indexes, key=lambda n: (entries[n].homograph or 1, entries[n].id))
            merged = _merge_entry(
                [entries[n] for n in indexes], induced_entry, result, new_centroids, pools,
                settings, report,
            )
            for n, entry in zip(indexes, merged, strict=True):
                entries[n] = entry
            continue
        if induced_entry.id in retired or induced_entry.id in by_id:
            reason = (
                "the id is retired (meta.retired_ids) and is never reused"
                if induced_entry.id in retired
                else f"the id is taken by an entry with another lemma or part of speech "
                f"({entries[by_id[induced_entry.id]].lemma!r}, "
                f"{entries[by_id[induced_entry.id]].pos})"
            )
            report.entries_skipped.append({"entry": induced_entry.id, "reason": reason})
            continue
        pools.used.add(induced_entry.id)
        shell = induced_entry.model_copy(update={"senses": []})
        (merged_entry,) = _merge_entry(
            [shell], induced_entry, result, new_centroids, pools, settings, report
        )
        appended.append(merged_entry)
        report.entries_added.append(merged_entry.id)
    entries += appended
    meta = _declare_corpora(lexicon, entries, result, report)
    return (
        lexicon.model_copy(update={"entries": entries, "meta": meta}),
        new_centroids,
        report,
    )


def _declare_corpora(
    lexicon: Lexicon, entries: Sequence[Entry], result: InducedFolder, report: MergeReport
) -> LexiconMeta:
    """Declare in the metadata the corpora that the added example candidates cite.

    Only additions: an editor's declarations are never changed. The path comes from the
    induction's corpus list when one file there has that name. A corpus name that is not an
    XML NCName cannot be declared; it is reported in ``corpora_undeclared``.
    """
    declared = {corpus.id for corpus in lexicon.meta.corpora}
    added_examples = {row["example"] for row in report.examples_added}
    added_examples.update(
        example.id
        for entry in entries
        for sense in entry.senses
        if any(row["sense"] == sense.id for row in report.senses_added)
        for example in sense.examples
        if example.id
    )
    cited = sorted({
        example.source.corpus
        for entry in entries
        for sense in entry.senses
        for example in sense.examples
        if example.id in added_examples and example.source is not None
    } - declared)
    paths = {Path(str(path)).name: str(path) for path in result.settings.get("corpus") or []}
    corpora = list(lexicon.meta.corpora)
    for name in cited:
        if not ids.is_ncname(name):
            report.corpora_undeclared.append(name)
            continue
        corpora.append(Corpus(id=name, title=name, path=paths.get(name)))
        report.corpora_declared.append(name)
    if not report.corpora_declared:
        return lexicon.meta
    return lexicon.meta.model_copy(update={"corpora": corpora})


# ----------------------------------------------------------------------------- on disk


def recover_interrupted(sources: str | Path) -> bool:
    """Put the sources back after a crash inside the folder swap (``_atomic.recover_swap``)."""
    return recover_swap(sources)


def _pause() -> None:
    delay = os.environ.get(PAUSE_ENV)
    if delay:
        time.sleep(float(delay))


def merge_induction(
    induced: str | Path,
    sources: str | Path,
    *,
    settings: MergeSettings | None = None,
    dry_run: bool = False,
) -> MergeReport:
    """Merge the induction folder ``induced`` into the sources folder ``sources``."""
    settings = settings or MergeSettings()
    root = Path(sources)
    recover_interrupted(root)
    with _merge_lock(root):
        return _merge_locked(induced, root, settings, dry_run)


@contextlib.contextmanager
def _merge_lock(root: Path) -> Iterator[None]:
    """One merge at a time per sources folder: an advisory lock on the folder itself (released
    by the system if the process dies, so a killed merge leaves no stale lock)."""
    try:
        import fcntl
    except ImportError:  # not POSIX: no lock
        yield
        return
    if not root.is_dir():
        yield  # load_lexicon reports the missing folder
        return
    fd = os.open(root, os.O_RDONLY)
    try:
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            raise MergeError(
                f"another merge into {root} is running; wait for it to finish",
                SourceLocation(str(root)),
            ) from None
        if os.fstat(fd).st_ino != os.stat(root).st_ino:  # swapped while we waited
            raise MergeError(
                f"{root} was replaced by a merge that just finished; run the merge again",
                SourceLocation(str(root)),
            )
        yield
    finally:
        os.close(fd)


def _merge_locked(
    induced: str | Path, root: Path, settings: MergeSettings, dry_run: bool
) -> MergeReport:
    from lexbuild.lexicon.sources import META_FILE, load_lexicon, write_entry, write_meta

    loaded = load_lexicon(root)
    result = read_induction(induced)
    old = loaded.lexicon
    old_centroids = read_centroids(root / CENTROIDS_FILE)
    merged, centroids, report = merge_lexicon(old, old_centroids, result, settings)
    report.dry_run = dry_run
    before = {entry.id: entry for entry in old.entries}
    changed = [entry for entry in merged.entries if before.get(entry.id) != entry]
    report.files_written = sorted(f"entries/{entry.id}.yaml" for entry in changed)
    meta_changed = merged.meta != old.meta
    if meta_changed:
        report.files_written.insert(0, META_FILE)
    centroids_changed = set(centroids) != set(old_centroids) or any(
        not np.array_equal(centroids[key], old_centroids[key]) for key in centroids
    )
    if centroids_changed:
        report.files_written.append(CENTROIDS_FILE)
    if dry_run or not report.files_written:
        return report
    root = root.resolve()
    with staging_dir(root) as stage:
        shutil.copytree(root, stage, symlinks=True, dirs_exist_ok=True)
        if meta_changed:
            write_meta(stage, merged.meta)
            _pause()
        for entry in changed:
            write_entry(stage, entry)
            _pause()
        if centroids_changed:
            write_centroids(stage / CENTROIDS_FILE, centroids)
            _pause()
        swap_dir(stage, root)
    with contextlib.suppress(FileNotFoundError):
        shutil.rmtree(stage)
    return report
