"""Consistency checks over the YAML sources: a table of small coded rules.

Each rule is a pure function from the typed lexicon to problems (entry id, field path, message);
``check_lexicon`` turns them into findings located at ``file:line:column`` through the
``SourceMap`` kept by :mod:`lexbuild.lexicon.sources`. Codes are grouped by hundreds:

* ``E1xx`` structure (frames, examples, identifiers), ``E2xx`` text, ``E3xx`` editorial;
* ``W4xx`` warnings: likely mistakes that do not block an export.

``E000`` is not a rule: it reports a source file that does not load (YAML syntax or a value that
does not fit the model), so that one bad file does not hide the findings in the others.
"""

from __future__ import annotations

import json
import re
import unicodedata
from collections import Counter, defaultdict
from collections.abc import Callable, Iterable, Iterator, Sequence
from dataclasses import dataclass
from enum import StrEnum
from typing import Any

from lexbuild.errors import SourceError, SourceLocation
from lexbuild.formats.xmlsafe import forbidden_characters
from lexbuild.lexicon.model import NEEDS_MARKER, Entry, Lexicon, LexiconMeta, Sense, Status
from lexbuild.lexicon.sources import FieldPath, LoadedLexicon, SourceMap, format_path, id_paths

__all__ = [
    "RULES",
    "Finding",
    "Rule",
    "Severity",
    "check_lexicon",
    "choose_rules",
    "entry_problems",
    "findings_json",
    "findings_text",
    "has_errors",
    "load_problem_findings",
    "located_findings",
    "meta_problems",
]


class Severity(StrEnum):
    ERROR = "error"
    WARNING = "warning"


@dataclass(frozen=True, slots=True)
class Problem:
    """What a rule found, before it is located in a file."""

    entry: str | None  # None for the metadata file
    path: FieldPath
    message: str
    first: FieldPath | None = None  # in the same file: an earlier value this one repeats


#: What a whole-document rule reads of each entry: its id and every id it holds with its path.
IdSummary = tuple[str, Sequence[tuple[str, FieldPath]]]


@dataclass(frozen=True, slots=True)
class Rule:
    """A coded rule. Most rules are local to one entry: what they find about an entry depends
    only on that entry and the metadata, and what they find about the metadata (entry None)
    comes first, so an incremental build can run them entry by entry and keep the results.
    A rule that compares entries (``find_ids`` set) runs over the whole document every time,
    on the ids of each entry (``IdSummary``), which a build keeps for every entry; it finds
    problems only among ids that more than one place holds (a build skips it otherwise)."""

    code: str
    name: str
    severity: Severity
    hint: str  # how to fix it, shown with every finding
    find: Callable[[Lexicon], Iterator[Problem]]
    find_ids: Callable[[LexiconMeta, Sequence[IdSummary]], Iterator[Problem]] | None = None

    @property
    def local(self) -> bool:
        return self.find_ids is None


@dataclass(frozen=True, slots=True)
class Finding:
    code: str
    name: str
    severity: Severity
    message: str
    hint: str
    location: SourceLocation
    entry: str | None
    field: str

    def __str__(self) -> str:
        where = f" [{self.entry} {self.field}]" if self.entry else f" [{self.field}]"
        return (
            f"{self.location}: {self.severity} {self.code} {self.name}{where}: {self.message}"
            + (f"\n    fix: {self.hint}" if self.hint else "")
        )

    def as_dict(self) -> dict[str, Any]:
        return {
            "code": self.code,
            "name": self.name,
            "severity": self.severity.value,
            "message": self.message,
            "hint": self.hint,
            "file": self.location.file,
            "line": self.location.line,
            "column": self.location.column,
            "entry": self.entry,
            "field": self.field,
        }


RULES: dict[str, Rule] = {}


def _rule(
    code: str,
    name: str,
    severity: Severity,
    hint: str,
    find_ids: Callable[[LexiconMeta, Sequence[IdSummary]], Iterator[Problem]] | None = None,
) -> Callable[[Callable[[Lexicon], Iterator[Problem]]], Callable[[Lexicon], Iterator[Problem]]]:
    def register(find: Callable[[Lexicon], Iterator[Problem]]) -> Callable[..., Iterator[Problem]]:
        RULES[code] = Rule(code, name, severity, hint, find, find_ids)
        return find

    return register


