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


class Interrupted(KeyboardInterrupt):
    """The run was stopped by SIGINT (Ctrl-C) or SIGTERM (see :func:`saltplan._io.stop_on_signals`).

    A :class:`KeyboardInterrupt`, so code that already handles Ctrl-C handles SIGTERM too.
    ``done`` says how far the run got (batch: rows done), ``written`` lists the files that
    were put in place before the signal was acted on (normally none).
    """

    def __init__(self, signum: int, *, done: str | None = None, written=()):
        self.signum = int(signum)
        self.done = done
        self.written = list(written)
        super().__init__(self.signame)

    @property
    def signame(self) -> str:
        import signal

        try:
            return signal.Signals(self.signum).name
        except ValueError:  # pragma: no cover - only SIGINT and SIGTERM are handled
            return f"signal {self.signum}"

    @property
    def exit_code(self) -> int:
        """128 + signal number, as a shell reports a process stopped by that signal."""
        return 128 + self.signum

    def one_line(self) -> str:
        import os

        written = [p for p in self.written if os.path.exists(p)]
        text = f"interrupted by {self.signame}"
        if self.done:
            text += f" after {self.done}"
        if written:
            text += f"; the outputs were already written ({len(written)} files)"
        else:
            text += "; nothing was written"
        return text
