"""Validate TEI Lex-0 and LMF documents against the published schemas (and a project's own).

* TEI Lex-0: ``TEILex0.rng`` (RelaxNG) and ``TEILex0.sch`` (Schematron);
* LMF: ``DTD_LMF_REV_16.dtd``;
* both: the pointers the schemas cannot check (TEI ``#id`` references, LMF ``feat`` values naming
  frames and slots), and the extra schemas a lexicon's metadata lists (XSD through
  ``xmlschema``, RelaxNG, Schematron).

The published files come from :mod:`lexbuild.formats.schemastore` (checksums verified).
Documents are parsed from bytes with :func:`lexbuild.formats.xmlsafe.parse_untrusted`, so
duplicate ids are caught (lxml only sees them when parsing, never on a tree built in memory).
Every finding names the line in the XML, the nearest ancestor carrying an id, and, given the
``SourceMap`` of the YAML sources, the file and line of that id in the sources.
"""

from __future__ import annotations

import bisect
import contextlib
import io
import json
import os
import re
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Literal, Protocol

from lxml import etree, isoschematron

from lexbuild.errors import (
    MalformedXMLError,
    SchemaError,
    SourceLocation,
    UnsafeXMLError,
    ValidationFailed,
)
from lexbuild.formats.fragments import id_scope, ids_distinct
from lexbuild.formats.schemastore import LMF_DTD, TEI_RNG, TEI_SCH, SchemaSet, load_schemas
from lexbuild.formats.xmlsafe import DEFAULT_MAX_BYTES, parse_untrusted, safe_parser
from lexbuild.lexicon.model import ExtraSchema

__all__ = [
    "XmlFinding",
    "detect_format",
    "findings_json",
    "findings_text",
    "validate_bytes",
    "validate_file",
]

Format = Literal["tei", "lmf"]
TEI_NS = "http://www.tei-c.org/ns/1.0"
_XML_ID = "{http://www.w3.org/XML/1998/namespace}id"
_SVRL = {"svrl": "http://purl.oclc.org/dsdl/svrl"}
POINTERS = "lexbuild pointer check"
SAFETY = "lexbuild safe parsing"
_DUPLICATE_ID = re.compile(r"ID (\S+) already defined")
_LOCAL_NAME = re.compile(r"\*\[local-name\(\)='([^']+)' and namespace-uri\(\)='[^']*'\]")


class _Locator(Protocol):  # what a SourceMap offers (lexbuild.lexicon.sources.SourceMap)
    def locate_id(self, identifier: str) -> SourceLocation | None: ...

    def meta_location(self, path: tuple[str | int, ...] = ()) -> SourceLocation: ...


@dataclass(frozen=True, slots=True)
class XmlFinding:
    """One validation problem: where in the XML, which id, which schema, where in the sources."""

    message: str
    line: int
    xml_id: str | None
    source: SourceLocation | None
    schema: str
    document: str = "<bytes>"

    def __str__(self) -> str:
        where = f"{self.document}:{self.line}" if self.line else self.document
        text = f"{where}: {self.message} [{self.schema}]"
        if self.xml_id:
            text += f" (in id {self.xml_id})"
        if self.source is not None:
            text += f"\n    source: {self.source}"
        return text

    def as_dict(self) -> dict[str, Any]:
        return {
            "document": self.document,
            "line": self.line,
            "xml_id": self.xml_id,
            "schema": self.schema,
            "message": self.message,
            "source": None
            if self.source is None
            else {
                "file": self.source.file,
                "line": self.source.line,
                "column": self.source.column,
            },
        }


def findings_text(findings: Sequence[XmlFinding]) -> str:
    lines = [str(finding) for finding in findings]
    lines.append(f"{len(findings)} validation problem(s)" if findings else "valid")
    return "\n".join(lines) + "\n"


def findings_json(findings: Sequence[XmlFinding]) -> str:
    document = {"problems": len(findings), "findings": [f.as_dict() for f in findings]}
    return json.dumps(document, indent=2, ensure_ascii=False) + "\n"


# ------------------------------------------------------------------------------ format


def _format_of(tag: Any) -> Format | None:
    if tag == "{" + TEI_NS + "}TEI":
        return "tei"
    if tag == "LexicalResource":
        return "lmf"
    return None


def detect_format(data: bytes) -> Format:
    """``"tei"`` (TEI root element) or ``"lmf"`` (``LexicalResource``); reads only the root."""
    try:
        for _, element in etree.iterparse(
            io.BytesIO(data),
            events=("start",),
            resolve_entities=False,
            no_network=True,
            load_dtd=False,
        ):
            found = _format_of(element.tag)
            if found is None:
                raise ValidationFailed(
                    f"root element {element.tag!r} is neither TEI (TEI Lex-0, namespace "
                    f"{TEI_NS}) nor LexicalResource (LMF rev. 16, no namespace)"
                )
            return found
    except etree.XMLSyntaxError as error:
        raise ValidationFailed(f"not well-formed XML: {error}") from None
    raise ValidationFailed("empty document: no root element")


