"""One exception root for lexbuild, one subclass per area.

Each subclass also inherits the built-in exception a caller would already catch, in the manner
of scikit-learn's ``NotFittedError(ValueError, AttributeError)``.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path


@dataclass(frozen=True, slots=True)
class SourceLocation:
    """Where a value came from: file, 1-based line and 1-based column (0 when unknown)."""

    file: str
    line: int = 0
    column: int = 0

    def __str__(self) -> str:
        if self.line and self.column:
            return f"{self.file}:{self.line}:{self.column}"
        if self.line:
            return f"{self.file}:{self.line}"
        return self.file

    @classmethod
    def of(cls, path: str | Path, line: int = 0, column: int = 0) -> SourceLocation:
        return cls(str(path), line, column)


class LexbuildError(Exception):
    """Root of every error lexbuild raises on purpose (user errors, not bugs)."""

    def __init__(self, message: str, location: SourceLocation | None = None) -> None:
        self.message = message
        self.location = location
        super().__init__(f"{location}: {message}" if location else message)


class IdentifierError(LexbuildError, ValueError):
    """A string cannot be turned into, or read back from, an XML identifier."""


class FrameSyntaxError(LexbuildError, ValueError):
    """A frame string does not follow the canonical frame syntax."""


class SourceError(LexbuildError, ValueError):
    """A YAML source file cannot be read or does not fit the model."""


class CorpusError(LexbuildError, ValueError):
    """A corpus file is malformed (CoNLL-U syntax, encoding, tree structure)."""


class SchemaError(LexbuildError, OSError):
    """A published schema file is missing, altered or unusable."""


class ExportError(LexbuildError, ValueError):
    """A lexicon cannot be written in an interchange format."""


class ValidationFailed(LexbuildError, ValueError):
    """A document does not validate against its schemas."""


class InductionError(LexbuildError, ValueError):
    """Sense induction cannot run with the given inputs or settings."""


class ModelLoadError(LexbuildError, OSError):
    """An embedding model cannot be loaded from disk."""


class MergeError(LexbuildError, ValueError):
    """An induction result cannot be merged into the sources."""


class ReleaseError(LexbuildError, RuntimeError):
    """An edition cannot be released (check errors, validation failure, existing edition)."""


class UnsafeXMLError(LexbuildError, ValueError):
    """An XML file uses entities, DTD tricks or sizes that lexbuild refuses to read."""


class FetchError(LexbuildError, OSError):
    """A pinned external file cannot be fetched, or what arrived is not the published file."""


class MalformedXMLError(LexbuildError, ValueError):
    """An XML file read back is not well-formed (syntax, encoding, depth or text size limits)."""


class ClusterError(LexbuildError, RuntimeError):
    """The Dask cluster cannot be reached, or a task failed there after its retries."""


class InductionFolderError(InductionError, MergeError, SourceError):
    """An induction folder cannot be read (file, line and field named); caught as an
    induction, merge or source error alike."""


class PieceAlignmentError(ModelLoadError):
    """A tokenizer's word pieces cannot be mapped back to the words they came from."""