def _live_senses(entry: Entry) -> Iterator[tuple[int, Sense]]:
    """Senses still in use: retired senses keep their content but owe nothing."""
    for index, sense in enumerate(entry.senses):
        if sense.status is not Status.RETIRED:
            yield index, sense


# ------------------------------------------------------------------------------ E1xx structure


@_rule("E101", "entry-without-sense", Severity.ERROR, "add at least one sense under 'senses'")
def _entry_without_sense(lexicon: Lexicon) -> Iterator[Problem]:
    for entry in lexicon.entries:
        if not entry.senses:
            yield Problem(entry.id, ("senses",), f"entry {entry.id!r} has no sense")


@_rule(
    "E102",
    "sense-without-frame",
    Severity.ERROR,
    "add a frame such as 'subj:NP obj:NP' under 'frames', or retire the sense",
)
def _sense_without_frame(lexicon: Lexicon) -> Iterator[Problem]:
    for entry in lexicon.entries:
        for index, sense in _live_senses(entry):
            if not sense.frames:
                yield Problem(entry.id, ("senses", index), f"sense {sense.id!r} has no frame")


@_rule(
    "E103",
    "sense-without-example",
    Severity.ERROR,
    "add a corpus example under 'examples', or retire the sense",
)
def _sense_without_example(lexicon: Lexicon) -> Iterator[Problem]:
    for entry in lexicon.entries:
        for index, sense in _live_senses(entry):
            if not sense.examples:
                yield Problem(entry.id, ("senses", index), f"sense {sense.id!r} has no example")


def _duplicate_ids(meta: LexiconMeta, summaries: Sequence[IdSummary]) -> Iterator[Problem]:
    first_seen: dict[str, str] = {}
    for entry_id, paths in summaries:
        for identifier, path in paths:
            if identifier in first_seen:
                yield Problem(
                    entry_id,
                    path,
                    f"id {identifier!r} is already used in entry {first_seen[identifier]!r}",
                )
            else:
                first_seen[identifier] = entry_id


@_rule(
    "E104",
    "duplicate-id",
    Severity.ERROR,
    "give each entry, sense, frame and example its own id"
    " (lexbuild.lexicon.ids.next_free_id finds one)",
    find_ids=_duplicate_ids,
)
def _duplicate_id(lexicon: Lexicon) -> Iterator[Problem]:
    first_seen: dict[str, str] = {}
    for entry in lexicon.entries:
        for identifier, path in id_paths(entry):
            if identifier in first_seen:
                yield Problem(
                    entry.id,
                    path,
                    f"id {identifier!r} is already used in entry {first_seen[identifier]!r}",
                )
            else:
                first_seen[identifier] = entry.id


@_rule(
    "E110",
    "duplicate-header-id",
    Severity.ERROR,
    "give each editor and each corpus in lexicon.yaml its own id (exports use them as "
    "xml:id, which must be unique)",
)
def _duplicate_header_id(lexicon: Lexicon) -> Iterator[Problem]:
    for field_name, identifiers in (
        ("editors", [editor.id for editor in lexicon.meta.editors]),
        ("corpora", [corpus.id for corpus in lexicon.meta.corpora]),
    ):
        first_index: dict[str, int] = {}
        for index, identifier in enumerate(identifiers):
            if identifier in first_index:
                earlier = first_index[identifier]
                yield Problem(
                    None,
                    (field_name, index, "id"),
                    f"{field_name} id {identifier!r} is already used by {field_name}[{earlier}]",
                    first=(field_name, earlier, "id"),
                )
            else:
                first_index[identifier] = index


@_rule(
    "E105",
    "retired-id-reused",
    Severity.ERROR,
    "ids listed in lexicon.yaml 'retired_ids' are never handed out again: choose a fresh id",
)
def _retired_id_reused(lexicon: Lexicon) -> Iterator[Problem]:
    retired = set(lexicon.meta.retired_ids)
    for entry in lexicon.entries:
        for identifier, path in id_paths(entry):
            if identifier in retired:
                yield Problem(entry.id, path, f"id {identifier!r} was retired and is in use again")