# ------------------------------------------------------------------------------ locating


class _Where:
    """Maps XML lines to elements, elements to ids, ids to source lines (built lazily)."""

    def __init__(
        self,
        tree: etree._ElementTree | None,
        fmt: Format | None,
        source_map: _Locator | None,
        document: str,
    ) -> None:
        self.tree = tree
        self.id_attr = "id" if fmt == "lmf" else _XML_ID
        self.source_map = source_map
        self.document = document
        self._lines: list[int] | None = None
        self._elements: list[etree._Element] = []

    def element_at(self, line: int) -> etree._Element | None:
        if self.tree is None or line <= 0:
            return None
        if self._lines is None:
            lines: list[int] = []
            for element in self.tree.getroot().iter(tag=etree.Element):
                number = element.sourceline or 0
                if not lines or number > lines[-1]:
                    lines.append(number)
                    self._elements.append(element)
            self._lines = lines
        index = bisect.bisect_right(self._lines, line) - 1
        return self._elements[index] if index >= 0 else None

    def ids_up(self, element: etree._Element | None) -> list[str]:
        found = []
        while element is not None:
            value = element.get(self.id_attr)
            if value:
                found.append(value)
            element = element.getparent()
        return found

    def finding(
        self,
        message: str,
        schema: str,
        *,
        line: int = 0,
        element: etree._Element | None = None,
        xml_id: str | None = None,
    ) -> XmlFinding:
        if element is None:
            element = self.element_at(line)
        elif not line:
            line = element.sourceline or 0
        chain = self.ids_up(element)
        if xml_id is None and chain:
            xml_id = chain[0]
        source = None
        if self.source_map is not None:
            for identifier in ([xml_id] if xml_id else []) + chain:
                source = self.source_map.locate_id(identifier)
                if source is not None:
                    break
            if source is None and element is not None and _in_header(element):
                source = self.source_map.meta_location(())
        return XmlFinding(message, line, xml_id, source, schema, self.document)


def _in_header(element: etree._Element) -> bool:
    for ancestor in element.iterancestors():
        if ancestor.tag in ("{" + TEI_NS + "}teiHeader", "GlobalInformation"):
            return True
    return element.tag in ("{" + TEI_NS + "}teiHeader", "GlobalInformation")


def _log_findings(log: Any, schema: str, where: _Where) -> list[XmlFinding]:
    return [where.finding(entry.message, schema, line=entry.line) for entry in log]


def _schematron_findings(
    schematron: isoschematron.Schematron, tree: etree._ElementTree, schema: str, where: _Where
) -> list[XmlFinding]:
    if schematron.validate(tree):
        return []
    report = schematron.validation_report
    findings = []
    if report is None:
        return _log_findings(schematron.error_log, schema, where)
    for failure in report.getroot().xpath(
        "svrl:failed-assert | svrl:successful-report", namespaces=_SVRL
    ):
        text = " ".join("".join(failure.itertext()).split())
        location = failure.get("location", "")
        element = None
        try:
            hits = tree.xpath(location) if location else []
            element = hits[0] if hits and isinstance(hits[0], etree._Element) else None
        except etree.XPathError:
            element = None
        shown = _LOCAL_NAME.sub(r"\1", location)
        findings.append(where.finding(f"{text} (at {shown})", schema, element=element))
    return findings


# ------------------------------------------------------------------------------ pointers


_POINTER_ATTRIBUTES = ("ana", "corresp", "target", "change", "who")
_POINTER_VALUES = re.compile(
    rb"\s(?:ana|corresp|target|change|who)\s*=\s*(?:\"([^\"]*)\"|'([^']*)')"
)


def _pointers_resolve(data: bytes, known: set[str]) -> bool:
    """Fast first pass over the raw bytes: True when every ``#id`` pointer resolves.

    A value with a character reference, or a pointer that does not resolve, sends the caller
    to the exact check on the parsed tree (which also ignores look-alikes in text content).
    """
    for double, single in _POINTER_VALUES.findall(data):
        value = double or single
        if b"&" in value:
            return False
        for token in value.split():
            if token[:1] == b"#" and token[1:].decode("utf-8", "replace") not in known:
                return False
    return True


_ALL_XML_IDS = etree.XPath("//@xml:id", smart_strings=False)  # plain strings: faster


