"""Rendering a ``LexiconDiff``: Markdown, JSON and self-contained HTML, summary and change
lines (all deterministic, every text escaped in HTML)."""

from __future__ import annotations

import html
import json

from lexbuild.editions.changes import KINDS, TITLES, Change, LexiconDiff

__all__ = [
    "FORMATS",
    "change_lines",
    "render",
    "summary_lines",
    "to_html",
    "to_json",
    "to_markdown",
]

FORMATS: tuple[str, ...] = ("markdown", "json", "html")


def _describe(change: Change) -> str:
    """One plain-text line for a change (Markdown and HTML wrap it)."""
    sense = change.sense or ""
    match change.kind:
        case "entry-added":
            return f"{change.entry} ({change.item}), {change.new} sense(s)"
        case "entry-removed":
            return f"{change.entry} ({change.item}), had {change.old} sense(s)"
        case "sense-added":
            return f"{sense} ({change.new})"
        case "sense-removed":
            return f"{sense} (was {change.old})"
        case "sense-retired" | "status-changed":
            return f"{sense}: {change.old} -> {change.new}"
        case "gloss-changed":
            return f"{sense}: {change.old!r} -> {change.new!r}"
        case "frame-added":
            return f"{sense}: {change.item} (frequency {change.new})"
        case "frame-removed":
            return f"{sense}: {change.item} (frequency {change.old})"
        case "frequency-changed":
            return f"{sense}: {change.item}: {change.old} -> {change.new}"
        case "example-added" | "example-removed":
            return f"{sense}: {change.item}"
        case "sense-split":
            return f"{sense} -> {', '.join(change.related)}"
        case "sense-merged":
            return f"{', '.join(change.related)} -> {sense}"
    raise ValueError(f"unknown change kind {change.kind!r}")


def summary_lines(result: LexiconDiff) -> list[str]:
    """Short lines for a change log header: one per kind with a non-zero count."""
    return [
        f"{TITLES[kind]}: {count}" for kind, count in result.summary.items() if count
    ] or ["No changes."]


def change_lines(result: LexiconDiff) -> list[str]:
    """One plain line per change, with its kind's title in front (TEI revisionDesc items)."""
    return [f"{TITLES[c.kind]}: {_describe(c)}" for c in result.changes]


def _md_code(text: str) -> str:
    return text.replace("|", "\\|").replace("`", "'")


def to_markdown(result: LexiconDiff) -> str:
    lines = [
        f"# Changes from {_md_code(result.old_label)} to {_md_code(result.new_label)}",
        "",
        "## Summary",
        "",
        "| change | count |",
        "|---|---:|",
    ]
    lines += [f"| {TITLES[kind]} | {count} |" for kind, count in result.summary.items()]
    if not result.changes:
        lines += ["", "No changes."]
    for kind in KINDS:
        items = result.of_kind(kind)
        if not items:
            continue
        lines += ["", f"## {TITLES[kind]}", ""]
        lines += [f"- `{_md_code(c.entry)}`: {_md_code(_describe(c))}" for c in items]
    return "\n".join(lines) + "\n"


def to_json(result: LexiconDiff) -> str:
    return json.dumps(result.as_dict(), ensure_ascii=False, indent=2) + "\n"


_CSS = (
    "body{font-family:sans-serif;margin:2em;max-width:60em}"
    "table{border-collapse:collapse}td,th{border:1px solid #999;padding:.2em .6em}"
    "td.n{text-align:right}code{background:#eee;padding:0 .2em}"
)


def to_html(result: LexiconDiff) -> str:
    """A self-contained page (inline style, no script, no external resource)."""
    esc = html.escape
    title = f"Changes from {result.old_label} to {result.new_label}"
    parts = [
        "<!DOCTYPE html>",
        '<html><head><meta charset="utf-8">',
        f"<title>{esc(title)}</title>",
        f"<style>{_CSS}</style></head><body>",
        f"<h1>{esc(title)}</h1>",
        "<h2>Summary</h2>",
        "<table><tr><th>change</th><th>count</th></tr>",
    ]
    parts += [
        f'<tr><td>{esc(TITLES[kind])}</td><td class="n">{count}</td></tr>'
        for kind, count in result.summary.items()
    ]
    parts.append("</table>")
    for kind in KINDS:
        items = result.of_kind(kind)
        if not items:
            continue
        parts.append(f"<h2>{esc(TITLES[kind])}</h2><ul>")
        parts += [
            f"<li><code>{esc(c.entry)}</code>: {esc(_describe(c))}</li>" for c in items
        ]
        parts.append("</ul>")
    parts.append("</body></html>")
    return "\n".join(parts) + "\n"


def render(result: LexiconDiff, fmt: str) -> str:
    if fmt == "markdown":
        return to_markdown(result)
    if fmt == "json":
        return to_json(result)
    if fmt == "html":
        return to_html(result)
    raise ValueError(f"unknown format {fmt!r}; expected one of {', '.join(FORMATS)}")
