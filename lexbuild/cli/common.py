"""Exit codes shared by every command (importable without the command table)."""

from __future__ import annotations

__all__ = ["EXIT_FINDINGS", "EXIT_OK", "EXIT_USAGE"]

EXIT_OK = 0  # clean
EXIT_FINDINGS = 1  # check or validation findings
EXIT_USAGE = 2  # usage, input or I/O error
