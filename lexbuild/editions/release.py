"""Publish a numbered edition of a dictionary from its sources.

``release(sources, edition=N, output=DIR)``:

1. load the sources and run the consistency checks: any error stops the release;
2. write every registered format (``lexbuild.formats.registry``: TEI Lex-0, LMF, OntoLex-Lemon)
   and validate each (published schemas plus the project's ``extra_schemas``; OntoLex-Lemon:
   the project's SHACL shapes): any problem stops the release;
3. compare with the previous edition in ``DIR`` (the highest number below N, read back from its
   TEI file) with ``lexbuild.editions.diff``: the change log goes to ``changelog.md`` and, as
   summary and change lines, into the TEI header's ``revisionDesc``;
4. write ``manifest.json``: sha256 and size of every artefact, counts, tool version, checksums of
   the published schemas, and the induction settings and model identifiers recorded in the
   sources' senses.

Layout: ``DIR/edition-N/{lexicon.tei.xml, lexicon.lmf.xml, lexicon.ontolex.ttl, changelog.md,
manifest.json}``, and ``site/`` (the review site, ``lexbuild.review``; ``site=False`` leaves it
out). The
edition folder is written in a staging sibling and renamed into place at the end: it appears
whole or not at all, and a failed release leaves earlier editions as they were. Nothing depends
on the clock: the date is ``--date`` or the sources' ``release_date``, so the same sources give
the same bytes.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import json
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

from lexbuild._atomic import staging_dir, swap_dir
from lexbuild.editions.changes import LexiconDiff
from lexbuild.editions.diff import diff_snapshots
from lexbuild.editions.diff_report import change_lines, summary_lines
from lexbuild.editions.diff_report import to_markdown as diff_markdown
from lexbuild.errors import ReleaseError
from lexbuild.formats.tei import tei_snapshot
from lexbuild.lexicon.model import Lexicon
from lexbuild.lexicon.snapshot import count_items

if TYPE_CHECKING:
    from lexbuild.lexicon.build_cache import BuildCache

__all__ = [
    "CHANGELOG_FILE",
    "EDITION_PREFIX",
    "LMF_FILE",
    "MANIFEST_FILE",
    "MAX_TEI_CHANGES",
    "TEI_FILE",
    "ReleaseRefused",
    "ReleaseResult",
    "edition_folder",
    "list_editions",
    "release",
]

EDITION_PREFIX = "edition-"
TEI_FILE = "lexicon.tei.xml"  # the TEI format's file name: earlier editions are read from it
LMF_FILE = "lexicon.lmf.xml"
CHANGELOG_FILE = "changelog.md"
MANIFEST_FILE = "manifest.json"
MANIFEST_FORMAT = "lexbuild-edition-manifest/1"
#: Detailed change lines put into the TEI header beyond the summary (the rest: changelog.md).
MAX_TEI_CHANGES = 200

_EDITION_RE = re.compile(rf"^{EDITION_PREFIX}([1-9][0-9]*)$")


class ReleaseRefused(ReleaseError):
    """The sources have check errors or their exports do not validate: nothing was published."""

    def __init__(self, message: str, problems: list[str]) -> None:
        super().__init__(message)
        self.problems = problems


@dataclass
class ReleaseResult:
    folder: Path
    edition: int
    previous: int | None
    manifest: dict[str, Any]
    changes: LexiconDiff | None
    warnings: list[str] = field(default_factory=list)


def edition_folder(output: str | Path, edition: int) -> Path:
    return Path(output) / f"{EDITION_PREFIX}{edition}"


def list_editions(output: str | Path) -> dict[int, Path]:
    """Edition number -> folder, for every complete edition folder in ``output``."""
    root = Path(output)
    if not root.is_dir():
        return {}
    found = {}
    for path in root.iterdir():
        match = _EDITION_RE.match(path.name)
        if match and path.is_dir() and (path / MANIFEST_FILE).is_file():
            found[int(match.group(1))] = path
    return dict(sorted(found.items()))


def _sha256(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def _induction_records(lexicon: Lexicon) -> list[dict[str, Any]]:
    """Distinct induction settings recorded in the senses, with how many senses each."""
    counts: dict[tuple[str, str | None, float, str | None], int] = {}
    for entry in lexicon.entries:
        for sense in entry.senses:
            if sense.induction is None:
                continue
            key = (
                sense.induction.representation,
                sense.induction.model,
                float(sense.induction.threshold),
                sense.induction.run,
            )
            counts[key] = counts.get(key, 0) + 1
    return [
        {"representation": rep, "model": model, "threshold": threshold, "run": run,
         "senses": count}
        for (rep, model, threshold, run), count in sorted(
            counts.items(), key=lambda item: tuple(str(part) for part in item[0])
        )
    ]


def _tei_change_lines(changes: LexiconDiff) -> list[str]:
    lines = [f"Changes since {changes.old_label}: " + "; ".join(summary_lines(changes))]
    detail = change_lines(changes)
    lines += detail[:MAX_TEI_CHANGES]
    if len(detail) > MAX_TEI_CHANGES:
        lines.append(f"... and {len(detail) - MAX_TEI_CHANGES} more changes (see "
                     f"{CHANGELOG_FILE} of this edition)")
    return lines


def _first_changelog(edition: int, counts: dict[str, int]) -> str:
    return (
        f"# Edition {edition}\n\nFirst edition: {counts['entries']} entries, "
        f"{counts['senses']} senses, {counts['frames']} frames, {counts['examples']} examples.\n"
    )


def release(
    sources: str | Path,
    *,
    edition: int,
    output: str | Path,
    date: dt.date | None = None,
    schemas_dir: str | Path | None = None,
    site: bool = True,
    cache: BuildCache | None = None,
) -> ReleaseResult:
    """Check, export, validate and publish ``output/edition-<edition>``; see the module doc.

    ``cache``: the cache of build results (``lexbuild.lexicon.build_cache``) whose entries,
    fragments and verdicts are reused; None builds everything afresh. Same bytes either way.
    """
    from lexbuild import __version__
    from lexbuild.formats.registry import ValidationContext, all_formats, get_format
    from lexbuild.formats.schemastore import checksums
    from lexbuild.lexicon.build import open_build
    from lexbuild.lexicon.checks import Severity, has_errors

    if edition < 1:
        raise ReleaseError(f"edition numbers start at 1, got {edition}")
    target = edition_folder(output, edition)
    if target.exists():
        raise ReleaseError(f"{target} already exists: an edition is never overwritten; "
                           "release the next number")
    earlier = list_editions(output)
    later = [number for number in earlier if number >= edition]
    if later:
        raise ReleaseError(f"edition {edition} must come after the latest edition in {output} "
                           f"({max(later)})")
    previous = max(earlier) if earlier else None

    build = open_build(sources, cache=cache)
    findings = build.check()
    if has_errors(findings):
        errors = [str(f) for f in findings if f.severity is Severity.ERROR]
        raise ReleaseRefused(
            f"{len(errors)} check error(s) in {sources}; nothing was published:\n"
            + "\n".join(errors),
            errors,
        )
    warnings = [str(f) for f in findings if f.severity is not Severity.ERROR]
    meta = build.meta.model_copy(
        update={"edition": edition, "release_date": date or build.meta.release_date}
    )
    lexicon = build.lexicon().model_copy(update={"meta": meta})
    counts = count_items(lexicon)

    changes: LexiconDiff | None = None
    if previous is not None:
        # compare what TEI keeps on both sides: the new edition as it will read back
        changes = diff_snapshots(
            tei_snapshot(earlier[previous] / TEI_FILE),
            tei_snapshot(build.write(get_format("tei"), meta=meta)[0]),
            old_label=f"edition {previous}",
            new_label=f"edition {edition}",
        )
        changelog = diff_markdown(changes)
        tei_changes = _tei_change_lines(changes)
    else:
        changelog = _first_changelog(edition, counts)
        tei_changes = [changelog.splitlines()[-1]]
    written = {
        output_format.file_name: (
            output_format, build.write(output_format, changes=tei_changes, meta=meta)
        )
        for output_format in all_formats()
    }
    published = {name: (fmt, data) for name, (fmt, (data, _)) in written.items()}

    problems: list[str] = []
    for name, (output_format, (data, document)) in written.items():
        context = ValidationContext(
            schemas_dir=schemas_dir,
            extra_schemas=tuple(meta.extra_schemas),
            name=name,
            source_map=build.source_map,
            base_dir=build.root,
        )
        problems += [
            str(finding) for finding in build.validate(output_format, data, document, context)
        ]
    if problems:
        raise ReleaseRefused(
            f"{len(problems)} validation problem(s); nothing was published:\n"
            + "\n".join(problems),
            problems,
        )

    artefacts = {
        name: (data, output_format.description)
        for name, (output_format, data) in published.items()
    }
    artefacts[CHANGELOG_FILE] = (changelog.encode("utf-8"), "change log (Markdown)")
    # The review site (lexbuild.review), written in edition-N/site and listed in the manifest.
    site_files: dict[str, bytes] = {}
    if site:
        from lexbuild.review import edition_site

        site_files = edition_site(lexicon, changes=changes, editions=earlier, edition=edition)
    manifest: dict[str, Any] = {
        "manifest": MANIFEST_FORMAT,
        "title": meta.title,
        "language": meta.language,
        "edition": edition,
        "release_date": meta.release_date.isoformat(),
        "previous_edition": previous,
        "tool": {"name": "lexbuild", "version": __version__},
        "counts": counts,
        "artefacts": {
            name: {"sha256": _sha256(data), "bytes": len(data), "format": kind}
            for name, (data, kind) in artefacts.items()
        },
        "schemas": checksums(schemas_dir),
        "induction": _induction_records(lexicon),
        "changes": changes.summary if changes is not None else None,
    }
    if site:
        from lexbuild.review import site_manifest

        manifest["site"] = site_manifest(site_files)
    with staging_dir(target) as stage:
        stage.chmod(0o755)  # mkdtemp makes it private; a published edition is readable
        for name, (data, _) in artefacts.items():
            (stage / name).write_bytes(data)
        if site:
            from lexbuild.review import SITE_DIR, write_files

            write_files(site_files, stage / SITE_DIR)
        (stage / MANIFEST_FILE).write_text(
            json.dumps(manifest, indent=2, sort_keys=True, ensure_ascii=False) + "\n",
            encoding="utf-8",
        )
        swap_dir(stage, target, replace=False)  # an edition is never overwritten
    return ReleaseResult(target, edition, previous, manifest, changes, warnings)
