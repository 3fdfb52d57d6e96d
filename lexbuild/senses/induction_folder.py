"""The induction folder: written by ``lexbuild induce``, read by ``merge`` and ``evaluate``.

    induction.json       settings (representation name, model and settings, clusterer,
                         threshold and where it came from, corpus paths), run id (content hash,
                         not time), counts, lexbuild version
    entries/<id>.yaml    one Entry per verb, senses draft, ids ``<entry>.s1``, ``.s2``...
    centroids.npz        sense id -> float32 L2-normalised centroid
    assignments.tsv      lemma, sense, corpus, sent_id, token (1-based CoNLL-U word id)
"""

from __future__ import annotations

import csv
import io
import json
import zipfile
from collections.abc import Iterable, Iterator, Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import IO, TYPE_CHECKING, Any

import numpy as np
import numpy.typing as npt

from lexbuild._atomic import atomic_write_bytes, atomic_write_text, staging_dir, swap_dir
from lexbuild.errors import InductionError, InductionFolderError, SourceLocation
from lexbuild.lexicon.model import Entry
from lexbuild.lexicon.sources import ENTRIES_DIR, dump_entry, load_entry

if TYPE_CHECKING:
    from lexbuild.senses.induce import Assignment
    from lexbuild.senses.inducer import InductionResult

__all__ = [
    "ASSIGNMENTS_FILE",
    "ASSIGNMENTS_HEADER",
    "CENTROIDS_FILE",
    "MANIFEST_FILE",
    "InducedFolder",
    "read_assignments",
    "read_centroids",
    "read_induction",
    "write_centroids",
    "write_induction",
]

MANIFEST_FILE = "induction.json"
CENTROIDS_FILE = "centroids.npz"
#: A sample of each induced sense's occurrence vectors (float16), for the review site's picture.
OCCURRENCE_VECTORS_FILE = "occurrence-vectors.npz"
ASSIGNMENTS_FILE = "assignments.tsv"
ASSIGNMENTS_HEADER = ("lemma", "sense", "corpus", "sent_id", "token")

Vector = npt.NDArray[np.float32]
Sentence = tuple[str, str]  # (corpus, sentence id)


# ------------------------------------------------------------------------------ centroids


def centroids_bytes(arrays: Mapping[str, npt.ArrayLike], dtype: type = np.float32) -> bytes:
    """``numpy.savez`` content with sorted keys and fixed zip timestamps (numpy stamps the
    current time): the same centroids give the same bytes."""
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w", compression=zipfile.ZIP_STORED) as archive:
        for key in sorted(arrays):
            member = io.BytesIO()
            np.lib.format.write_array(member, np.ascontiguousarray(arrays[key], dtype=dtype))
            info = zipfile.ZipInfo(f"{key}.npy", date_time=(1980, 1, 1, 0, 0, 0))
            info.external_attr = 0o644 << 16
            archive.writestr(info, member.getvalue())
    return buffer.getvalue()


def write_centroids(path: str | Path, centroids: Mapping[str, npt.ArrayLike]) -> None:
    """Deterministic ``.npz``, written atomically."""
    atomic_write_bytes(path, centroids_bytes(centroids))


def read_centroids(path: str | Path) -> dict[str, Vector]:
    """Sense id -> float32 vector from an ``.npz`` file (empty when the file is absent)."""
    where = Path(path)
    if not where.is_file():
        return {}
    try:
        with np.load(where, allow_pickle=False) as data:
            return {key: np.asarray(data[key], dtype=np.float32) for key in data.files}
    except (OSError, ValueError, EOFError, KeyError, zipfile.BadZipFile) as error:
        raise InductionFolderError(
            f"cannot read centroids: {error}", SourceLocation(str(where))
        ) from None


# ---------------------------------------------------------------------------- assignments


def _write_assignments(handle: IO[str], assignments: Iterable[Assignment]) -> None:
    # Row by row: a corpus's assignments come from a spool on disk, never whole in memory.
    writer = csv.writer(handle, delimiter="\t", lineterminator="\n", quoting=csv.QUOTE_MINIMAL)
    writer.writerow(ASSIGNMENTS_HEADER)
    for a in assignments:
        writer.writerow((a.lemma, a.sense, a.corpus, a.sent_id, a.token))


