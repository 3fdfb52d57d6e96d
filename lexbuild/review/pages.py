"""The pages of the review site: pure functions from the typed model to HTML text."""

from __future__ import annotations

from collections import Counter
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

from lexbuild.editions.diff import LexiconDiff
from lexbuild.editions.diff_report import change_lines
from lexbuild.lexicon.model import Entry, Example, Function, Lexicon, Sense, Status
from lexbuild.review.assets import SCRIPT_FILE, STYLE_FILE
from lexbuild.review.diagnostics import InducedEntry, InductionView
from lexbuild.review.markup import Markup, document, el, join

__all__ = [
    "EditionLink",
    "Page",
    "changes_page",
    "diagnostics_page",
    "entry_page",
    "flag_kind",
    "index_page",
]

Labels = Mapping[str, str]
FLAG_KINDS = ("unsupported", "split-from", "merge-into")


@dataclass(frozen=True)
class EditionLink:
    """Another edition's site: its number, its root relative to this site's root, its entries."""

    number: int
    href: str
    entries: frozenset[str]


@dataclass(frozen=True)
class Page:
    """What every page shares: labels, language, title, which optional pages exist."""

    labels: Labels
    language: str
    title: str
    has_changes: bool
    has_diagnostics: bool


def flag_kind(flag: str) -> str:
    """``unsupported:run-1`` -> ``unsupported``; a flag of another shape is ``other``."""
    kind = flag.split(":", 1)[0]
    return kind if kind in FLAG_KINDS else "other"


def entry_file(entry_id: str) -> str:
    return f"entries/{entry_id}.html"


def _flag_label(flag: str, labels: Labels) -> str:
    kind = flag_kind(flag)
    rest = flag.split(":", 1)[1] if ":" in flag and kind != "other" else flag
    return f"{labels['flag.' + kind]}: {rest}" if rest else labels["flag." + kind]


def _status(status: Status, labels: Labels) -> Markup:
    return el("span", {"class": f"status {status.value}"}, labels["status." + status.value])


def _shell(page: Page, *, heading: str, body: object, up: str = "") -> str:
    labels = page.labels
    nav = [el("li", None, el("a", {"href": f"{up}index.html"}, labels["index"]))]
    if page.has_changes:
        nav.append(el("li", None, el("a", {"href": f"{up}changes.html"}, labels["changes"])))
    if page.has_diagnostics:
        nav.append(el("li", None, el("a", {"href": f"{up}diagnostics.html"},
                                     labels["diagnostics"])))
    return document(
        language=page.language,
        title=f"{heading} · {page.title}",
        head=join(el("link", {"rel": "stylesheet", "href": f"{up}{STYLE_FILE}"})),
        body=el(
            "body", None,
            el("a", {"class": "skip", "href": "#main"}, labels["skip"]),
            el("header", {"class": "site"},
               el("a", {"class": "title", "href": f"{up}index.html"}, page.title),
               el("nav", {"aria-label": labels["page_nav"]}, el("ul", None, nav))),
            "\n",
            el("main", {"id": "main"}, body),
            "\n",
            el("footer", None, el("p", None, labels["site"], " · ", labels["generated"])),
            el("script", {"src": f"{up}{SCRIPT_FILE}"}),
        ),
    )


# ---------------------------------------------------------------------------------- index


def _search_text(entry: Entry) -> str:
    parts = [entry.lemma, entry.id]
    for sense in entry.senses:
        parts.append(sense.gloss)
        parts.extend(frame.pattern for frame in sense.frames)
    return " ".join(parts).lower()