@_rule(
    "E106",
    "id-outside-parent",
    Severity.ERROR,
    "sense ids start with their entry id ('<entry>.s1'), frame and example ids with their "
    "sense id ('<sense>.f1', '<sense>.x1')",
)
def _id_outside_parent(lexicon: Lexicon) -> Iterator[Problem]:
    for entry in lexicon.entries:
        for s, sense in enumerate(entry.senses):
            if not sense.id.startswith(entry.id + "."):
                yield Problem(
                    entry.id,
                    ("senses", s, "id"),
                    f"sense id {sense.id!r} is not under entry id {entry.id!r}",
                )
            children = [("frames", frame.id) for frame in sense.frames] + [
                ("examples", example.id) for example in sense.examples
            ]
            counters: Counter[str] = Counter()
            for kind, identifier in children:
                position = counters[kind]
                counters[kind] += 1
                if identifier and not identifier.startswith(sense.id + "."):
                    yield Problem(
                        entry.id,
                        ("senses", s, kind, position, "id"),
                        f"{kind[:-1]} id {identifier!r} is not under sense id {sense.id!r}",
                    )


@_rule(
    "E107",
    "marker-missing",
    Severity.ERROR,
    "write the preposition in brackets, e.g. 'obl:PP[de]'",
)
def _marker_missing(lexicon: Lexicon) -> Iterator[Problem]:
    for entry in lexicon.entries:
        for s, sense in enumerate(entry.senses):
            for f, frame in enumerate(sense.frames):
                for slot in frame.slots:
                    if slot.realisation in NEEDS_MARKER and not slot.marker:
                        yield Problem(
                            entry.id,
                            ("senses", s, "frames", f, "pattern"),
                            f"slot {slot} of frame {frame.pattern!r} is realised as "
                            f"{slot.realisation.value} but names no marker",
                        )


@_rule(
    "E108",
    "negative-frequency",
    Severity.ERROR,
    "frequencies are corpus counts: use 0 or a positive number",
)
def _negative_frequency(lexicon: Lexicon) -> Iterator[Problem]:
    for entry in lexicon.entries:
        for s, sense in enumerate(entry.senses):
            for f, frame in enumerate(sense.frames):
                path: FieldPath = ("senses", s, "frames", f)
                if frame.frequency is not None and frame.frequency < 0:
                    yield Problem(
                        entry.id, (*path, "frequency"), f"frequency {frame.frequency} is negative"
                    )
                for k, value in enumerate(frame.slot_frequencies or []):
                    if value < 0:
                        yield Problem(
                            entry.id,
                            (*path, "slot_frequencies", k),
                            f"slot frequency {value} is negative",
                        )
            if sense.induction is not None and sense.induction.cluster_size < 0:
                yield Problem(
                    entry.id,
                    ("senses", s, "induction", "cluster_size"),
                    f"cluster size {sense.induction.cluster_size} is negative",
                )


@_rule(
    "E109",
    "example-frame-unknown",
    Severity.ERROR,
    "point 'frame' at the id of one of this sense's frames, or remove it",
)
def _example_frame_unknown(lexicon: Lexicon) -> Iterator[Problem]:
    for entry in lexicon.entries:
        for s, sense in enumerate(entry.senses):
            frame_ids = {frame.id for frame in sense.frames if frame.id}
            for x, example in enumerate(sense.examples):
                if example.frame is not None and example.frame not in frame_ids:
                    yield Problem(
                        entry.id,
                        ("senses", s, "examples", x, "frame"),
                        f"example refers to frame {example.frame!r}, which sense {sense.id!r} "
                        "does not have",
                    )


# ----------------------------------------------------------------------------------- E2xx text


def _span_problem(span: tuple[int, int], text: str) -> str | None:
    start, end = span
    if not 0 <= start < end <= len(text):
        return f"span [{start}, {end}] does not lie inside the text ({len(text)} characters)"
    return None


