"""Alembic environment of the ledger: run programmatically by saltplan.ledger (no alembic.ini).

The caller passes an open connection in ``config.attributes["connection"]``; the
migration runs inside the caller's transaction.
"""
from alembic import context

from saltplan.ledger.models import Base

VERSION_TABLE = "ledger_schema_version"

connection = context.config.attributes.get("connection")
if connection is None:  # pragma: no cover - only used programmatically
    raise RuntimeError("saltplan ledger migrations run through saltplan.ledger.open_ledger")
context.configure(connection=connection, target_metadata=Base.metadata,
                  version_table=VERSION_TABLE, render_as_batch=True,
                  transactional_ddl=True)
context.run_migrations()
