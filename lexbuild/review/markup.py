"""A tiny HTML builder that escapes by construction.

Text is escaped unless it is ``Markup`` (produced only by this module's functions), and every
attribute value is escaped with quotes: a gloss or an example with ``<``, ``&`` or quotes can
never break a page. No template engine: the pages are small pure functions over the model.
"""

from __future__ import annotations

import html
from collections.abc import Iterable, Mapping

__all__ = ["Markup", "document", "el", "join", "text"]

#: Elements without a closing tag.
_VOID = frozenset({"br", "hr", "img", "input", "link", "meta", "col"})


class Markup(str):
    """A string already safe to put in HTML."""

    __slots__ = ()


def text(value: object) -> Markup:
    """Escaped text (``Markup`` passes unchanged)."""
    if isinstance(value, Markup):
        return value
    return Markup(html.escape(str(value), quote=True))


def _children(children: Iterable[object]) -> Iterable[str]:
    for child in children:
        if child is None or child is False:
            continue
        if isinstance(child, str | int | float):
            yield text(child)
        else:
            yield from _children(child)  # type: ignore[arg-type]


def join(*children: object) -> Markup:
    """Children (strings escaped, nested iterables flattened) as one piece of markup."""
    return Markup("".join(_children(children)))


def el(tag: str, attrs: Mapping[str, str | int | bool | None] | None = None,
       *children: object) -> Markup:
    """``<tag attrs>children</tag>``; attributes set to None or False are left out, True is
    written bare; attributes keep the given order (stable bytes)."""
    parts = [tag]
    for name, value in (attrs or {}).items():
        if value is None or value is False:
            continue
        if value is True:
            parts.append(name)
        else:
            parts.append(f'{name}="{html.escape(str(value), quote=True)}"')
    opening = f"<{' '.join(parts)}>"
    if tag in _VOID:
        return Markup(opening)
    return Markup(f"{opening}{join(*children)}</{tag}>")


def document(*, language: str, title: str, head: object, body: object) -> str:
    """A whole HTML5 page."""
    return (
        "<!DOCTYPE html>\n"
        + el(
            "html",
            {"lang": language},
            el("head", None, el("meta", {"charset": "utf-8"}),
               el("meta", {"name": "viewport", "content": "width=device-width, initial-scale=1"}),
               el("title", None, title), head),
            "\n",
            body,
        )
        + "\n"
    )