def _tei_pointers(data: bytes, tree: etree._ElementTree, where: _Where) -> list[XmlFinding]:
    root = tree.getroot()
    known = set(_ALL_XML_IDS(root))
    findings = []
    for element in root.xpath("//*[@subtype and not(@type)]"):
        findings.append(
            where.finding("@subtype is used without @type (a TEI rule)", POINTERS, element=element)
        )
    if _pointers_resolve(data, known):
        return findings
    for name in _POINTER_ATTRIBUTES:
        # One query per attribute: a union (a | b) makes libxml2 sort the whole result.
        for value in root.xpath(f"//@{name}"):
            for token in str(value).split():
                if token.startswith("#") and token[1:] not in known:
                    findings.append(
                        where.finding(
                            f"@{name} points at {token}, which no xml:id in the document bears",
                            POINTERS,
                            element=value.getparent(),
                        )
                    )
    return findings


_SLOT = re.compile(r"slot-?[0-9]+")


def _lmf_pointers(tree: etree._ElementTree, where: _Where) -> list[XmlFinding]:
    # One walk over the tree instead of four '//' queries (a measured 5x faster on 10,000
    # entries); the findings keep the queries' order: frame pointers first, in document order.
    root = tree.getroot()
    frames: set[str | None] = set()
    arguments: set[str | None] = set()
    frame_feats: list[etree._Element] = []
    slot_feats: list[etree._Element] = []
    for element in root.iter("SubcategorizationFrame", "SyntacticArgument", "SenseExample"):
        if element.tag == "SubcategorizationFrame":
            frames.add(element.get("id"))
        elif element.tag == "SyntacticArgument":
            arguments.add(element.get("id"))
        else:
            for feat in element.iterchildren("feat"):
                att = feat.get("att")
                if att == "subcategorizationFrame":
                    frame_feats.append(feat)
                elif att == "argumentPosition":
                    slot_feats.append(feat)
    frames.discard(None)
    arguments.discard(None)
    findings = []
    for feat in frame_feats:
        if feat.get("val") not in frames:
            findings.append(
                where.finding(
                    f"feat subcategorizationFrame names {feat.get('val')!r}, which is not the id "
                    "of a SubcategorizationFrame",
                    POINTERS,
                    element=feat,
                )
            )
    for feat in slot_feats:
        name = (feat.get("val") or "").split("=", 1)[0]
        if not _SLOT.fullmatch(name) and name not in arguments:
            findings.append(
                where.finding(
                    f"feat argumentPosition names {name!r}, which is not the id of a "
                    "SyntacticArgument",
                    POINTERS,
                    element=feat,
                )
            )
    return findings


# ------------------------------------------------------------------------------ extra schemas


_EXTRA_CACHE: dict[tuple[str, str, float], Any] = {}


def _extra_path(extra: ExtraSchema, base_dir: Path | None) -> Path:
    """The schema file of an ``extra_schemas`` item, which must lie inside the sources folder.

    Absolute paths, ``..`` and symbolic links leading out are refused: a lexicon's metadata
    must not make ``export`` read files elsewhere on the machine.
    """
    root = (base_dir if base_dir is not None else Path.cwd()).resolve()
    given = Path(extra.path)
    if given.is_absolute() or ".." in given.parts or "://" in extra.path:
        raise SchemaError(
            f"extra {extra.kind} schema {extra.path!r} (extra_schemas in the lexicon metadata): "
            "give a path relative to the sources folder, without '..'"
        )
    path = (root / given).resolve()
    if not path.is_relative_to(root):
        raise SchemaError(
            f"extra {extra.kind} schema {extra.path!r} leads out of the sources folder {root} "
            "(a symbolic link?): copy the schema into the folder"
        )
    if not path.is_file():
        raise SchemaError(
            f"extra {extra.kind} schema {path} (listed under extra_schemas in the lexicon "
            "metadata) not found"
        )
    return path


# Schema constructs that load another file: each target must be a local file in the folder.
_LOADING_ATTRIBUTES = {
    "{http://relaxng.org/ns/structure/1.0}include": "href",
    "{http://relaxng.org/ns/structure/1.0}externalRef": "href",
    "{http://www.w3.org/2001/XInclude}include": "href",
    "{http://www.w3.org/2001/XMLSchema}import": "schemaLocation",
    "{http://www.w3.org/2001/XMLSchema}include": "schemaLocation",
    "{http://www.w3.org/2001/XMLSchema}redefine": "schemaLocation",
    "{http://www.w3.org/2001/XMLSchema}override": "schemaLocation",
    "{http://www.w3.org/1999/XSL/Transform}import": "href",
    "{http://www.w3.org/1999/XSL/Transform}include": "href",
}