def index_page(lexicon: Lexicon, page: Page, changed: frozenset[str] = frozenset()) -> str:
    labels = page.labels
    statuses = list(Status)
    flags_present = sorted({flag_kind(f) for e in lexicon.entries for s in e.senses
                            for f in s.flags})
    rows = []
    for position, entry in enumerate(lexicon.entries):
        by_status = Counter(sense.status for sense in entry.senses)
        kinds = sorted({flag_kind(f) for s in entry.senses for f in s.flags})
        frames = sum(len(s.frames) for s in entry.senses)
        examples = sum(len(s.examples) for s in entry.senses)
        rows.append(el(
            "tr",
            {"data-position": position, "data-search": _search_text(entry),
             "data-status": " ".join(s.value for s in statuses if by_status[s]),
             "data-flags": " ".join(kinds)},
            el("td", {"data-value": entry.lemma},
               el("a", {"href": entry_file(entry.id)}, entry.lemma),
               " " if entry.id in changed else None,
               el("span", {"class": "flag"}, labels["changed"]) if entry.id in changed
               else None),
            el("td", {"class": "n", "data-value": len(entry.senses)}, len(entry.senses)),
            el("td", {"data-value": " ".join(s.value for s in statuses if by_status[s])},
               [join(_status(s, labels), f" {by_status[s]} ") for s in statuses
                if by_status[s]]),
            el("td", {"class": "n", "data-value": frames}, frames),
            el("td", {"class": "n", "data-value": examples}, examples),
            el("td", {"data-value": " ".join(kinds)},
               [el("span", {"class": "flag"}, labels["flag." + k]) for k in kinds]),
        ))

    def header(label: str, numeric: bool = False, sortable: bool = True) -> Markup:
        content = el("button", {"type": "button"}, label) if sortable else label
        return el("th", {"scope": "col", "class": "n" if numeric else None}, content)

    def option(value: str, label: str) -> Markup:
        return el("option", {"value": value}, label)

    filters = el(
        "form", {"class": "filters", "id": "filters", "role": "search",
                 "aria-label": labels["filter"]},
        el("label", {"for": "q"}, labels["search"],
           el("input", {"type": "search", "id": "q", "name": "q", "autocomplete": "off"})),
        el("label", {"for": "status"}, labels["status"],
           el("select", {"id": "status", "name": "status"}, option("", labels["any"]),
              [option(s.value, labels["status." + s.value]) for s in statuses])),
        el("label", {"for": "flag"}, labels["flag"],
           el("select", {"id": "flag", "name": "flag"}, option("", labels["any"]),
              [option(k, labels["flag." + k]) for k in flags_present])),
        el("p", {"class": "meta", "aria-live": "polite"},
           el("output", {"id": "shown", "for": "q status flag"}, len(lexicon.entries)),
           f" / {len(lexicon.entries)} ", labels["shown"]),
    )
    meta = lexicon.meta
    body = join(
        el("h1", None, meta.title),
        el("p", {"class": "meta"}, f"{labels['edition']} {meta.edition} · ",
           meta.release_date.isoformat(), f" · {meta.language} · {meta.licence}"),
        filters,
        el("table", {"id": "entries"},
           el("caption", {"class": "meta"}, labels["index"]),
           el("thead", None, el("tr", None, header(labels["lemma"]),
                                header(labels["senses"], True), header(labels["status"]),
                                header(labels["frames"], True),
                                header(labels["examples"], True), header(labels["flags"]))),
           el("tbody", None, "\n", join(*(join(row, "\n") for row in rows)))),
    )
    return _shell(page, heading=labels["index"], body=body)


# ---------------------------------------------------------------------------------- entries


def _function_of(sense: Sense, example: Example, slot: int) -> str | None:
    frame = next((f for f in sense.frames if f.id is not None and f.id == example.frame), None)
    if frame is None or not 1 <= slot <= len(frame.slots):
        return None
    return frame.slots[slot - 1].function.value


def highlighted(sense: Sense, example: Example, labels: Labels) -> Markup:
    """The example text with the verb in bold and each argument marked and tagged by slot."""
    text = example.text
    spans: list[tuple[int, int, str | None, int]] = [(*example.verb, "verb", 0)]
    spans += [(*arg.span, _function_of(sense, example, arg.slot), arg.slot)
              for arg in example.arguments]
    out: list[object] = []
    position = 0
    for start, end, kind, slot in sorted(spans, key=lambda s: (s[0], s[1])):
        if start < position or not 0 <= start < end <= len(text):
            continue  # overlapping or out of the text: shown plain, never dropped
        out.append(text[position:start])
        piece = text[start:end]
        if kind == "verb":
            out.append(el("strong", {"class": "verb"}, piece))
        else:
            tag = kind or f"{labels['slot']} {slot}"
            out.append(el("mark", {"class": f"s-{kind or 'slot'}"}, piece, el("sub", None, tag)))
        position = end
    out.append(text[position:])
    return join(*out)


def _legend(labels: Labels) -> Markup:
    items = [el("div", None, el("dt", None, el("strong", {"class": "verb"}, labels["verb"])),
                el("dd", None, ""))]
    items += [el("div", None, el("dt", None, el("mark", {"class": f"s-{f.value}"}, "…",
                                                el("sub", None, f.value))),
                 el("dd", None, labels["function." + f.value])) for f in Function]
    return el("dl", {"class": "legend", "aria-label": labels["legend"]}, items)


