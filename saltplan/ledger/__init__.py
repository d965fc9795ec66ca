"""The ledger: a shared, append-only record of every compound, plan, screen design,
results file (with per-well observations), selection and decision.

SQLite by default (one file per user, WAL mode), PostgreSQL for a team (psycopg 3); the
same code and tests run on both. Schema migrations (Alembic) ship in
``saltplan/ledger/migrations`` and run when a ledger is opened.

>>> from saltplan.ledger import open_ledger                      # doctest: +SKIP
>>> with open_ledger("team.sqlite") as led:                      # doctest: +SKIP
...     ref = led.record_plan(plan)
...     led.outcomes("mesylate", "amine_tertiary", 7.5, 10.5).to_dict()

Public API
----------
:func:`open_ledger`, :class:`Ledger` (``record_compound``, ``record_plan``,
``record_screen``, ``record_results``, ``save_observation``, ``observations``,
``record_selection``, ``record_decision``, ``history``, ``show``, ``outcomes``,
``inhouse_evidence``, ``verify``, ``export_jsonl``, ``import_jsonl``, ``rebuild_index``,
``counts``), :func:`resolve_url`, :func:`default_path`, :data:`ENV_VAR`,
:class:`LedgerError`, :class:`StaleVersionError`.
"""
from __future__ import annotations

from .errors import LedgerError, StaleVersionError
from .location import ENV_VAR, default_path, resolve_url

__all__ = ["open_ledger", "Ledger", "LedgerError", "StaleVersionError", "ENV_VAR",
           "default_path", "resolve_url", "head_revision", "InhouseEvidence", "Outcomes"]


def __getattr__(name):  # lazy: importing saltplan.ledger does not import SQLAlchemy
    if name in ("open_ledger", "Ledger", "head_revision", "InhouseEvidence", "Outcomes",
                "Ref", "VerifyReport", "migrate_to"):
        from . import store

        return getattr(store, name)
    raise AttributeError(name)
