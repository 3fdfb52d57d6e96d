"""The merge report: what a merge matched, added, flagged and wrote (Markdown and JSON)."""

from __future__ import annotations

import json
from collections.abc import Iterable
from dataclasses import asdict, dataclass, field
from typing import Any


@dataclass(frozen=True)
class SenseMatch:
    entry: str
    induced: str
    sense: str
    similarity: float
    shared_examples: float | None
    cosine: float | None


@dataclass
class MergeReport:
    run: str
    dry_run: bool = False
    entries_added: list[str] = field(default_factory=list)
    entries_skipped: list[dict[str, str]] = field(default_factory=list)
    matched: list[SenseMatch] = field(default_factory=list)
    senses_added: list[dict[str, str]] = field(default_factory=list)
    unsupported: list[str] = field(default_factory=list)
    frames_added: list[dict[str, str]] = field(default_factory=list)
    frequencies_refreshed: list[dict[str, Any]] = field(default_factory=list)
    examples_added: list[dict[str, str]] = field(default_factory=list)
    splits: list[dict[str, Any]] = field(default_factory=list)
    merges: list[dict[str, Any]] = field(default_factory=list)
    corpora_declared: list[str] = field(default_factory=list)
    corpora_undeclared: list[str] = field(default_factory=list)
    files_written: list[str] = field(default_factory=list)

    def as_dict(self) -> dict[str, Any]:
        data = asdict(self)
        data["summary"] = {
            key: len(value) for key, value in data.items() if isinstance(value, list)
        }
        return data

    def to_json(self) -> str:
        return json.dumps(self.as_dict(), ensure_ascii=False, indent=2, sort_keys=True) + "\n"

    def to_markdown(self) -> str:
        title = "Merge report (dry run: nothing written)" if self.dry_run else "Merge report"
        lines = [f"# {title}", "", f"Induction run: `{self.run}`", "", "## Summary", ""]
        lines += ["| item | count |", "|---|---:|"]
        summary = self.as_dict()["summary"]
        lines += [f"| {key.replace('_', ' ')} | {count} |" for key, count in summary.items()]

        def section(name: str, rows: Iterable[str]) -> None:
            items = list(rows)
            if items:
                lines.extend(["", f"## {name}", "", *items])

        section("Entries added", (f"- `{e}`" for e in self.entries_added))
        section(
            "Entries skipped",
            (f"- `{row['entry']}`: {row['reason']}" for row in self.entries_skipped),
        )
        section(
            "Senses matched",
            (
                f"- `{m.induced}` -> `{m.sense}` (similarity {m.similarity:.3f}; shared "
                f"examples {_fmt(m.shared_examples)}, centroid cosine {_fmt(m.cosine)})"
                for m in self.matched
            ),
        )
        section(
            "Senses added (draft)",
            (f"- `{row['sense']}` from induced `{row['induced']}`" for row in self.senses_added),
        )
        section(
            "Senses no longer supported (flagged, kept)",
            (f"- `{sense}`" for sense in self.unsupported),
        )
        section(
            "Proposed splits (for the editor to confirm)",
            (
                f"- `{row['sense']}` -> " + ", ".join(f"`{s}`" for s in row["into"])
                for row in self.splits
            ),
        )
        section(
            "Proposed merges (for the editor to confirm)",
            (
                ", ".join(f"`{s}`" for s in row["senses"]) + f" -> `{row['into']}`"
                for row in self.merges
            ),
        )
        section(
            "Frames added",
            (f"- `{row['frame']}` `{row['pattern']}`" for row in self.frames_added),
        )
        section(
            "Frequencies refreshed",
            (
                f"- `{row['frame']}`: {row['old']} -> {row['new']}"
                for row in self.frequencies_refreshed
            ),
        )
        section(
            "Example candidates added",
            (f"- `{row['example']}` ({row['source']})" for row in self.examples_added),
        )
        section("Corpora declared in lexicon.yaml",
                (f"- `{name}`" for name in self.corpora_declared))
        section("Corpora cited but not declarable (not an XML name)",
                (f"- `{name}`" for name in self.corpora_undeclared))
        section("Files written", (f"- {name}" for name in self.files_written))
        return "\n".join(lines) + "\n"


def _fmt(value: float | None) -> str:
    return "n/a" if value is None else f"{value:.3f}"
