"""Outcome index: one row per results chain × counterion × stoichiometry, backfilled.

Revision ID: 0002
Revises: 0001
"""
import sqlalchemy as sa
from alembic import op

revision = "0002"
down_revision = "0001"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "outcome_facts",
        sa.Column("id", sa.Integer, primary_key=True, autoincrement=True),
        sa.Column("results_chain", sa.String(80), nullable=False),
        sa.Column("results_uid", sa.String(80), nullable=False),
        sa.Column("programme", sa.String(100), nullable=False),
        sa.Column("compound", sa.String(200)),
        sa.Column("counterion", sa.String(100), nullable=False),
        sa.Column("stoichiometry", sa.String(20), nullable=False),
        sa.Column("site_class", sa.String(100), nullable=False),
        sa.Column("site_kind", sa.String(10), nullable=False),
        sa.Column("site_pka", sa.Float, nullable=False),
        sa.Column("wells", sa.Integer, nullable=False),
        sa.Column("success", sa.Boolean, nullable=False))
    op.create_index("ix_outcome_facts_results_chain", "outcome_facts", ["results_chain"])
    op.create_index("ix_fact_lookup", "outcome_facts", ["counterion", "site_class", "site_pka"])
    # backfill from the results already recorded under the first schema
    from saltplan.ledger.facts import rebuild_facts

    rebuild_facts(op.get_bind())


def downgrade() -> None:
    op.drop_table("outcome_facts")