@_rule(
    "E201",
    "span-outside-text",
    Severity.ERROR,
    "spans are [start, end) character offsets into 'text', counted from 0",
)
def _span_outside_text(lexicon: Lexicon) -> Iterator[Problem]:
    for entry in lexicon.entries:
        for s, sense in enumerate(entry.senses):
            for x, example in enumerate(sense.examples):
                path: FieldPath = ("senses", s, "examples", x)
                problem = _span_problem(example.verb, example.text)
                if problem:
                    yield Problem(entry.id, (*path, "verb"), f"verb {problem}")
                slot_count = _slot_count(sense, example.frame)
                for a, argument in enumerate(example.arguments):
                    problem = _span_problem(argument.span, example.text)
                    if problem:
                        yield Problem(
                            entry.id, (*path, "arguments", a, "span"), f"argument {problem}"
                        )
                    if slot_count is not None and not 1 <= argument.slot <= slot_count:
                        yield Problem(
                            entry.id,
                            (*path, "arguments", a, "slot"),
                            f"argument names slot {argument.slot} but its frame has "
                            f"{slot_count} slot(s)",
                        )


def _slot_count(sense: Sense, frame_id: str | None) -> int | None:
    frame = next((frame for frame in sense.frames if frame.id == frame_id), None)
    return None if frame is None else len(frame.slots)


@_rule(
    "E202",
    "forbidden-character",
    Severity.ERROR,
    "remove the control character (XML 1.0 allows only tab, line feed and carriage return)",
)
def _forbidden_character(lexicon: Lexicon) -> Iterator[Problem]:
    # DEL and C1 controls are refused too: XML 1.0 discourages them, no dictionary needs them.
    meta = lexicon.meta.model_dump(mode="json")
    for path, found in forbidden_characters(meta, discouraged=True):
        yield Problem(None, path, f"forbidden {found}")
    for entry in lexicon.entries:
        for path, found in forbidden_characters(entry.model_dump(mode="json"), discouraged=True):
            yield Problem(entry.id, path, f"forbidden {found}")


# Forms sharing no prefix with their lemma (suppletion), from memory of the standard
# conjugation tables; extend per language as needed. Keys are the verb without reflexive clitic.
SUPPLETIVE_FORMS: dict[str, frozenset[str]] = {
    "aller": frozenset(
        {
            "va",
            "vas",
            "vais",
            "vont",
            "ira",
            "irai",
            "iras",
            "irons",
            "irez",
            "iront",
            "irait",
            "iraient",
            "irais",
            "irions",
            "iriez",
        }
    ),
    "etre": frozenset(
        {
            "suis",
            "es",
            "est",
            "sommes",
            "sont",
            "fut",
            "furent",
            "fus",
            "serai",
            "sera",
            "seront",
            "serait",
            "seraient",
            "soit",
            "soient",
            "sois",
        }
    ),
    "avoir": frozenset({"a", "as", "ont", "eu", "eut", "eurent", "aie", "ait", "aient"}),
    "be": frozenset({"is", "am", "are", "was", "were"}),
    "go": frozenset({"went"}),
}
_CLITICS = frozenset({"se", "s", "s'", "s’", "me", "te", "nous", "vous", "en", "y"})


def _fold(text: str) -> str:
    decomposed = unicodedata.normalize("NFKD", text.casefold())
    return "".join(c for c in decomposed if not unicodedata.combining(c))


def _verb_word(lemma: str) -> str:
    """'se rendre compte' -> 'rendre'; "s'en aller" -> 'aller' (accents and case folded)."""
    words = re.split(r"[\s'’]+", _fold(lemma))
    return next((word for word in words if word and word not in _CLITICS), _fold(lemma))


def looks_like_form(span_text: str, lemma: str) -> bool:
    """Heuristic: some word of the span starts like the lemma's verb, or is a listed form.

    The initial letter survives in regular and in most irregular forms (tenir/tient,
    devoir/doit, prendre/pris); suppletive verbs need ``SUPPLETIVE_FORMS``.
    """
    verb = _verb_word(lemma)
    for word in re.split(r"[\s'’-]+", _fold(span_text)):
        if not word:
            continue
        if word in SUPPLETIVE_FORMS.get(verb, ()):
            return True
        if word[:1] == verb[:1]:
            return True
    return False


def _cuts_a_word(text: str, start: int, end: int) -> bool:
    inside = text[start] + text[end - 1]
    before = text[start - 1] if start > 0 else " "
    after = text[end] if end < len(text) else " "
    return not all(c.isalnum() for c in inside) or before.isalnum() or after.isalnum()


