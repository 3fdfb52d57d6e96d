"""The review site: every file of it from the typed model, then written in one atomic step.

``build_site(SiteInputs(...))`` returns ``{relative path: bytes}`` and touches no disk: the
same inputs give the same bytes (no clock, no absolute path, sorted everything, deterministic
SVG). ``write_site`` puts those files in a folder atomically. ``edition_site`` is what
``lexbuild release`` calls; ``preview_inputs`` is what ``lexbuild preview`` reads.

Layout: ``index.html``, ``entries/<entry-id>.html``, ``changes.html`` (when the site belongs to
an edition), ``diagnostics.html`` and ``plots/*.svg`` (with an induction or calibration folder),
``style.css`` and ``site.js``. Every link is relative and every asset local: the site opens
from the file system and asks nothing of the network.
"""

from __future__ import annotations

import hashlib
import os
import shutil
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from lexbuild.editions.diff import LexiconDiff
from lexbuild.errors import LexbuildError, SourceLocation
from lexbuild.lexicon.model import Lexicon
from lexbuild.review.assets import SCRIPT, SCRIPT_FILE, STYLE, STYLE_FILE
from lexbuild.review.diagnostics import (
    OCCURRENCE_VECTORS_FILE,
    InductionView,
    read_calibration_view,
    read_induction_view,
)
from lexbuild.review.labels import labels_for
from lexbuild.review.pages import (
    EditionLink,
    Page,
    changes_page,
    diagnostics_page,
    entry_file,
    entry_page,
    index_page,
    induced_section,
)

__all__ = [
    "SITE_DIR",
    "EditionLink",
    "SiteInputs",
    "build_site",
    "edition_links",
    "edition_site",
    "preview_inputs",
    "site_manifest",
    "write_files",
    "write_site",
]

#: The site's folder inside an edition folder.
SITE_DIR = "site"


@dataclass(frozen=True)
class SiteInputs:
    lexicon: Lexicon
    #: The change log of this edition; ``None`` with ``edition_page`` for a first edition.
    changes: LexiconDiff | None = None
    edition_page: bool = False
    editions: tuple[EditionLink, ...] = ()
    induction: InductionView | None = None
    calibration: Mapping[str, Any] | None = None
    random_state: int = 0


def build_site(inputs: SiteInputs) -> dict[str, bytes]:
    """Every file of the site, by relative path (POSIX), in sorted order."""
    from lexbuild.review.plots import calibration_svg, projection_svg

    lexicon = inputs.lexicon
    language, labels = labels_for(lexicon.meta.language)
    page = Page(
        labels=labels,
        language=language,
        title=lexicon.meta.title,
        has_changes=inputs.edition_page or inputs.changes is not None,
        has_diagnostics=inputs.induction is not None or inputs.calibration is not None,
    )
    changed = frozenset(c.entry for c in inputs.changes.changes) if inputs.changes else frozenset()
    files: dict[str, bytes] = {
        STYLE_FILE: STYLE.encode("utf-8"),
        SCRIPT_FILE: SCRIPT.encode("utf-8"),
        "index.html": index_page(lexicon, page, changed).encode("utf-8"),
    }
    induction = inputs.induction
    for entry in lexicon.entries:
        section = None
        if induction is not None:
            induced = induction.entries.get(entry.lemma)
            plot = None
            if induced is not None and induction.vectors is not None:
                vectors = {s.id: induction.vectors[s.id] for s in induced.senses
                           if s.id in induction.vectors}
                if vectors:
                    plot = f"plots/{entry.id}.svg"
                    files[plot] = projection_svg(entry.lemma, vectors,
                                                 random_state=inputs.random_state)
            missing = labels["projection_missing"].format(file=OCCURRENCE_VECTORS_FILE)
            section = induced_section(induced, plot, missing, labels, up="../")
        files[entry_file(entry.id)] = entry_page(
            entry, page, changed=entry.id in changed, editions=inputs.editions,
            diagnostics=section,
        ).encode("utf-8")
    if page.has_changes:
        files["changes.html"] = changes_page(inputs.changes, lexicon, page).encode("utf-8")
    if page.has_diagnostics:
        calibration_plot = None
        if inputs.calibration is not None:
            calibration_plot = "plots/calibration.svg"
            files[calibration_plot] = calibration_svg(
                inputs.calibration["thresholds"],
                float(inputs.calibration["recommended"]["threshold"]),
                labels,
            )
        entry_ids = {entry.lemma: entry.id for entry in lexicon.entries}
        files["diagnostics.html"] = diagnostics_page(
            induction, inputs.calibration, calibration_plot, entry_ids, page
        ).encode("utf-8")
    return dict(sorted(files.items()))


