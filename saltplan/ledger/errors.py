"""Errors of the ledger (each a :class:`saltplan.errors.SaltplanError`, one line)."""
from __future__ import annotations

from ..errors import SaltplanError


class LedgerError(SaltplanError, RuntimeError):
    """The ledger cannot be opened or written (locked, read-only, corrupt, newer schema,
    server unreachable) or a request names a record it does not hold."""


class StaleVersionError(LedgerError):
    """A save named a version of a well or record that is no longer the newest."""