@_rule(
    "E203",
    "verb-span-not-lemma",
    Severity.ERROR,
    "make 'verb' cover the form of the entry's verb in the sentence",
)
def _verb_span_not_lemma(lexicon: Lexicon) -> Iterator[Problem]:
    for entry in lexicon.entries:
        for s, sense in enumerate(entry.senses):
            for x, example in enumerate(sense.examples):
                start, end = example.verb
                if _span_problem(example.verb, example.text):
                    continue  # E201 reports it
                covered = example.text[start:end]
                if _cuts_a_word(example.text, start, end):
                    yield Problem(
                        entry.id,
                        ("senses", s, "examples", x, "verb"),
                        f"verb span covers {covered!r}, which starts or ends inside a word or on "
                        "a space or punctuation",
                    )
                elif not looks_like_form(covered, entry.lemma):
                    yield Problem(
                        entry.id,
                        ("senses", s, "examples", x, "verb"),
                        f"verb span covers {covered!r}, which does not look like a form of "
                        f"{entry.lemma!r}",
                    )


# ------------------------------------------------------------------------------ E3xx editorial


@_rule(
    "E301",
    "approved-without-gloss",
    Severity.ERROR,
    "write a gloss before approving the sense, or set its status back to 'reviewed'",
)
def _approved_without_gloss(lexicon: Lexicon) -> Iterator[Problem]:
    for entry in lexicon.entries:
        for s, sense in enumerate(entry.senses):
            if sense.status is Status.APPROVED and not sense.gloss.strip():
                yield Problem(
                    entry.id, ("senses", s, "gloss"), f"approved sense {sense.id!r} has no gloss"
                )


# ----------------------------------------------------------------------------------- warnings


@_rule(
    "W401",
    "senses-not-distinguished",
    Severity.WARNING,
    "give at least one of the senses a gloss, or merge them",
)
def _senses_not_distinguished(lexicon: Lexicon) -> Iterator[Problem]:
    for entry in lexicon.entries:
        by_frames: dict[frozenset[str], list[int]] = defaultdict(list)
        for index, sense in _live_senses(entry):
            if not sense.gloss.strip() and sense.frames:
                by_frames[frozenset(frame.pattern for frame in sense.frames)].append(index)
        for indices in by_frames.values():
            for index in indices[1:]:
                yield Problem(
                    entry.id,
                    ("senses", index),
                    f"sense {entry.senses[index].id!r} has the same frames as "
                    f"{entry.senses[indices[0]].id!r} and neither has a gloss",
                )


@_rule(
    "W402",
    "duplicate-frame",
    Severity.WARNING,
    "list each frame once per sense; add up the frequencies",
)
def _duplicate_frame(lexicon: Lexicon) -> Iterator[Problem]:
    for entry in lexicon.entries:
        for s, sense in enumerate(entry.senses):
            seen: set[str] = set()
            for f, frame in enumerate(sense.frames):
                if frame.pattern in seen:
                    yield Problem(
                        entry.id,
                        ("senses", s, "frames", f, "pattern"),
                        f"frame {frame.pattern!r} appears twice in sense {sense.id!r}",
                    )
                seen.add(frame.pattern)


@_rule(
    "W403",
    "unknown-corpus",
    Severity.WARNING,
    "declare the corpus under 'corpora' in lexicon.yaml so the export can cite it",
)
def _unknown_corpus(lexicon: Lexicon) -> Iterator[Problem]:
    declared = {corpus.id for corpus in lexicon.meta.corpora}
    for entry in lexicon.entries:
        for s, sense in enumerate(entry.senses):
            for x, example in enumerate(sense.examples):
                if example.source and example.source.corpus not in declared:
                    yield Problem(
                        entry.id,
                        ("senses", s, "examples", x, "source", "corpus"),
                        f"corpus {example.source.corpus!r} is not declared in the metadata",
                    )


# ------------------------------------------------------------------------------------ running


def _locate(source_map: SourceMap, problem: Problem) -> SourceLocation:
    if problem.entry is None:
        return source_map.meta_location(problem.path)
    return source_map.locate(problem.entry, problem.path)