def _assignment_rows(path: Path) -> Iterator[tuple[int, list[str]]]:
    """(line number, cells) of each data row; the header and the column count checked."""
    from lexbuild._readers import text_lines

    reader = csv.reader(text_lines(path, InductionFolderError), delimiter="\t")
    try:
        for cells in reader:
            number = reader.line_num
            if number == 1:
                if tuple(cells) != ASSIGNMENTS_HEADER:
                    raise InductionFolderError(
                        f"expected the header {' '.join(ASSIGNMENTS_HEADER)} "
                        f"(tab-separated), got {' '.join(cells)!r}",
                        SourceLocation.of(path, 1),
                    )
                continue
            if not cells:
                continue
            if len(cells) != len(ASSIGNMENTS_HEADER):
                raise InductionFolderError(
                    f"expected {len(ASSIGNMENTS_HEADER)} tab-separated fields "
                    f"({', '.join(ASSIGNMENTS_HEADER)}), got {len(cells)}",
                    SourceLocation.of(path, number),
                )
            yield number, cells
    except csv.Error as error:
        raise InductionFolderError(
            f"bad TSV: {error}", SourceLocation.of(path, reader.line_num)
        ) from None


def read_assignments(folder: str | Path) -> dict[tuple[str, int], tuple[str, str]]:
    """``(sent_id, token) -> (lemma, sense)`` from an induction folder's ``assignments.tsv``."""
    path = Path(folder)
    if path.is_dir():
        path = path / ASSIGNMENTS_FILE
    out: dict[tuple[str, int], tuple[str, str]] = {}
    for number, (lemma, sense, _corpus, sent_id, token) in _assignment_rows(path):
        try:
            out[(sent_id, int(token))] = (lemma, sense)
        except ValueError:
            raise InductionFolderError(
                f"field 'token': {token!r} is not an integer", SourceLocation.of(path, number)
            ) from None
    return out


def sentences_by_sense(path: str | Path) -> dict[str, set[Sentence]]:
    """Induced sense id -> the (corpus, sentence) pairs clustered into it (empty if absent)."""
    where = Path(path)
    found: dict[str, set[Sentence]] = {}
    if not where.is_file():
        return found
    for _, cells in _assignment_rows(where):
        found.setdefault(cells[1], set()).add((cells[2], cells[3]))
    return found


# ---------------------------------------------------------------------------------- folder


@dataclass
class InducedFolder:
    """An induction folder read into memory."""

    settings: dict[str, Any]
    entries: list[Entry]
    centroids: dict[str, Vector]
    assignments: dict[str, set[Sentence]]  # induced sense id -> clustered sentences

    @property
    def run(self) -> str:
        return str(self.settings.get("run") or self.settings.get("run_id") or "unknown")


def read_induction(folder: str | Path) -> InducedFolder:
    """Read an induction folder; errors name the file (and line for the TSV)."""
    root = Path(folder)
    settings_path = root / MANIFEST_FILE
    if not settings_path.is_file():
        raise InductionFolderError(
            f"{root} is not an induction folder: {MANIFEST_FILE} is missing (run "
            "`lexbuild induce` to make one)",
            SourceLocation(str(settings_path)),
        )
    from lexbuild._readers import load_json

    settings = load_json(settings_path, InductionFolderError)
    if not isinstance(settings, dict):
        raise InductionFolderError("expected a JSON object", SourceLocation(str(settings_path)))
    entries = [load_entry(path) for path in sorted((root / ENTRIES_DIR).glob("*.yaml"))]
    return InducedFolder(
        settings=settings,
        entries=entries,
        centroids=read_centroids(root / CENTROIDS_FILE),
        assignments=sentences_by_sense(root / ASSIGNMENTS_FILE),
    )


def write_induction(
    result: InductionResult, folder: str | Path, *, overwrite: bool = False
) -> Path:
    """Write the induction folder; atomic (a reader sees the old folder or the new one)."""
    target = Path(folder)
    if target.exists() and not overwrite and (not target.is_dir() or any(target.iterdir())):
        raise InductionError(
            f"{target} already exists and is not empty; choose another --output or overwrite it"
        )
    with staging_dir(target) as stage:
        atomic_write_text(
            stage / MANIFEST_FILE,
            json.dumps(result.manifest(), indent=2, ensure_ascii=False, sort_keys=True) + "\n",
        )
        for entry in result.entries:
            atomic_write_text(stage / ENTRIES_DIR / f"{entry.id}.yaml", dump_entry(entry))
        atomic_write_bytes(stage / CENTROIDS_FILE, centroids_bytes(result.centroids))
        # The staging folder is swapped in whole, so a plain write inside it is atomic too.
        with (stage / ASSIGNMENTS_FILE).open("w", encoding="utf-8", newline="") as handle:
            _write_assignments(handle, result.assignments)
        if result.occurrence_vectors:
            atomic_write_bytes(
                stage / OCCURRENCE_VECTORS_FILE,
                centroids_bytes(result.occurrence_vectors, dtype=np.float16),
            )
        swap_dir(stage, target)
    return target
