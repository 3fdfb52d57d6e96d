"""The README's claims hold: its two set-up commands, its commands table, its frame examples."""

from __future__ import annotations

import re

from conftest import PROJECT_ROOT

from lexbuild.cli import build_parser
from lexbuild.lexicon.model import parse_frame

README = (PROJECT_ROOT / "README.md").read_text(encoding="utf-8")


def _blocks() -> list[str]:
    return re.findall(r"```[a-z]*\n(.*?)```", README, flags=re.S)


def test_exactly_two_setup_commands_and_ci_runs_the_test_one() -> None:
    setup = _blocks()[0].strip().splitlines()
    assert [line.split("#")[0].strip() for line in setup] == ["make demo", "make test"]
    assert "make test" in (PROJECT_ROOT / ".ci" / "run").read_text(encoding="utf-8")


def test_every_documented_command_exists() -> None:
    parser = build_parser()
    subparsers = next(a for a in parser._actions if a.dest == "command")
    documented = re.findall(r"^\| `lexbuild (\w+)", README, flags=re.M)
    assert documented
    assert set(documented) <= set(subparsers.choices)  # type: ignore[attr-defined]


def test_frame_examples_parse() -> None:
    frames_block = next(b for b in _blocks() if "subj:" in b)
    for line in frames_block.strip().splitlines():
        pattern = re.split(r"\s{2,}", line.strip())[0]
        assert parse_frame(pattern)


def test_step_by_step_commands_parse() -> None:
    # Every command of the README's walk-through is accepted by the real argument parser.
    parser = build_parser()
    walkthrough = next(b for b in _blocks() if "lexbuild release" in b)
    commands = [line.split("#")[0].split() for line in walkthrough.strip().splitlines()]
    assert len(commands) >= 6
    for words in commands:
        assert words[0] == "lexbuild"
        args = parser.parse_args(words[1:])
        assert args.handler is not None


def test_identifier_example_is_what_the_mapping_gives() -> None:
    from lexbuild.lexicon.ids import id_to_lemma, lemma_to_id

    lemma, identifier = re.search(r"\(`([^`]+)` -> `([^`]+)`\)", README).groups()
    assert lemma_to_id(lemma) == identifier
    assert id_to_lemma(identifier) == lemma


def test_demo_figures_are_those_of_the_shipped_corpus() -> None:
    from lexbuild.demo_corpus import corpus_files, read_gold, read_lines

    sentences = int(re.search(r"\((\d+) French sentences of our own", README).group(1))
    verbs = int(re.search(r"induces the senses of (\d+) verbs", README).group(1))
    assert sentences == sum(len(read_lines(path)) for path in corpus_files())
    assert verbs == len({row.lemma for row in read_gold()})
