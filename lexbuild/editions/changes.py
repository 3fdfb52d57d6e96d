"""The result of comparing two dictionaries: change kinds, ``Change`` records, ``LexiconDiff``."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

__all__ = ["KINDS", "TITLES", "Change", "LexiconDiff"]

#: Every change kind, in the order the reports list them.
KINDS: tuple[str, ...] = (
    "entry-added",
    "entry-removed",
    "sense-added",
    "sense-removed",
    "sense-retired",
    "gloss-changed",
    "status-changed",
    "frame-added",
    "frame-removed",
    "frequency-changed",
    "example-added",
    "example-removed",
    "sense-split",
    "sense-merged",
)

TITLES: dict[str, str] = {
    "entry-added": "Entries added",
    "entry-removed": "Entries removed",
    "sense-added": "Senses added",
    "sense-removed": "Senses removed",
    "sense-retired": "Senses retired",
    "gloss-changed": "Glosses changed",
    "status-changed": "Statuses changed",
    "frame-added": "Frames added",
    "frame-removed": "Frames removed",
    "frequency-changed": "Frequencies changed",
    "example-added": "Examples added",
    "example-removed": "Examples removed",
    "sense-split": "Senses split",
    "sense-merged": "Senses merged",
}

_KIND_RANK = {kind: rank for rank, kind in enumerate(KINDS)}

Value = str | int | None


@dataclass(frozen=True)
class Change:
    """One difference. ``item`` is a frame pattern or an example key; ``related`` lists the
    other senses of a split or merge."""

    kind: str
    entry: str
    sense: str | None = None
    item: str | None = None
    old: Value = None
    new: Value = None
    related: tuple[str, ...] = ()

    def sort_key(self) -> tuple[int, str, str, str, tuple[str, ...]]:
        return (_KIND_RANK[self.kind], self.entry, self.sense or "", self.item or "", self.related)

    def as_dict(self) -> dict[str, Any]:
        return {
            "kind": self.kind,
            "entry": self.entry,
            "sense": self.sense,
            "item": self.item,
            "old": self.old,
            "new": self.new,
            "related": list(self.related),
        }


@dataclass(frozen=True)
class LexiconDiff:
    old_label: str
    new_label: str
    changes: list[Change] = field(default_factory=list)
    tolerance: float = 0.0

    @property
    def summary(self) -> dict[str, int]:
        counts = dict.fromkeys(KINDS, 0)
        for change in self.changes:
            counts[change.kind] += 1
        return counts

    def __bool__(self) -> bool:
        return bool(self.changes)

    def of_kind(self, kind: str) -> list[Change]:
        return [change for change in self.changes if change.kind == kind]

    def as_dict(self) -> dict[str, Any]:
        return {
            "old": self.old_label,
            "new": self.new_label,
            "tolerance": self.tolerance,
            "summary": self.summary,
            "changes": [change.as_dict() for change in self.changes],
        }