def _with_first(source_map: SourceMap, problem: Problem) -> str:
    if problem.first is None:
        return problem.message
    first = _locate(source_map, Problem(problem.entry, problem.first, ""))
    return f"{problem.message} (line {first.line})" if first.line else problem.message


def check_lexicon(
    loaded: LoadedLexicon,
    *,
    select: Iterable[str] | None = None,
    ignore: Iterable[str] = (),
) -> list[Finding]:
    """Run the rules (all, or those whose code starts with a ``select`` prefix)."""
    chosen = choose_rules(select, ignore)
    return located_findings(
        loaded.source_map, [(rule, rule.find(loaded.lexicon)) for rule in chosen]
    )


def located_findings(
    source_map: SourceMap, found: Iterable[tuple[Rule, Iterable[Problem]]]
) -> list[Finding]:
    """Each rule's problems as findings located in the sources, in the report's order."""
    findings = []
    for rule, problems in found:
        for problem in problems:
            findings.append(
                Finding(
                    code=rule.code,
                    name=rule.name,
                    severity=rule.severity,
                    message=_with_first(source_map, problem),
                    hint=rule.hint,
                    location=_locate(source_map, problem),
                    entry=problem.entry,
                    field=format_path(problem.path),
                )
            )
    return sorted(findings, key=_finding_order)


def entry_problems(meta: LexiconMeta, entry: Entry) -> dict[str, list[Problem]]:
    """What the local rules find about one entry (its part of a whole check), by code."""
    alone = Lexicon.model_construct(meta=meta, entries=[entry])
    found: dict[str, list[Problem]] = {}
    for code, rule in RULES.items():
        if rule.local:
            problems = [problem for problem in rule.find(alone) if problem.entry is not None]
            if problems:
                found[code] = problems
    return found


def meta_problems(meta: LexiconMeta, rule: Rule) -> list[Problem]:
    """What a local rule finds about the metadata alone (its part before any entry's)."""
    return list(rule.find(Lexicon.model_construct(meta=meta, entries=[])))


def choose_rules(select: Iterable[str] | None, ignore: Iterable[str]) -> list[Rule]:
    """The rules to run: codes starting with a ``select`` prefix (all when None), less those
    starting with an ``ignore`` prefix; an unknown prefix raises ``SourceError``."""
    selected = list(select) if select is not None else [""]
    ignored = list(ignore)
    for prefix in [*selected, *ignored]:
        if prefix and not any(code.startswith(prefix) for code in RULES):
            raise SourceError(
                f"no check code starts with {prefix!r}; known codes: {', '.join(sorted(RULES))}"
            )
    return [
        rule
        for code, rule in sorted(RULES.items())
        if any(code.startswith(p) for p in selected)
        and not any(code.startswith(p) for p in ignored)
    ]


def _finding_order(finding: Finding) -> tuple[str, int, int, str]:
    location = finding.location
    return (location.file, location.line, location.column, finding.code)


def load_problem_findings(problems: Iterable[SourceError]) -> list[Finding]:
    """Source files that did not load, as ``E000`` findings."""
    return [
        Finding(
            code="E000",
            name="source-invalid",
            severity=Severity.ERROR,
            message=problem.message,
            hint="fix the YAML syntax or the value named; the JSON Schema in schemas/ lists "
            "every field",
            location=problem.location or SourceLocation("?"),
            entry=None,
            field="<file>",
        )
        for problem in problems
    ]


def has_errors(findings: Iterable[Finding]) -> bool:
    return any(finding.severity is Severity.ERROR for finding in findings)


def findings_text(findings: list[Finding]) -> str:
    counts = Counter(finding.severity for finding in findings)
    lines = [str(finding) for finding in findings]
    lines.append(
        f"{counts[Severity.ERROR]} error(s), {counts[Severity.WARNING]} warning(s)"
        if findings
        else "no findings"
    )
    return "\n".join(lines) + "\n"


def findings_json(findings: list[Finding]) -> str:
    counts = Counter(finding.severity.value for finding in findings)
    document = {
        "errors": counts["error"],
        "warnings": counts["warning"],
        "findings": [finding.as_dict() for finding in findings],
    }
    return json.dumps(document, indent=2, ensure_ascii=False) + "\n"
