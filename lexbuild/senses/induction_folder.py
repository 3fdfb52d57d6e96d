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
import os
import shutil
import zipfile
from collections.abc import Sequence
from pathlib import Path

import numpy as np
import numpy.typing as npt

from lexbuild._atomic import atomic_write_bytes, atomic_write_text, staging_dir
from lexbuild.errors import InductionError, SourceLocation
from lexbuild.lexicon.sources import ENTRIES_DIR, dump_entry
from lexbuild.senses.induce import Assignment
from lexbuild.senses.inducer import InductionResult

__all__ = ["ASSIGNMENTS_HEADER", "read_assignments", "write_induction"]

ASSIGNMENTS_HEADER = ("lemma", "sense", "corpus", "sent_id", "token")



def _npz_bytes(arrays: dict[str, npt.NDArray[np.float32]]) -> bytes:
    """``numpy.savez`` content with fixed zip timestamps (numpy stamps the current time)."""
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w", compression=zipfile.ZIP_STORED) as archive:
        for key in sorted(arrays):
            member = io.BytesIO()
            np.lib.format.write_array(member, np.ascontiguousarray(arrays[key], dtype=np.float32))
            info = zipfile.ZipInfo(f"{key}.npy", date_time=(1980, 1, 1, 0, 0, 0))
            info.external_attr = 0o644 << 16
            archive.writestr(info, member.getvalue())
    return buffer.getvalue()


def _assignments_tsv(assignments: Sequence[Assignment]) -> str:
    buffer = io.StringIO()
    writer = csv.writer(buffer, delimiter="\t", lineterminator="\n", quoting=csv.QUOTE_MINIMAL)
    writer.writerow(ASSIGNMENTS_HEADER)
    for a in assignments:
        writer.writerow((a.lemma, a.sense, a.corpus, a.sent_id, a.token))
    return buffer.getvalue()


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
            stage / "induction.json",
            json.dumps(result.manifest(), indent=2, ensure_ascii=False, sort_keys=True) + "\n",
        )
        for entry in result.entries:
            atomic_write_text(stage / ENTRIES_DIR / f"{entry.id}.yaml", dump_entry(entry))
        atomic_write_bytes(stage / "centroids.npz", _npz_bytes(result.centroids))
        atomic_write_text(stage / "assignments.tsv", _assignments_tsv(result.assignments))
        old: Path | None = None
        if target.exists():
            old = target.with_name(f".{target.name}.old-{os.getpid()}")
            os.rename(target, old)
        os.rename(stage, target)
        if old is not None:
            shutil.rmtree(old, ignore_errors=True)
    return target


def read_assignments(folder: str | Path) -> dict[tuple[str, int], tuple[str, str]]:
    """``(sent_id, token) -> (lemma, sense)`` from an induction folder's ``assignments.tsv``."""
    path = Path(folder)
    if path.is_dir():
        path = path / "assignments.tsv"
    out: dict[tuple[str, int], tuple[str, str]] = {}
    with open(path, encoding="utf-8", newline="") as handle:
        reader = csv.reader(handle, delimiter="\t")
        header = next(reader, None)
        if header is None or tuple(header) != ASSIGNMENTS_HEADER:
            raise InductionError(
                f"expected the header {' '.join(ASSIGNMENTS_HEADER)} (tab-separated)",
                SourceLocation.of(path, 1),
            )
        for lineno, row in enumerate(reader, start=2):
            if not row:
                continue
            if len(row) != len(ASSIGNMENTS_HEADER):
                raise InductionError(
                    f"expected {len(ASSIGNMENTS_HEADER)} columns, found {len(row)}",
                    SourceLocation.of(path, lineno),
                )
            lemma, sense, _corpus, sent_id, token = row
            try:
                out[(sent_id, int(token))] = (lemma, sense)
            except ValueError:
                raise InductionError(
                    f"field 'token': {token!r} is not an integer", SourceLocation.of(path, lineno)
                ) from None
    return out
