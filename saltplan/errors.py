"""Error hierarchy.

Every error the tool raises on purpose is a :class:`SaltplanError`; each leaf also
subclasses a builtin so callers can catch either. The CLI turns these into one-line
messages (exit 1) in exactly one place, ``saltplan.cli``.
"""
from __future__ import annotations


class SaltplanError(Exception):
    """Base class of every error raised on purpose by saltplan."""

    def __init__(self, message: str, *, file: str | None = None, entry: str | None = None,
                 field: str | None = None, row: int | None = None):
        self.message = message
        self.file = file
        self.entry = entry
        self.field = field
        self.row = row
        super().__init__(self.one_line())

    def one_line(self) -> str:
        where = []
        if self.file:
            where.append(str(self.file))
        if self.row is not None:
            where.append(f"row {self.row}")
        if self.entry:
            where.append(f"entry '{self.entry}'")
        if self.field:
            where.append(f"field '{self.field}'")
        prefix = ", ".join(where)
        text = f"{prefix}: {self.message}" if prefix else self.message
        return " ".join(text.split())  # always one line


class StructureError(SaltplanError, ValueError):
    """A structure could not be read or is not something we can plan for."""


class CounterionLibraryError(SaltplanError, ValueError):
    """A counterion library file is malformed."""


class SolventLibraryError(SaltplanError, ValueError):
    """A solvent library file is malformed."""


class ParameterError(SaltplanError, ValueError):
    """A parameter table or user option is malformed or out of range."""


class BudgetError(SaltplanError, ValueError):
    """A screen design does not fit the API or counterion budget."""


class InputFileError(SaltplanError, ValueError):
    """An input file (CSV, SDF, results) is missing, unreadable or malformed."""


class ResultsError(SaltplanError, ValueError):
    """A screen-results file does not match its design or holds impossible values."""


class OutputFileError(SaltplanError, OSError):
    """An output file or folder cannot be written (not a folder, no permission, disk full)."""
