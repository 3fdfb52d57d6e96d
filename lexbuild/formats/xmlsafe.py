"""Safe parsing of XML that lexbuild did not write itself (files handed to ``validate``).

No entity is ever expanded, no DTD or network resource is fetched, and a document that declares
anything in an internal DTD subset is refused outright: that subset is where billion-laughs and
external-entity attacks live, and none of our formats needs one.
"""

from __future__ import annotations

import re
from collections.abc import Collection, Iterable, Iterator
from pathlib import Path
from typing import Any

from lxml import etree

from lexbuild.errors import MalformedXMLError, SourceLocation, UnsafeXMLError

__all__ = [
    "DEFAULT_MAX_BYTES",
    "XmlWriter",
    "describe_forbidden",
    "escape_attribute",
    "escape_text",
    "forbidden_character",
    "forbidden_characters",
    "indent",
    "malformed",
    "parse_untrusted",
    "safe_parser",
]

DEFAULT_MAX_BYTES = 256 * 1024 * 1024
# An internal subset starts with '[' after the DOCTYPE name and optional external id.
_DOCTYPE_RE = re.compile(rb"<!DOCTYPE[^>\[]*\[", re.IGNORECASE)
_DECLARATION_RE = re.compile(rb"<!(ENTITY|ELEMENT|ATTLIST|NOTATION)\b")


def safe_parser() -> etree.XMLParser:
    """A parser that resolves nothing and fetches nothing (a fresh one: parsers keep state)."""
    return etree.XMLParser(
        resolve_entities=False,
        no_network=True,
        load_dtd=False,
        dtd_validation=False,
        huge_tree=False,
        remove_blank_text=False,
    )


def _read(source: str | Path | bytes, max_bytes: int) -> tuple[bytes, str]:
    if isinstance(source, bytes):
        data, name = source, "<bytes>"
    else:
        path = Path(source)
        try:
            size = path.stat().st_size
            if size > max_bytes:
                raise UnsafeXMLError(f"{path}: {size} bytes is over the limit of {max_bytes} bytes")
            data, name = path.read_bytes(), str(path)
        except OSError as error:
            raise MalformedXMLError(
                f"cannot read the file: {error.strerror or error}", SourceLocation(str(path))
            ) from None
    if len(data) > max_bytes:
        raise UnsafeXMLError(f"{name}: {len(data)} bytes is over the limit of {max_bytes} bytes")
    return data, name


def parse_untrusted(
    source: str | Path | bytes, max_bytes: int = DEFAULT_MAX_BYTES
) -> etree._ElementTree:
    """Parse ``source`` (a path or the bytes of a document) without trusting it.

    Raises ``UnsafeXMLError`` for an internal DTD subset or entity declaration, or a document
    over ``max_bytes``; ``MalformedXMLError`` (file, line, column of the first error) for XML
    that is not well-formed, whatever the cause: syntax, encoding, two roots, a duplicate
    ``xml:id``, nesting deeper than libxml2's 256 levels or a text node over its 10 MB.
    """
    data, name = _read(source, max_bytes)
    # Check the raw bytes first so that nothing is even parsed when a subset is present.
    if _DOCTYPE_RE.search(data) or _DECLARATION_RE.search(data):
        raise UnsafeXMLError(
            f"{name}: the document declares an internal DTD subset or entities; lexbuild refuses "
            "them (entity expansion and external entities are attack vectors)"
        )
    parser = safe_parser()
    try:
        tree = etree.ElementTree(etree.fromstring(data, parser, base_url=None))
    except etree.XMLSyntaxError as error:
        raise malformed(error, parser, name) from None
    # Belt and braces: the byte scan could be fooled by an encoding other than UTF-8/ASCII;
    # unexpanded entity references would then still show up as Entity nodes.
    for node in tree.iter(etree.Entity):
        raise UnsafeXMLError(f"{name}: entity reference &{node.name}; refused")
    return tree


def malformed(error: etree.XMLSyntaxError, parser: etree.XMLParser, name: str) -> MalformedXMLError:
    """The first error of a failed parse as one coded error with file, line and column."""
    entries = [entry for entry in parser.error_log if entry.level >= etree.ErrorLevels.ERROR]
    if entries:
        first = entries[0]
        message, line, column = first.message, first.line, first.column + 1
    else:
        message = str(error.msg or error)
        line, column = (error.position or (0, -1))[0], (error.position or (0, -1))[1] + 1
    return MalformedXMLError(
        f"not well-formed XML: {message.strip()}",
        SourceLocation(name, max(line, 0), max(column, 0)),
    )


# XML 1.0 section 2.2 'Char': of the C0 controls only tab, line feed and carriage return; no
# surrogates; not U+FFFE or U+FFFF. (lxml refuses all of these with a bare ValueError.)
_NOT_XML_CHAR = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\ud800-\udfff\ufffe\uffff]")
# The same, plus DEL and the C1 controls, which the same section discourages: the consistency
# check refuses them too, since no dictionary text needs them.
_NOT_XML_OR_DISCOURAGED = re.compile(
    "[\x00-\x08\x0b\x0c\x0e-\x1f\x7f-\x9f\ud800-\udfff\ufffe\uffff]"
)

ValuePath = tuple[str | int, ...]


