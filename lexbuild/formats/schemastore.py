"""Locating, checking and compiling the published schemas (never vendored in the package).

Search order: an explicit folder (``--schemas DIR``), then ``$LEXBUILD_SCHEMAS``, then the
per-user cache ``$XDG_CACHE_HOME/lexbuild/schemas`` (``~/.cache`` when unset), which
``lexbuild schemas fetch`` fills from the pinned URLs of :mod:`lexbuild.external`. Each file is
pinned by sha256: a copy that differs is not the published schema and is refused.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path

from lxml import etree, isoschematron

from lexbuild.errors import SchemaError
from lexbuild.external import FileState, file_state, pinned, sha256_of, user_cache

__all__ = [
    "FETCH_HINT",
    "PINNED",
    "SOURCES",
    "SchemaSet",
    "checksums",
    "load_schemas",
    "schema_states",
    "schemas_dir",
    "schemas_origin",
]

TEI_RNG = "TEILex0.rng"
TEI_SCH = "TEILex0.sch"
LMF_DTD = "DTD_LMF_REV_16.dtd"

#: sha256 of the published files (the table lives in lexbuild.external).
PINNED: dict[str, str] = {file.name: file.sha256 for file in pinned("schemas")}

#: Where the official copies come from, quoted in error messages.
SOURCES: dict[str, str] = {file.name: file.source for file in pinned("schemas")}

ENV_VAR = "LEXBUILD_SCHEMAS"

#: The one line every command that needs a schema and finds none prints.
FETCH_HINT = "run `lexbuild schemas fetch` (offline: add --mirror DIR|URL)"


@dataclass(frozen=True)
class SchemaSet:
    """The compiled published schemas, ready to validate parsed trees."""

    folder: Path
    tei_rng: etree.RelaxNG
    tei_sch: isoschematron.Schematron
    lmf_dtd: etree.DTD


def _user_cache() -> Path:
    return user_cache("schemas")


def schemas_dir(folder: str | Path | None = None) -> Path:
    """The folder to read the schemas from, following the documented search order."""
    if folder is not None:
        return Path(folder)
    env = os.environ.get(ENV_VAR)
    if env:
        return Path(env)
    return _user_cache()


def schemas_origin(folder: str | Path | None = None) -> str:
    """Which step of the search order gives the folder (for ``lexbuild schemas status``)."""
    if folder is not None:
        return "--schemas"
    if os.environ.get(ENV_VAR):
        return f"${ENV_VAR}"
    return "per-user cache"


def schema_states(folder: str | Path | None = None) -> list[FileState]:
    """Each published schema in the folder the search order gives: ok, altered or missing."""
    where = schemas_dir(folder)
    return [file_state(file, where) for file in pinned("schemas")]


def _sha256(path: Path) -> str:
    return sha256_of(path)


def _checked(folder: Path, name: str) -> Path:
    path = folder / name
    if not path.is_file():
        raise SchemaError(f"published schema {name} not found in {folder}: {FETCH_HINT}")
    digest = _sha256(path)
    if digest != PINNED[name]:
        raise SchemaError(
            f"{path} has sha256 {digest}, not the published {PINNED[name]}: it was altered; "
            f"replace it with the file from {SOURCES[name]} (for the per-user cache: run "
            "`lexbuild schemas fetch --force`)"
        )
    return path


def checksums(folder: str | Path | None = None) -> dict[str, str]:
    """File name -> sha256 of each published schema, verified (for release manifests)."""
    where = schemas_dir(folder)
    return {name: _sha256(_checked(where, name)) for name in sorted(PINNED)}


_CACHE: dict[Path, SchemaSet] = {}


def _compile(folder: Path) -> SchemaSet:
    rng_path = _checked(folder, TEI_RNG)
    sch_path = _checked(folder, TEI_SCH)
    dtd_path = _checked(folder, LMF_DTD)
    try:
        rng = etree.RelaxNG(etree.parse(str(rng_path)))
        sch_doc = etree.parse(str(sch_path))
        # lxml has no XSLT 2; the 3 rules are XPath 1, so the xslt binding runs them. The file
        # also breaks ISO element order (title after ns), hence no schema check of the .sch.
        sch_doc.getroot().set("queryBinding", "xslt")
        sch = isoschematron.Schematron(
            sch_doc,
            validate_schema=False,
            error_finder=isoschematron.Schematron.ASSERTS_AND_REPORTS,
            store_report=True,
        )
        dtd = etree.DTD(str(dtd_path))
    except (etree.LxmlError, OSError) as error:
        raise SchemaError(f"cannot compile the schemas in {folder}: {error}") from error
    return SchemaSet(folder=folder, tei_rng=rng, tei_sch=sch, lmf_dtd=dtd)


def load_schemas(folder: str | Path | None = None) -> SchemaSet:
    """Check and compile the published schemas (compiled once per folder and process).

    The checksums are verified on every call, so a file altered mid-process is still caught.
    """
    where = schemas_dir(folder).resolve()
    for name in PINNED:
        _checked(where, name)
    if where not in _CACHE:
        _CACHE[where] = _compile(where)
    return _CACHE[where]