def _frames(sense: Sense, labels: Labels) -> Markup:
    if not sense.frames:
        return el("p", {"class": "meta"}, labels["no_frames"])
    top = max((f.frequency or 0 for f in sense.frames), default=0) or 1
    items = []
    for frame in sense.frames:
        share = round(100 * (frame.frequency or 0) / top)
        count = frame.frequency if frame.frequency is not None else labels["no_frequency"]
        items.append(el(
            "li", None, el("code", None, frame.pattern),
            el("span", {"class": "meter", "role": "img",
                        "aria-label": f"{labels['frequency']} {count}"},
               el("span", {"style": f"width:{share}%"})),
            el("span", {"class": "n meta"}, count)))
    return el("ul", {"class": "frames"}, items)


def _examples(sense: Sense, labels: Labels) -> Markup:
    if not sense.examples:
        return el("p", {"class": "meta"}, labels["no_examples"])
    return el("ol", {"class": "examples"}, [
        el("li", {"id": example.id},
           highlighted(sense, example, labels),
           " ",
           el("span", {"class": "src"},
              f"{example.source.corpus} {example.source.sentence}") if example.source else None)
        for example in sense.examples
    ])


def _sense(sense: Sense, labels: Labels) -> Markup:
    return el(
        "article", {"class": f"sense {sense.status.value}", "id": sense.id,
                    "aria-labelledby": f"h-{sense.id}"},
        el("h2", {"id": f"h-{sense.id}"}, sense.id, _status(sense.status, labels)),
        el("p", {"class": "gloss"}, sense.gloss or labels["no_gloss"]),
        el("p", {"class": "note"}, el("span", {"class": "meta"}, labels["note"],
                                      labels["colon"]), sense.note) if sense.note else None,
        el("p", None, [el("span", {"class": "flag"}, _flag_label(f, labels))
                       for f in sense.flags]) if sense.flags else None,
        el("h3", None, labels["frames"]), _frames(sense, labels),
        el("h3", None, labels["examples"]), _examples(sense, labels),
    )


def _bars_table(caption: str, rows: Sequence[tuple[str, int]], head: tuple[str, str]) -> Markup:
    top = max((count for _, count in rows), default=0) or 1
    return el("table", {"class": "bars"}, el("caption", {"class": "meta"}, caption),
              el("thead", None, el("tr", None, el("th", {"scope": "col"}, head[0]),
                                   el("th", {"scope": "col", "class": "n"}, head[1]),
                                   el("th", {"scope": "col"}, ""))),
              el("tbody", None, [
                  el("tr", None, el("td", None, el("code", None, name)),
                     el("td", {"class": "n"}, count),
                     el("td", {"class": "bar"},
                        el("span", {"class": "meter", "role": "presentation"},
                           el("span", {"style": f"width:{round(100 * count / top)}%"}))))
                  for name, count in rows]))


def induced_section(induced: InducedEntry | None, plot: str | None, missing: str | None,
                    labels: Labels, *, up: str = "") -> Markup:
    if induced is None:
        return el("section", {"aria-labelledby": "diag"},
                  el("h2", {"id": "diag"}, labels["diagnostics"]),
                  el("p", {"class": "meta"}, labels["not_induced"]))
    sizes = [(s.id, s.assigned or s.cluster_size) for s in induced.senses]
    parts: list[object] = [
        el("h2", {"id": "diag"}, labels["diagnostics"]),
        _bars_table(labels["cluster_sizes"], sizes, (labels["cluster"], labels["occurrences"])),
        el("h3", None, labels["frame_distribution"]),
        el("div", {"class": "diag-grid"}, [
            el("div", None, _bars_table(s.id, list(s.frames),
                                        (labels["frames"], labels["frequency"])))
            for s in induced.senses]),
        el("h3", None, labels["projection"]),
    ]
    if plot is not None:
        alt = labels["projection_alt"].format(
            lemma=induced.lemma, senses=", ".join(s.id for s in induced.senses))
        parts.append(el("figure", None, el("img", {"src": f"{up}{plot}", "alt": alt}),
                        el("figcaption", None, labels["projection"])))
    elif missing:
        parts.append(el("p", {"class": "meta"}, missing))
    return el("section", {"aria-labelledby": "diag"}, parts)


def entry_page(
    entry: Entry,
    page: Page,
    *,
    changed: bool = False,
    editions: Sequence[EditionLink] = (),
    diagnostics: Markup | None = None,
) -> str:
    labels = page.labels
    up = "../"
    others = [e for e in editions if entry.id in e.entries]
    body = join(
        el("h1", None, entry.lemma, el("span", {"class": "pos"}, entry.pos)),
        el("p", {"class": "notice"}, labels["changed"], " — ",
           el("a", {"href": f"{up}changes.html#e-{entry.id}"}, labels["see_changes"]))
        if changed else None,
        el("nav", {"aria-label": labels["other_editions"]},
           el("p", {"class": "meta"}, labels["other_editions"], labels["colon"],
              join(*(join(" · " if n else "", el(
                  "a", {"href": f"{up}{e.href}{entry_file(entry.id)}"},
                  f"{labels['edition']} {e.number}")) for n, e in enumerate(others)))))
        if others else None,
        el("p", {"class": "note"}, entry.note) if entry.note else None,
        _legend(labels),
        el("div", {"class": "senses"}, [_sense(sense, labels) for sense in entry.senses]),
        diagnostics,
    )
    return _shell(page, heading=entry.lemma, body=body, up=up)