def forbidden_character(text: str, *, discouraged: bool = False) -> str | None:
    """Describe the first character of ``text`` that XML 1.0 cannot hold, or None.

    With ``discouraged``, DEL and the C1 controls (U+007F-U+009F) count as well.
    """
    pattern = _NOT_XML_OR_DISCOURAGED if discouraged else _NOT_XML_CHAR
    match = pattern.search(text)
    if match is None:
        return None
    return f"character U+{ord(match.group(0)):04X} at position {match.start() + 1}"


def forbidden_characters(
    value: Any, path: ValuePath = (), *, discouraged: bool = False
) -> Iterator[tuple[ValuePath, str]]:
    """Every string under a JSON-like value holding a forbidden character: (path, description)."""
    if isinstance(value, str):
        found = forbidden_character(value, discouraged=discouraged)
        if found:
            yield path, found
    elif isinstance(value, dict):
        for key, item in value.items():
            yield from forbidden_characters(item, (*path, key), discouraged=discouraged)
    elif isinstance(value, list | tuple):
        for index, item in enumerate(value):
            yield from forbidden_characters(item, (*path, index), discouraged=discouraged)


def describe_forbidden(value: Any, where: str) -> str:
    """``where.field[0].path: character U+... at position n`` for the first bad string."""
    for path, found in forbidden_characters(value):
        suffix = "".join(f"[{part}]" if isinstance(part, int) else f".{part}" for part in path)
        return f"{where}{suffix}: {found}"
    return f"{where}: a character XML 1.0 forbids"


def indent(
    root: etree._Element, *, mixed: Collection[str] = frozenset(), space: str = "  "
) -> None:
    """Indent element-only content in place; never touch text that belongs to the data.

    An element whose tag is in ``mixed``, or that holds non-blank text or tails, is left as it
    is, together with everything inside it (``lxml.etree.indent`` would put whitespace into a
    quotation that starts with a marked-up word).
    """
    stack: list[tuple[etree._Element, int]] = [(root, 0)]
    while stack:
        element, level = stack.pop()
        if len(element) == 0 or element.tag in mixed:
            continue
        if element.text and element.text.strip():
            continue
        if any(child.tail and child.tail.strip() for child in element):
            continue
        pad = "\n" + space * (level + 1)
        element.text = pad
        for child in element:
            child.tail = pad
            stack.append((child, level + 1))
        element[-1].tail = "\n" + space * level


# --------------------------------------------------------------------------- writing XML text

_TEXT_SPECIAL = re.compile("[&<>\r]")
_ATTRIBUTE_SPECIAL = re.compile('[&<>"\n\r\t]')
_TEXT_TABLE = str.maketrans({"&": "&amp;", "<": "&lt;", ">": "&gt;", "\r": "&#13;"})
_ATTRIBUTE_TABLE = str.maketrans(
    {
        "&": "&amp;",
        "<": "&lt;",
        ">": "&gt;",
        '"': "&quot;",
        "\n": "&#10;",
        "\r": "&#13;",
        "\t": "&#9;",
    }
)


def escape_text(text: str) -> str:
    """Character data as XML text content (a carriage return survives as ``&#13;``)."""
    return text.translate(_TEXT_TABLE) if _TEXT_SPECIAL.search(text) else text


def escape_attribute(text: str) -> str:
    """A value for a double-quoted attribute; tab, newline and CR survive attribute
    normalisation as character references."""
    return text.translate(_ATTRIBUTE_TABLE) if _ATTRIBUTE_SPECIAL.search(text) else text


def _attributes(attributes: Iterable[tuple[str, str]]) -> str:
    return "".join(f' {name}="{escape_attribute(value)}"' for name, value in attributes)


class XmlWriter:
    """Indented XML built as text (several times faster than an lxml tree for big exports).

    Attributes are ``(name, value)`` pairs written in the order given, so output is
    deterministic. Callers check that text holds only XML characters (``forbidden_character``).
    """

    def __init__(self, space: str = "  ") -> None:
        self.parts: list[str] = []
        self.depth = 0
        self.space = space

    def open(self, tag: str, attributes: Iterable[tuple[str, str]] = ()) -> None:
        self.parts.append(f"{self.space * self.depth}<{tag}{_attributes(attributes)}>")
        self.depth += 1

    def close(self, tag: str) -> None:
        self.depth -= 1
        self.parts.append(f"{self.space * self.depth}</{tag}>")

    def leaf(
        self, tag: str, text: str | None = None, attributes: Iterable[tuple[str, str]] = ()
    ) -> None:
        pad = self.space * self.depth
        if text is None or text == "":
            self.parts.append(f"{pad}<{tag}{_attributes(attributes)}/>")
        else:
            self.parts.append(f"{pad}<{tag}{_attributes(attributes)}>{escape_text(text)}</{tag}>")

    def raw(self, markup: str) -> None:
        """A line of markup the caller has escaped already, at the current depth."""
        self.parts.append(f"{self.space * self.depth}{markup}")

    def mark(self) -> int:
        return len(self.parts)

    def since(self, mark: int) -> str:
        return "\n".join(self.parts[mark:])

    def text(self) -> str:
        return "\n".join(self.parts) + "\n"


def inline(tag: str, text: str | None = None, attributes: Iterable[tuple[str, str]] = ()) -> str:
    """One element as a string, for mixed content built by hand."""
    if text is None:
        return f"<{tag}{_attributes(attributes)}/>"
    return f"<{tag}{_attributes(attributes)}>{escape_text(text)}</{tag}>"
