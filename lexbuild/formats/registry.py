"""The registry of publication formats: name -> writer, validator, file suffix, media type.

``lexbuild export``, ``lexbuild validate`` and ``lexbuild release`` iterate over it. A new
format is one module defining an ``OutputFormat`` named ``FORMAT`` plus one line in
``FORMAT_MODULES`` (name -> module); modules are imported only when a format is used.
"""

from __future__ import annotations

import importlib
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

from lexbuild.errors import LexbuildError

if TYPE_CHECKING:
    from lexbuild.formats.validate import XmlFinding
    from lexbuild.lexicon.model import ExtraSchema, Lexicon

__all__ = [
    "FORMAT_MODULES",
    "OutputFormat",
    "ValidationContext",
    "all_formats",
    "format_for_file",
    "format_names",
    "get_format",
]

#: Registered formats, in publication order: name -> module defining ``FORMAT``.
FORMAT_MODULES: dict[str, str] = {
    "tei": "lexbuild.formats.tei",
    "lmf": "lexbuild.formats.lmf",
    "ontolex": "lexbuild.formats.ontolex",
}


@dataclass(frozen=True)
class ValidationContext:
    """What a validator may use besides the document: the published schemas, the lexicon's
    extra schemas and its sources (to trace a problem back to a YAML file and line)."""

    schemas_dir: str | Path | None = None
    extra_schemas: Sequence[ExtraSchema] = field(default_factory=tuple)
    name: str = "<bytes>"
    source_map: Any = None
    base_dir: str | Path | None = None


@dataclass(frozen=True)
class OutputFormat:
    """A publication format.

    ``write(lexicon, changes)``: the document's bytes (``changes``: change-log lines, for the
    formats that carry them). ``validate(data, context)``: the problems found, [] when valid.
    ``suffix``: the file name ending (a release writes ``lexicon<suffix>``); ``media_type``:
    the IANA media type; ``title``: for messages; ``description``: for release manifests.
    """

    name: str
    title: str
    suffix: str
    media_type: str
    description: str
    write: Callable[[Lexicon, Sequence[str]], bytes]
    validate: Callable[[bytes, ValidationContext], list[XmlFinding]]

    @property
    def file_name(self) -> str:
        return f"lexicon{self.suffix}"


def format_names() -> tuple[str, ...]:
    return tuple(FORMAT_MODULES)


def get_format(name: str) -> OutputFormat:
    module = FORMAT_MODULES.get(name)
    if module is None:
        raise LexbuildError(
            f"unknown format {name!r}; expected one of {', '.join(FORMAT_MODULES)}"
        )
    found = importlib.import_module(module).FORMAT
    if not isinstance(found, OutputFormat) or found.name != name:
        raise LexbuildError(f"{module}.FORMAT does not define the format {name!r}")
    return found


def all_formats() -> list[OutputFormat]:
    """Every registered format, in publication order."""
    return [get_format(name) for name in FORMAT_MODULES]


def format_for_file(
    path: str | Path, formats: Iterable[OutputFormat] | None = None
) -> OutputFormat:
    """The format of a file by its name's ending; XML files without a known ending are TEI or
    LMF (their validator tells them apart by the root element)."""
    name = Path(path).name.lower()
    candidates = list(formats) if formats is not None else all_formats()
    matching = [f for f in candidates if name.endswith(f.suffix)]
    if matching:
        return max(matching, key=lambda f: len(f.suffix))
    if name.endswith(".xml"):
        return get_format("tei")  # its validator recognises LMF as well
    raise LexbuildError(
        f"{path}: unknown file type; expected one of "
        + ", ".join(f"{f.suffix} ({f.title})" for f in candidates)
    )


def validate_xml(data: bytes, context: ValidationContext) -> list[XmlFinding]:
    """TEI Lex-0 or LMF, recognised by the root element (``lexbuild.formats.validate``)."""
    from lexbuild.formats.validate import validate_bytes

    return validate_bytes(
        data,
        schemas_dir=context.schemas_dir,
        extra_schemas=context.extra_schemas,
        name=context.name,
        source_map=context.source_map,
        base_dir=context.base_dir,
    )