# ---------------------------------------------------------------------------------- changes


def changes_page(changes: LexiconDiff | None, lexicon: Lexicon, page: Page) -> str:
    labels = page.labels
    known = {entry.id for entry in lexicon.entries}
    if changes is None:
        body = join(el("h1", None, labels["changes"]),
                    el("p", None, labels["first_edition"]))
        return _shell(page, heading=labels["changes"], body=body)
    summary = el("table", None, el("caption", {"class": "meta"}, labels["summary"]),
                 el("tbody", None, [
                     el("tr", None, el("th", {"scope": "row"}, labels["kind." + kind]),
                        el("td", {"class": "n"}, count))
                     for kind, count in changes.summary.items() if count]))
    by_entry: dict[str, list[str]] = {}
    for change, line in zip(changes.changes, change_lines(changes), strict=True):
        # change_lines starts each line with the kind's English title: put the site's own
        description = line.split(": ", 1)[1] if ": " in line else line
        by_entry.setdefault(change.entry, []).append(
            f"{labels['kind.' + change.kind]}{labels['colon']}{description}")
    sections = [
        el("section", {"id": f"e-{entry_id}", "aria-labelledby": f"c-{entry_id}"},
           el("h2", {"id": f"c-{entry_id}"},
              el("a", {"href": entry_file(entry_id)}, entry_id) if entry_id in known
              else entry_id),
           el("ul", None, [el("li", None, line) for line in lines]))
        for entry_id, lines in sorted(by_entry.items())
    ]
    body = join(
        el("h1", None, labels["changes"]),
        el("p", {"class": "meta"}, f"{changes.old_label} → {changes.new_label}"),
        summary if changes.changes else el("p", None, labels["no_changes"]),
        sections,
    )
    return _shell(page, heading=labels["changes"], body=body)


# ------------------------------------------------------------------------------ diagnostics


def diagnostics_page(
    induction: InductionView | None,
    calibration: Mapping[str, object] | None,
    calibration_plot: str | None,
    entry_ids: Mapping[str, str],
    page: Page,
) -> str:
    labels = page.labels
    parts: list[object] = [el("h1", None, labels["diagnostics"])]
    if induction is not None:
        manifest = induction.manifest
        facts = [
            (labels["induction_run"], str(manifest.get("run", induction.name))),
            (labels["representation"], str(manifest.get("representation", ""))),
            (labels["model"], str(manifest.get("model") or "")),
            (labels["threshold"], str(manifest.get("threshold", ""))),
        ]
        parts.append(el("dl", {"class": "legend"}, [
            el("div", None, el("dt", None, name), el("dd", None, value)) for name, value in facts]))
        rows = [(induced.lemma, sum(s.assigned or s.cluster_size for s in induced.senses),
                 len(induced.senses)) for induced in induction.entries.values()]
        parts.append(el("table", None,
            el("caption", {"class": "meta"}, labels["cluster_sizes"]),
            el("thead", None, el("tr", None, el("th", {"scope": "col"}, labels["lemma"]),
                                 el("th", {"scope": "col", "class": "n"}, labels["occurrences"]),
                                 el("th", {"scope": "col", "class": "n"}, labels["senses"]))),
            el("tbody", None, [el("tr", None, el("td", None, el(
                "a", {"href": entry_file(entry_ids[lemma])}, lemma) if lemma in entry_ids
                else lemma), el("td", {"class": "n"}, occurrences), el("td", {"class": "n"}, n))
                for lemma, occurrences, n in rows])))
    if calibration is not None and calibration_plot is not None:
        recommended = calibration.get("recommended")
        chosen = recommended.get("threshold") if isinstance(recommended, dict) else None
        parts += [
            el("h2", None, labels["calibration"]),
            el("figure", None,
               el("img", {"src": calibration_plot,
                          "alt": labels["calibration_alt"].format(threshold=chosen)}),
               el("figcaption", None, f"{labels['chosen']}{labels['colon']}{chosen}")),
        ]
    return _shell(page, heading=labels["diagnostics"], body=join(*parts))