def _check_references(path: Path, root: Path, seen: set[Path]) -> None:
    """Walk the files a schema loads; refuse any URL and any file outside ``root``.

    Done before any library compiles the schema, so that nothing is fetched: neither lxml's
    RelaxNG and Schematron compilers nor xmlschema get the chance to open a network address.
    """
    if path in seen:
        return
    seen.add(path)
    try:
        tree = parse_untrusted(path)
    except (MalformedXMLError, UnsafeXMLError) as error:
        raise SchemaError(f"cannot read extra schema: {error}") from None
    for element in tree.iter(*_LOADING_ATTRIBUTES):
        target = element.get(_LOADING_ATTRIBUTES[element.tag])
        if not target:
            continue
        where = f"{path}:{element.sourceline}"
        if re.match(r"^[A-Za-z][A-Za-z0-9+.-]*:", target) and not target.startswith("file:"):
            raise SchemaError(
                f"{where}: the schema loads {target!r} from the network; lexbuild never fetches "
                "anything: copy that schema into the sources folder and refer to it by a "
                "relative path"
            )
        local = (path.parent / target.removeprefix("file://")).resolve()
        if not local.is_relative_to(root):
            raise SchemaError(
                f"{where}: the schema loads {target!r}, outside the sources folder {root}"
            )
        if local.is_file():
            _check_references(local, root, seen)


def _compiled_extra(extra: ExtraSchema, path: Path, root: Path | None = None) -> Any:
    key = (str(path.resolve()), extra.kind, path.stat().st_mtime)
    if key in _EXTRA_CACHE:
        return _EXTRA_CACHE[key]
    _check_references(path.resolve(), (root or path.parent).resolve(), set())
    try:
        if extra.kind == "xsd":
            import warnings

            import xmlschema

            # "local": files only, never a remote one (the check above keeps them in the
            # folder); the warnings xmlschema gives for a blocked import become errors.
            with warnings.catch_warnings():
                warnings.simplefilter("error")
                compiled: Any = xmlschema.XMLSchema(
                    str(path.resolve()), allow="local", defuse="always"
                )
        elif extra.kind == "rng":
            compiled = etree.RelaxNG(etree.parse(str(path), safe_parser()))
        else:
            compiled = isoschematron.Schematron(
                etree.parse(str(path), safe_parser()),
                error_finder=isoschematron.Schematron.ASSERTS_AND_REPORTS,
                store_report=True,
            )
    except Exception as error:  # every library has its own parse/compile errors
        raise SchemaError(f"cannot compile extra {extra.kind} schema {path}: {error}") from error
    _EXTRA_CACHE[key] = compiled
    return compiled


def _extra_findings(
    extra: ExtraSchema,
    path: Path,
    tree: etree._ElementTree,
    where: _Where,
    root: Path | None = None,
) -> list[XmlFinding]:
    compiled = _compiled_extra(extra, path, root)
    label = f"{path.name} (extra {extra.kind})"
    if extra.kind == "xsd":
        findings = []
        for error in compiled.iter_errors(tree):
            element = error.elem if isinstance(error.elem, etree._Element) else None
            reason = error.reason or error.message
            findings.append(
                where.finding(
                    f"{reason} (at {error.path})",
                    label,
                    line=getattr(error, "sourceline", None) or 0,
                    element=element,
                )
            )
        return findings
    if extra.kind == "rng":
        if compiled.validate(tree):
            return []
        return _log_findings(compiled.error_log, label, where)
    return _schematron_findings(compiled, tree, label, where)


# ------------------------------------------------------------------------------ RelaxNG in parts

#: Below this many entries per part, splitting a TEI document for RelaxNG is not worth it.
MIN_ENTRIES_PER_PART = 500


def _default_workers() -> int:
    return max(1, min(4, os.cpu_count() or 1))


