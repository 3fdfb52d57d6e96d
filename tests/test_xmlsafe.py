"""Safe parsing of untrusted XML, and the text-level XML writer the exporters use."""

from __future__ import annotations

from pathlib import Path

import pytest
from hypothesis import given
from hypothesis import strategies as st
from lxml import etree

from lexbuild.errors import UnsafeXMLError
from lexbuild.formats.xmlsafe import (
    XmlWriter,
    escape_attribute,
    escape_text,
    forbidden_character,
    indent,
    parse_untrusted,
)

# The classic entity-expansion document ("billion laughs", OWASP XML Security Cheat Sheet).
BILLION_LAUGHS = b"""<?xml version="1.0"?>
<!DOCTYPE lolz [
 <!ENTITY lol "lol">
 <!ENTITY lol2 "&lol;&lol;&lol;&lol;&lol;&lol;&lol;&lol;&lol;&lol;">
 <!ENTITY lol3 "&lol2;&lol2;&lol2;&lol2;&lol2;&lol2;&lol2;&lol2;&lol2;&lol2;">
]>
<lolz>&lol3;</lolz>"""

# External entity (XXE, same cheat sheet).
EXTERNAL_ENTITY = b"""<?xml version="1.0"?>
<!DOCTYPE foo [ <!ENTITY xxe SYSTEM "file:///etc/passwd"> ]>
<foo>&xxe;</foo>"""

xml_characters = st.characters(exclude_categories=["Cs"]).filter(
    lambda c: forbidden_character(c) is None
)


@pytest.mark.parametrize("document", [BILLION_LAUGHS, EXTERNAL_ENTITY])
def test_entity_documents_are_refused(document: bytes, tmp_path: Path) -> None:
    with pytest.raises(UnsafeXMLError, match="internal DTD subset"):
        parse_untrusted(document)
    path = tmp_path / "evil.xml"
    path.write_bytes(document)
    with pytest.raises(UnsafeXMLError, match=str(path)):
        parse_untrusted(path)


def test_external_dtd_is_not_fetched(tmp_path: Path) -> None:
    # A DOCTYPE naming an external DTD is fine, but the DTD is never loaded: no default
    # attribute from it appears.
    dtd = tmp_path / "d.dtd"
    dtd.write_text('<!ATTLIST a b CDATA "from-dtd">')
    document = f'<!DOCTYPE a SYSTEM "{dtd}"><a/>'.encode()
    assert parse_untrusted(document).getroot().get("b") is None


def test_size_limit(tmp_path: Path) -> None:
    with pytest.raises(UnsafeXMLError, match="over the limit"):
        parse_untrusted(b"<a>" + b"x" * 100 + b"</a>", max_bytes=50)
    path = tmp_path / "big.xml"
    path.write_bytes(b"<a>" + b"x" * 100 + b"</a>")
    with pytest.raises(UnsafeXMLError, match="over the limit"):
        parse_untrusted(path, max_bytes=50)
    assert parse_untrusted(path).getroot().text == "x" * 100


def test_forbidden_characters_follow_xml_1_0() -> None:
    # XML 1.0 (fifth edition) section 2.2, production [2] Char.
    for allowed in ("\t", "\n", "\r", " ", "\x85", "\ud7ff", "\ue000", "\U0001f600"):
        assert forbidden_character(f"a{allowed}") is None
    for refused in ("\x00", "\x08", "\x0b", "\x0c", "\x1f", "\ufffe", "\uffff", "\ud800"):
        assert (
            forbidden_character(f"ab{refused}") == f"character U+{ord(refused):04X} at position 3"
        )
    # lxml agrees on the refused ones (it raises ValueError for them).
    for refused in ("\x01", "\x0b", "\ufffe"):
        with pytest.raises(ValueError):
            etree.Element("a").text = refused


@given(st.text(xml_characters))
def test_escaped_text_and_attributes_parse_back_exactly(text: str) -> None:
    document = f'<a b="{escape_attribute(text)}">{escape_text(text)}</a>'.encode()
    root = etree.fromstring(document)  # lxml as the reference parser
    assert root.get("b") == text
    assert (root.text or "") == text


def test_writer_output_is_well_formed_and_indented() -> None:
    out = XmlWriter()
    out.open("root", [("id", 'r<&>"1')])
    out.leaf("empty")
    out.leaf("text", "a & b < c", [("n", "1")])
    out.raw("<mixed>x <b>y</b> z</mixed>")
    out.close("root")
    text = out.text()
    assert text.splitlines()[1] == "  <empty/>"
    root = etree.fromstring(text.encode())
    assert root.get("id") == 'r<&>"1'
    assert root.findtext("text") == "a & b < c"
    assert "".join(root.find("mixed").itertext()) == "x y z"


def test_indent_leaves_mixed_content_alone() -> None:
    root = etree.fromstring(b"<r><q><s>Le</s> jury</q><p><c/></p></r>")
    indent(root, mixed={"q"})
    assert etree.tostring(root.find("q")).startswith(b"<q><s>Le</s> jury</q>")
    assert etree.tostring(root) == (b"<r>\n  <q><s>Le</s> jury</q>\n  <p>\n    <c/>\n  </p>\n</r>")
