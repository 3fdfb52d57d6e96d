"""Locating, checking and compiling the published schemas (never vendored in the package).

Search order: an explicit folder (``--schemas DIR``), then ``$LEXBUILD_SCHEMAS``, then the
per-user cache ``$XDG_CACHE_HOME/lexbuild/schemas`` (``~/.cache`` when unset). Each file is
pinned by sha256: a copy that differs is not the published schema and is refused.
"""

from __future__ import annotations

import hashlib
import os
from dataclasses import dataclass
from pathlib import Path

from lxml import etree, isoschematron

from lexbuild.errors import SchemaError

__all__ = [
    "PINNED",
    "SOURCES",
    "SchemaSet",
    "checksums",
    "install_schemas",
    "load_schemas",
    "schemas_dir",
]

TEI_RNG = "TEILex0.rng"
TEI_SCH = "TEILex0.sch"
LMF_DTD = "DTD_LMF_REV_16.dtd"

#: sha256 of the published files (see the project's shared schemas README).
PINNED: dict[str, str] = {
    TEI_RNG: "f5270a718c377d18d3137d4fbbd883e3d39a01dca890fa62f5f580d43d1aa30a",
    TEI_SCH: "8d3c7d06c141a2e023273ea4772fbb19374e1e91ad1c29f5d9dcbfffbce943fd",
    LMF_DTD: "160db6625789c57eb75a16456232792f0931c99efd147bc3ac0a19cbfd66a482",
}

#: Where the official copies come from, quoted in error messages.
SOURCES: dict[str, str] = {
    TEI_RNG: "DARIAH-ERIC/lexicalresources on GitHub, Schemas/TEILex0/out/TEILex0.rng "
    "(commit d2f3ce22, 2025-05-14; BSD-2-Clause)",
    TEI_SCH: "DARIAH-ERIC/lexicalresources on GitHub, Schemas/TEILex0/TEILex0.sch (same commit)",
    LMF_DTD: "the public copy in stardust85/lmf-merger on GitHub, DTD_LMF_REV_16.dtd "
    "(ISO 24613:2008 informative annex)",
}

ENV_VAR = "LEXBUILD_SCHEMAS"


@dataclass(frozen=True)
class SchemaSet:
    """The compiled published schemas, ready to validate parsed trees."""

    folder: Path
    tei_rng: etree.RelaxNG
    tei_sch: isoschematron.Schematron
    lmf_dtd: etree.DTD


def _user_cache() -> Path:
    base = os.environ.get("XDG_CACHE_HOME") or str(Path.home() / ".cache")
    return Path(base) / "lexbuild" / "schemas"


def schemas_dir(folder: str | Path | None = None) -> Path:
    """The folder to read the schemas from, following the documented search order."""
    if folder is not None:
        return Path(folder)
    env = os.environ.get(ENV_VAR)
    if env:
        return Path(env)
    return _user_cache()


def _sha256(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def _checked(folder: Path, name: str) -> Path:
    path = folder / name
    if not path.is_file():
        raise SchemaError(
            f"published schema {name} not found in {folder}; get the official file from "
            f"{SOURCES[name]} and put it there (or pass --schemas DIR / set ${ENV_VAR})"
        )
    digest = _sha256(path)
    if digest != PINNED[name]:
        raise SchemaError(
            f"{path} has sha256 {digest}, not the published {PINNED[name]}: it was altered; "
            f"replace it with the official file from {SOURCES[name]}"
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


def install_schemas(source: str | Path, target: str | Path | None = None) -> Path:
    """Copy the published schemas from ``source`` into the per-user cache (or ``target``).

    Every file is verified against its pinned checksum first, so a bad copy never lands.
    """
    from lexbuild._atomic import atomic_write_bytes

    origin = Path(source)
    files = {name: _checked(origin, name).read_bytes() for name in sorted(PINNED)}
    destination = Path(target) if target is not None else _user_cache()
    for name, data in files.items():
        atomic_write_bytes(destination / name, data)
    return destination
