"""The review site of a dictionary: static HTML that editors open from the file system.

An index of entries (filter by text, status and flag; sortable), one page per entry (senses side
by side, frames with frequency bars, examples with the verb and each argument marked by slot),
the change log of an edition, and induction diagnostics (cluster sizes, frames per induced
sense, a 2-D projection of the occurrence vectors, the calibration sweep). Labels follow the
dictionary's language (French and English). Rendering is pure (``build_site``); writing is
atomic (``write_site``).
"""

from lexbuild.review.diagnostics import (
    OCCURRENCE_VECTORS_FILE,
    InductionView,
    occurrence_vectors_bytes,
    read_calibration_view,
    read_induction_view,
)
from lexbuild.review.site import (
    SITE_DIR,
    EditionLink,
    SiteInputs,
    build_site,
    edition_site,
    preview_inputs,
    site_manifest,
    write_files,
    write_site,
)

__all__ = [
    "OCCURRENCE_VECTORS_FILE",
    "SITE_DIR",
    "EditionLink",
    "InductionView",
    "SiteInputs",
    "build_site",
    "edition_site",
    "occurrence_vectors_bytes",
    "preview_inputs",
    "read_calibration_view",
    "read_induction_view",
    "site_manifest",
    "write_files",
    "write_site",
]
