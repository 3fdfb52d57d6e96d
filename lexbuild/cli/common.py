"""What every command shares: exit codes and common options (no command table import)."""

from __future__ import annotations

import argparse
from pathlib import Path

__all__ = ["EXIT_FINDINGS", "EXIT_OK", "EXIT_USAGE", "add_schemas_option"]

EXIT_OK = 0  # clean
EXIT_FINDINGS = 1  # check or validation findings
EXIT_USAGE = 2  # usage, input or I/O error


def add_schemas_option(parser: argparse.ArgumentParser) -> None:
    """``--schemas DIR``, with the documented search order when it is not given."""
    parser.add_argument(
        "--schemas",
        type=Path,
        default=None,
        metavar="DIR",
        help="folder with the published schema files (default: $LEXBUILD_SCHEMAS, else the "
        "per-user cache filled by `lexbuild schemas fetch`)",
    )