def site_manifest(files: Mapping[str, bytes], folder: str = SITE_DIR) -> dict[str, Any]:
    """What an edition's manifest says of its site: where, and every file's sha256 and size."""
    return {
        "folder": folder,
        "index": f"{folder}/index.html",
        "files": {name: {"sha256": hashlib.sha256(data).hexdigest(), "bytes": len(data)}
                  for name, data in sorted(files.items())},
    }


def write_files(files: Mapping[str, bytes], folder: Path) -> None:
    """Write the files under ``folder`` (which the caller stages)."""
    for name, data in files.items():
        path = folder / name
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_bytes(data)


def write_site(files: Mapping[str, bytes], output: str | Path) -> Path:
    """Write the site to ``output`` atomically: a reader sees the old site or the new one.

    An existing folder is replaced only when it is empty or holds an earlier site (its
    ``index.html`` and ``style.css``): another folder is never wiped by mistake.
    """
    from lexbuild._atomic import staging_dir

    target = Path(output)
    if target.exists():
        is_site = (target / "index.html").is_file() and (target / STYLE_FILE).is_file()
        if not target.is_dir() or (any(target.iterdir()) and not is_site):
            raise LexbuildError(
                "exists and is not an earlier review site; choose another --output",
                SourceLocation.of(target),
            )
    with staging_dir(target) as stage:
        stage.chmod(0o755)  # mkdtemp makes it private; a site is for reading
        write_files(files, stage)
        old: Path | None = None
        if target.exists():
            old = target.with_name(f".{target.name}.old-{os.getpid()}")
            os.rename(target, old)
        os.rename(stage, target)
        if old is not None:
            shutil.rmtree(old, ignore_errors=True)
    return target


def edition_links(editions: Mapping[int, Path], *, exclude: int | None,
                  site_root: Path) -> tuple[EditionLink, ...]:
    """Links to the sites of other editions (those that have one), relative to ``site_root``."""
    links = []
    for number, folder in sorted(editions.items()):
        site = folder / SITE_DIR
        if number == exclude or not (site / "index.html").is_file():
            continue
        href = Path(os.path.relpath(site.absolute(), site_root)).as_posix() + "/"
        links.append(EditionLink(number, href, _entry_pages(site)))
    return tuple(links)


def _entry_pages(site: Path) -> frozenset[str]:
    """Ids of the entries an existing site has a page for (a link never leads nowhere)."""
    return frozenset(path.stem for path in (site / "entries").glob("*.html"))


def edition_site(lexicon: Lexicon, *, changes: LexiconDiff | None,
                 editions: Mapping[int, Path], edition: int) -> dict[str, bytes]:
    """The site of a new edition (``release`` writes it into ``edition-N/site``): its change
    log, and links to the sites of the editions before it. Every edition's site lies at the
    same depth in the editions folder, so the links hold wherever that folder moves."""
    return build_site(SiteInputs(lexicon, changes=changes, edition_page=True,
                                 editions=_sibling_links(editions, edition)))


def _sibling_links(editions: Mapping[int, Path], edition: int) -> tuple[EditionLink, ...]:
    links = []
    for number, folder in sorted(editions.items()):
        site = folder / SITE_DIR
        if number == edition or not (site / "index.html").is_file():
            continue
        links.append(EditionLink(number, f"../../{folder.name}/{SITE_DIR}/", _entry_pages(site)))
    return tuple(links)


def preview_inputs(
    source: str | Path,
    *,
    output: str | Path,
    induction: str | Path | None = None,
    calibration: str | Path | None = None,
) -> SiteInputs:
    """Read what ``lexbuild preview`` shows: a sources folder or an edition folder (then its
    change log against the previous edition beside it, and links to the other editions'
    sites), plus the optional induction and calibration folders."""
    from lexbuild.editions.diff import diff_paths, load_for_diff
    from lexbuild.editions.release import MANIFEST_FILE, list_editions

    where = Path(source)
    lexicon, from_tei = load_for_diff(where)
    changes: LexiconDiff | None = None
    links: tuple[EditionLink, ...] = ()
    is_edition = from_tei and where.is_dir() and (where / MANIFEST_FILE).is_file()
    if is_edition:
        editions = list_editions(where.parent)
        number = lexicon.meta.edition
        earlier = [n for n in editions if n < number]
        if earlier:
            changes = diff_paths(editions[max(earlier)], where,
                                 old_label=f"edition {max(earlier)}",
                                 new_label=f"edition {number}")
        links = edition_links(editions, exclude=number, site_root=Path(output).absolute())
    return SiteInputs(
        lexicon,
        changes=changes,
        edition_page=is_edition,
        editions=links,
        induction=read_induction_view(induction) if induction is not None else None,
        calibration=read_calibration_view(calibration) if calibration is not None else None,
    )
