"""What the review site shows of an induction folder and a calibration folder.

``read_induction_view(folder)`` reads the folder ``lexbuild induce`` writes through the
project's readers (``load_entry`` for ``entries/*.yaml``, ``read_assignments`` for
``assignments.tsv``) plus ``induction.json``, and, when present, ``occurrence-vectors.npz``: the
vectors of the clustered occurrences, one float32 matrix per induced sense id (same layout as
``centroids.npz``), which the 2-D projection needs. An induction folder without that file still
gives cluster sizes and frame distributions; the page says why the projection is missing.
``read_calibration_view`` reads ``calibration.json`` with ``read_calibration``.
"""

from __future__ import annotations

import io
import json
import zipfile
from collections import Counter
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import numpy.typing as npt

from lexbuild.errors import InductionError, SourceLocation
from lexbuild.senses.induction_folder import OCCURRENCE_VECTORS_FILE

__all__ = [
    "OCCURRENCE_VECTORS_FILE",
    "InducedEntry",
    "InducedSense",
    "InductionView",
    "occurrence_vectors_bytes",
    "read_calibration_view",
    "read_induction_view",
]


Matrix = npt.NDArray[np.float32]


@dataclass(frozen=True)
class InducedSense:
    id: str
    cluster_size: int  # occurrences clustered into it (the sample)
    assigned: int  # occurrences assigned to it in assignments.tsv (the whole corpus)
    frames: tuple[tuple[str, int], ...]  # canonical pattern, frequency


@dataclass(frozen=True)
class InducedEntry:
    id: str
    lemma: str
    senses: tuple[InducedSense, ...]


@dataclass(frozen=True)
class InductionView:
    name: str
    manifest: dict[str, Any]
    entries: dict[str, InducedEntry]  # by lemma
    vectors: dict[str, Matrix] | None = field(default=None, compare=False)


def _read_npz(path: Path) -> dict[str, Matrix]:
    try:
        with np.load(path, allow_pickle=False) as archive:
            return {key: np.asarray(archive[key], dtype=np.float32) for key in archive.files}
    except (OSError, ValueError, zipfile.BadZipFile) as error:
        raise InductionError(f"not a readable .npz file ({error})",
                             SourceLocation.of(path)) from None


def read_induction_view(folder: str | Path) -> InductionView:
    """The induction folder as the site shows it; raises ``InductionError`` naming the file."""
    from lexbuild.lexicon.sources import ENTRIES_DIR, load_entry
    from lexbuild.senses.induction_folder import read_assignments

    root = Path(folder)
    manifest_path = root / "induction.json"
    if not manifest_path.is_file():
        raise InductionError("not an induction folder (no induction.json); write one with "
                             "'lexbuild induce'", SourceLocation.of(root))
    try:
        manifest = json.loads(manifest_path.read_text(encoding="utf-8"))
    except json.JSONDecodeError as error:
        raise InductionError(f"not valid JSON ({error.msg})",
                             SourceLocation.of(manifest_path, error.lineno, error.colno)) from None
    if not isinstance(manifest, dict):
        raise InductionError("expected a JSON object", SourceLocation.of(manifest_path, 1))
    assigned = Counter(sense for _lemma, sense in read_assignments(root).values())
    entries: dict[str, InducedEntry] = {}
    for path in sorted((root / ENTRIES_DIR).glob("*.yaml")):
        entry = load_entry(path)
        senses = tuple(
            InducedSense(
                id=sense.id,
                cluster_size=sense.induction.cluster_size if sense.induction else 0,
                assigned=assigned.get(sense.id, 0),
                frames=tuple((frame.pattern, frame.frequency or 0) for frame in sense.frames),
            )
            for sense in entry.senses
        )
        entries[entry.lemma] = InducedEntry(entry.id, entry.lemma, senses)
    vectors_path = root / OCCURRENCE_VECTORS_FILE
    vectors = _read_npz(vectors_path) if vectors_path.is_file() else None
    return InductionView(root.name, manifest, dict(sorted(entries.items())), vectors)


def occurrence_vectors_bytes(vectors: dict[str, Matrix]) -> bytes:
    """``occurrence-vectors.npz`` content: one matrix per sense id, fixed zip timestamps so the
    same vectors give the same bytes."""
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w", compression=zipfile.ZIP_STORED) as archive:
        for key in sorted(vectors):
            member = io.BytesIO()
            np.lib.format.write_array(
                member, np.ascontiguousarray(vectors[key], dtype=np.float32)
            )
            info = zipfile.ZipInfo(f"{key}.npy", date_time=(1980, 1, 1, 0, 0, 0))
            info.external_attr = 0o644 << 16
            archive.writestr(info, member.getvalue())
    return buffer.getvalue()


def read_calibration_view(folder: str | Path) -> dict[str, Any]:
    """``calibration.json`` through ``read_calibration``, with the sweep checked for plotting."""
    from lexbuild.senses.calibrate import read_calibration

    data = read_calibration(folder)
    rows = data.get("thresholds")
    if not isinstance(rows, list) or not all(
        isinstance(row, dict) and isinstance(row.get("threshold"), int | float) for row in rows
    ):
        raise InductionError("'thresholds' must be a list of objects with a 'threshold' number; "
                             "write it with 'lexbuild calibrate'", SourceLocation.of(folder))
    return data