def _tei_parts(
    data: bytes, tree: etree._ElementTree, parts: int
) -> list[tuple[bytes, int, int]] | None:
    """Split a TEI document into ``parts`` documents, each with the whole header and a run of
    entries, so that RelaxNG can check them in parallel threads (lxml lets go of the GIL while
    libxml2 validates).

    Returns ``(document, line shift, first entry line)`` triples, a line ``n`` past the header
    of a part being line ``n + shift`` of the original; None when the layout does not allow
    a clean split (each entry must start its own line, the body must hold entries only). As
    libxml2 stops at the first entry that fails in a body, each part also reports its own.
    """
    root = tree.getroot()
    body = root.find(f"{{{TEI_NS}}}text/{{{TEI_NS}}}body")
    if body is None:
        return None
    entries = []
    for child in body:
        if child.tag is etree.Comment:
            continue
        if child.tag != f"{{{TEI_NS}}}entry" or not child.sourceline:
            return None
        entries.append(child)
    if len(entries) < 2 * MIN_ENTRIES_PER_PART or parts < 2:
        return None
    if len({e.prefix for e in entries}) != 1:
        return None
    parts = min(parts, len(entries) // MIN_ENTRIES_PER_PART)
    size = -(-len(entries) // parts)
    # Entry starts are found in the bytes, not through sourceline: libxml2's line numbers drift
    # by one past line 65535. The split is used only when the tags found are exactly the
    # body's entries (no '<entry' hidden in a comment or CDATA section).
    prefix_bytes = (entries[0].prefix + ":").encode() if entries[0].prefix else b""
    starts = [
        match.start()
        for match in re.finditer(rb"<" + re.escape(prefix_bytes) + rb"entry[\s>/]", data)
    ]
    if len(starts) != len(entries):
        return None
    offsets = [starts[k] for k in range(0, len(entries), size)]
    lines = [data.count(b"\n", 0, offset) + 1 for offset in offsets]
    closing = "".join(
        f"</{e.prefix}:{etree.QName(e).localname}>"
        if e.prefix
        else f"</{etree.QName(e).localname}>"
        for e in [body, *body.iterancestors()]
    ).encode()
    prefix = data[: offsets[0]]
    documents = []
    for k, offset in enumerate(offsets):
        end = offsets[k + 1] if k + 1 < len(offsets) else len(data)
        piece = data[offset:end] + (b"\n" + closing + b"\n" if k + 1 < len(offsets) else b"")
        documents.append((prefix + piece, lines[k] - lines[0], lines[0]))
    return documents


def _rng_errors(rng_path: Path, document: bytes) -> list[tuple[int, str]]:
    rng = etree.RelaxNG(etree.parse(str(rng_path)))  # one per thread: error logs are per object
    tree = etree.fromstring(document, safe_parser()).getroottree()
    if rng.validate(tree):
        return []
    return [(entry.line, entry.message) for entry in rng.error_log]


def _tei_rng_findings(
    data: bytes, tree: etree._ElementTree, schemas: SchemaSet, where: _Where, workers: int
) -> list[XmlFinding]:
    parts = _tei_parts(data, tree, workers) if workers > 1 else None
    if parts is None:
        if schemas.tei_rng.validate(tree):
            return []
        return _log_findings(schemas.tei_rng.error_log, TEI_RNG, where)
    from concurrent.futures import ThreadPoolExecutor

    first_entry_line = parts[0][2]
    rng_path = schemas.folder / TEI_RNG
    with ThreadPoolExecutor(max_workers=len(parts)) as pool:
        results = list(pool.map(lambda part: _rng_errors(rng_path, part[0]), parts))
    seen: set[tuple[int, str]] = set()
    findings = []
    for (_, shift, _), errors in zip(parts, results, strict=True):
        for line, message in errors:
            original = line + shift if line >= first_entry_line else line
            if (original, message) not in seen:
                seen.add((original, message))
                findings.append(where.finding(message, TEI_RNG, line=original))
    return findings


# ------------------------------------------------------------------------------ entry points


def _parse(data: bytes, where: _Where, max_bytes: int) -> etree._ElementTree | list[XmlFinding]:
    try:
        return parse_untrusted(data, max_bytes=max_bytes)
    except UnsafeXMLError as error:
        return [where.finding(error.message.replace("<bytes>: ", ""), SAFETY)]
    except MalformedXMLError as error:
        # The exception's log may hold older messages: parse again with a parser of our own
        # and read its log; then once more in recovery mode to name the element near each error.
        parser = safe_parser()
        with contextlib.suppress(etree.XMLSyntaxError):
            etree.fromstring(data, parser)
        log = [entry for entry in parser.error_log if entry.level >= etree.ErrorLevels.ERROR]
        try:
            recovered = etree.fromstring(
                data,
                etree.XMLParser(
                    recover=True, resolve_entities=False, no_network=True, load_dtd=False
                ),
            )
            where.tree = recovered.getroottree() if recovered is not None else None
            if recovered is not None and _format_of(recovered.tag) == "lmf":
                where.id_attr = "id"
        except etree.XMLSyntaxError:
            where.tree = None
        findings = []
        for entry in log:
            duplicate = _DUPLICATE_ID.search(entry.message)
            findings.append(
                where.finding(
                    f"not well-formed: {entry.message}",
                    "XML 1.0 + xml:id",
                    line=entry.line,
                    xml_id=duplicate.group(1) if duplicate else None,
                )
            )
        return findings or [where.finding(f"not well-formed: {error.message}", "XML 1.0")]


def validate_bytes(
    data: bytes,
    *,
    schemas_dir: str | Path | None = None,
    extra_schemas: Iterable[ExtraSchema] = (),
    name: str = "<bytes>",
    source_map: _Locator | None = None,
    base_dir: str | Path | None = None,
    max_bytes: int = DEFAULT_MAX_BYTES,
    workers: int | None = None,
) -> list[XmlFinding]:
    """Validate a TEI Lex-0 or LMF document given as bytes; an empty list means valid.

    ``extra_schemas`` (``model.ExtraSchema``; paths relative to ``base_dir``, usually the
    sources folder) apply to documents of their format. Big TEI documents are checked against
    the RelaxNG schema in ``workers`` parts at once (default: the CPU count, at most 4).
    Raises ``SchemaError`` when a published schema is missing or altered, or an extra schema
    cannot be read.
    """
    schemas = load_schemas(schemas_dir)
    extras = list(extra_schemas)
    base = Path(base_dir) if base_dir is not None else None
    where = _Where(None, None, source_map, name)
    parsed = _parse(data, where, max_bytes)
    if isinstance(parsed, list):
        return parsed
    tree = parsed
    fmt = _format_of(tree.getroot().tag)
    where = _Where(tree, fmt, source_map, name)
    if fmt is None:
        return [
            where.finding(
                f"root element {tree.getroot().tag!r} is neither TEI (TEI Lex-0) nor "
                "LexicalResource (LMF rev. 16)",
                "format detection",
                line=tree.getroot().sourceline or 1,
            )
        ]
    findings: list[XmlFinding] = []
    if fmt == "tei":
        parallel = _default_workers() if workers is None else workers
        findings += _tei_rng_findings(data, tree, schemas, where, parallel)
        findings += _schematron_findings(schemas.tei_sch, tree, TEI_SCH, where)
        findings += _tei_pointers(data, tree, where)
    else:
        if not schemas.lmf_dtd.validate(tree):
            findings += _log_findings(schemas.lmf_dtd.error_log, LMF_DTD, where)
        findings += _lmf_pointers(tree, where)
    for extra in extras:
        if extra.format == fmt:
            findings += _extra_findings(extra, _extra_path(extra, base), tree, where, base)
    return findings


def validate_file(
    path: str | Path,
    *,
    schemas_dir: str | Path | None = None,
    source_map: _Locator | None = None,
    extra_schemas: Iterable[ExtraSchema] = (),
    base_dir: str | Path | None = None,
    max_bytes: int = DEFAULT_MAX_BYTES,
    workers: int | None = None,
) -> list[XmlFinding]:
    """Validate the document in ``path`` (see ``validate_bytes``); OSError if unreadable."""
    file = Path(path)
    size = file.stat().st_size
    if size > max_bytes:
        raise UnsafeXMLError(f"{file}: {size} bytes is over the limit of {max_bytes} bytes")
    return validate_bytes(
        file.read_bytes(),
        schemas_dir=schemas_dir,
        extra_schemas=extra_schemas,
        name=str(file),
        source_map=source_map,
        base_dir=base_dir,
        max_bytes=max_bytes,
        workers=workers,
    )


# ------------------------------------------------------------------------------ incremental

#: Cache kinds of validation verdicts (``lexbuild.lexicon.build_cache``).
CHUNK_KIND = "valid-fragment"
SKELETON_KIND = "valid-skeleton"
DOCUMENT_KIND = "valid-document"
VALID = b"valid"  # the only verdict kept: problems are found afresh every time
_ROOT_TAG = re.compile(r"<(?:TEI|LexicalResource)\b[^>]*>")


def _schema_sums(schemas_dir: str | Path | None) -> str:
    from lexbuild.formats.schemastore import checksums

    return json.dumps(checksums(schemas_dir), sort_keys=True)


def document_key(fingerprint: str, fmt: str, sums: str, data: bytes) -> str:
    """The key of a whole document's verdict: its bytes' hash, format and schemas."""
    import hashlib

    from lexbuild.lexicon.build_cache import content_key

    return content_key(fingerprint, DOCUMENT_KIND, fmt, sums, hashlib.sha256(data).hexdigest())


def _lmf_reference_attributes(schemas: SchemaSet) -> frozenset[str]:
    """Names of the attributes the LMF DTD declares IDREF or IDREFS."""
    return frozenset(
        attribute.name
        for element in schemas.lmf_dtd.iterelements()
        for attribute in element.iterattributes()
        if attribute.type in ("idref", "idrefs")
    )


def _ids_and_references(
    root: etree._Element, fmt: str, idref_names: frozenset[str]
) -> tuple[list[str], set[str]]:
    """Every id borne under ``root`` and every id pointed at (TEI ``#id`` pointers; LMF
    IDREF(S) attributes and the ``feat`` values naming frames and slots)."""
    ids: list[str] = []
    references: set[str] = set()
    id_attribute = _XML_ID if fmt == "tei" else "id"
    for element in root.iter(tag=etree.Element):
        value = element.get(id_attribute)
        if value is not None:
            ids.append(value)
        if fmt == "tei":
            for name in _POINTER_ATTRIBUTES:
                pointer = element.get(name)
                if pointer:
                    references.update(t[1:] for t in pointer.split() if t.startswith("#"))
        else:
            for name in idref_names:
                pointer = element.get(name)
                if pointer:
                    references.update(pointer.split())
            if element.tag == "feat" and element.get("att") in (
                "subcategorizationFrame", "argumentPosition"
            ):
                references.add((element.get("val") or "").split("=", 1)[0])
    return ids, references


def _fragment_summary(
    text: bytes | memoryview, tail: bytes | memoryview | None, fmt: str,
    idref_names: frozenset[str],
) -> bytes | None:
    """What a validated fragment keeps: the ids it bears and the ids it points at outside
    itself (None when it cannot be read on its own)."""
    try:
        root = etree.fromstring(
            b"".join((b"<fragment>", text, tail or b"", b"</fragment>")), safe_parser()
        )
    except etree.XMLSyntaxError:
        return None
    ids, references = _ids_and_references(root, fmt, idref_names)
    if fmt == "lmf":
        references = {r for r in references if not re.fullmatch(r"slot-?[0-9]+", r)}
    outside = sorted(references - set(ids))
    if id_scope([name.encode("utf-8") for name in ids]) is not None:
        return _SCOPED + _joined(ids, outside)  # its first id is its scope
    return _joined(ids, outside)


#: Starts the summary of a fragment whose ids are all its first id or extend it
#: (``fragments.id_scope``); no id starts with this character.
_SCOPED = b"\x01"


def _joined(ids: Iterable[str], outside: Iterable[str]) -> bytes:
    # Ids and pointers hold no newline (NCNames; pointers are split on white space).
    return ("\n".join(ids) + "\x00" + "\n".join(outside)).encode("utf-8")


def _split(record: bytes) -> tuple[list[str], list[str]]:
    ids, outside = record.decode("utf-8").split("\x00")
    return (ids.split("\n") if ids else []), (outside.split("\n") if outside else [])


def _summaries_hold(header_ids: set[str], summaries: list[bytes]) -> bool:
    """True when the fragments' ``summaries`` (``_fragment_summary``) bear no id twice, none
    of the header's, and point outside themselves only at ids of the header. Ids are checked
    by scope (``fragments.ids_distinct``) where a summary has one, else one by one, on the
    bytes of all summaries at once: one split and one set, not 10,000 of each."""
    scopes: list[bytes] = []
    scoped: list[bytes] = []
    id_blocks: list[bytes] = []
    outside_blocks: list[bytes] = []
    for record in summaries:
        ids, separator, outside = record.partition(b"\x00")
        if not separator or b"\x00" in outside:
            return False
        if ids[:1] == _SCOPED:
            scoped.append(ids[1:])
            scopes.append(ids[1:].partition(b"\n")[0])
        elif ids:
            id_blocks.append(ids)
        if outside:
            outside_blocks.append(outside)
    try:  # every record must be UTF-8, as ``_fragment_summary`` wrote it (one decode for all)
        b"\x00".join(summaries).decode("utf-8")
    except UnicodeDecodeError:
        return False
    header = {name.encode("utf-8") for name in header_ids}
    names = b"\n".join(id_blocks).split(b"\n") if id_blocks else []
    if not ids_distinct(scopes, lambda k: scoped[k].split(b"\n"), names + list(header)):
        return False  # an id borne twice
    pointers = b"\n".join(outside_blocks).split(b"\n") if outside_blocks else []
    return header.issuperset(pointers)  # else a pointer into another entry or nowhere


def validate_written(
    document: Any,
    fmt: str,
    *,
    data: bytes,
    cache: Any,
    fingerprint: str,
    schemas_dir: str | Path | None = None,
    extra_schemas: Iterable[ExtraSchema] = (),
    name: str = "<bytes>",
    source_map: _Locator | None = None,
    base_dir: str | Path | None = None,
) -> list[XmlFinding]:
    """``validate_bytes(data)`` for a document written entry by entry
    (``lexbuild.formats.fragments.WrittenDocument``), validating only the fragments no
    earlier run validated; the same findings as ``validate_bytes``.

    Why the parts may be validated apart: every rule of the published schemas is local to an
    entry (RelaxNG and the DTD's content models; the three TEI Lex-0 Schematron rules look at
    an element's siblings or parent), except ids, which must be unique in the whole document,
    and references, which must land on an id. So a fragment is validated once, in a document
    made of the real header and the fragments to check; what it keeps is its verdict, its ids
    and the ids it points at outside itself. A later run checks, over the whole document, that
    no id is borne twice and that every outside pointer lands in the header. Anything
    else (an invalid fragment, a duplicate id, a pointer from one entry into another, a
    lexicon with extra schemas, whose rules lexbuild cannot know to be local) sends the
    document to ``validate_bytes`` whole: only a document proven valid skips it.
    """
    from lexbuild.lexicon.build_cache import content_key

    def whole() -> list[XmlFinding]:
        return validate_bytes(
            data, schemas_dir=schemas_dir, extra_schemas=extras, name=name,
            source_map=source_map, base_dir=base_dir,
        )

    extras = [extra for extra in extra_schemas if extra.format == fmt]
    if extras or fmt not in ("tei", "lmf"):
        return whole()
    schemas = load_schemas(schemas_dir)
    sums = _schema_sums(schemas_dir)
    whole_key = document_key(fingerprint, fmt, sums, data)
    if cache.get(DOCUMENT_KIND, whole_key) == VALID:
        return []
    root_tag = _ROOT_TAG.search(document.prefix)
    context = root_tag.group(0) if root_tag else document.prefix
    fragments = list(document.fragments)
    # A cached fragment's text is fixed by its content key; others are keyed by their text.
    # (A content key followed by another is as unique as a hash of both, and far cheaper.)
    by_key = content_key(fingerprint, CHUNK_KIND, fmt, sums, context, "key")
    keys = [
        by_key + f.key
        if f.key is not None
        else content_key(fingerprint, CHUNK_KIND, fmt, sums, context, "text", f.text_bytes(),
                         f.tail_bytes() or b"")
        for f in fragments
    ]
    skeleton_key = content_key(fingerprint, SKELETON_KIND, fmt, sums, document.prefix,
                               document.suffix)
    found = cache.get_many(CHUNK_KIND, keys)
    skeleton = cache.get(SKELETON_KIND, skeleton_key)
    missing = [k for k, key in enumerate(keys) if key not in found]
    if not missing and skeleton is None:
        missing = [0]
    idref_names = _lmf_reference_attributes(schemas) if fmt == "lmf" else frozenset()
    fresh: dict[str, bytes] = {}
    if missing:
        if len(missing) == len(fragments):
            part = data
        else:
            part = type(document)(
                document.prefix, tuple(fragments[k] for k in missing), document.suffix
            ).data()
        problems = validate_bytes(part, schemas_dir=schemas_dir, name=name,
                                  source_map=source_map, base_dir=base_dir)
        if problems:
            return problems if part is data else whole()
        for k in missing:
            summary = _fragment_summary(fragments[k].text, fragments[k].tail, fmt, idref_names)
            if summary is None:
                return whole()
            found[keys[k]] = fresh[keys[k]] = summary
    if skeleton is None:
        try:
            bare = etree.fromstring(
                (document.prefix + "\n" + document.suffix).encode("utf-8"), safe_parser()
            )
        except etree.XMLSyntaxError:
            return whole()
        ids, references = _ids_and_references(bare, fmt, idref_names)
        skeleton = _joined(ids, sorted(references))
    try:
        listed, pointers = _split(skeleton)
    except ValueError:
        return whole()
    header_ids = set(listed)
    if len(header_ids) != len(listed) or not header_ids.issuperset(pointers):
        return whole()
    if not _summaries_hold(header_ids, [found[key] for key in keys]):
        return whole()
    cache.put_many(CHUNK_KIND, fresh)
    cache.put(SKELETON_KIND, skeleton_key, skeleton)
    cache.put(DOCUMENT_KIND, whole_key, VALID)
    return []


def validate_cached(
    data: bytes,
    *,
    cache: Any,
    fingerprint: str,
    schemas_dir: str | Path | None = None,
    extra_schemas: Iterable[ExtraSchema] = (),
    name: str = "<bytes>",
    source_map: _Locator | None = None,
    base_dir: str | Path | None = None,
) -> list[XmlFinding]:
    """``validate_bytes``, skipped for a document whose exact bytes an earlier run (export,
    release or validate) found valid against the same schemas. A lexicon's extra schemas
    bypass the cache: lexbuild does not follow the files they load."""
    extras = list(extra_schemas)
    try:
        fmt: str | None = detect_format(data)
    except ValidationFailed:
        fmt = None
    usable = fmt is not None and not any(extra.format == fmt for extra in extras)
    key = document_key(fingerprint, fmt or "", _schema_sums(schemas_dir), data) if usable else ""
    if usable and cache.get(DOCUMENT_KIND, key) == VALID:
        return []
    findings = validate_bytes(
        data, schemas_dir=schemas_dir, extra_schemas=extras, name=name,
        source_map=source_map, base_dir=base_dir,
    )
    if usable and not findings:
        cache.put(DOCUMENT_KIND, key, VALID)
    return findings
