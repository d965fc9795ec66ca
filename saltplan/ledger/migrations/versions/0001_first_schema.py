"""First ledger schema: compounds, records, per-well observations.

Revision ID: 0001
Revises:
"""
import sqlalchemy as sa
from alembic import op

revision = "0001"
down_revision = None
branch_labels = None
depends_on = None


def _envelope():
    return [
        sa.Column("uid", sa.String(80), nullable=False, unique=True),
        sa.Column("replaces", sa.String(80), nullable=True),
        sa.Column("revision", sa.Integer, nullable=False),
        sa.Column("saltplan_version", sa.String(40), nullable=False),
        sa.Column("author", sa.String(200), nullable=False),
        sa.Column("created", sa.String(32), nullable=False),
        sa.Column("body", sa.Text, nullable=False),
        sa.Column("checksum", sa.String(80), nullable=False),
    ]


def upgrade() -> None:
    op.create_table(
        "compounds",
        sa.Column("id", sa.Integer, primary_key=True, autoincrement=True),
        sa.Column("name", sa.String(200)),
        sa.Column("programme", sa.String(100), nullable=False),
        sa.Column("parent_smiles", sa.Text, nullable=False),
        sa.Column("inchikey", sa.String(40), nullable=False),
        sa.Column("supplied_form", sa.String(200)),
        *_envelope())
    op.create_index("ix_compounds_name", "compounds", ["name"])
    op.create_index("ix_compounds_programme", "compounds", ["programme"])
    op.create_index("ix_compounds_inchikey", "compounds", ["inchikey"])
    op.create_index("ix_compounds_replaces", "compounds", ["replaces"])
    op.create_table(
        "records",
        sa.Column("id", sa.Integer, primary_key=True, autoincrement=True),
        sa.Column("kind", sa.String(20), nullable=False),
        sa.Column("compound_uid", sa.String(80)),
        sa.Column("parent_uid", sa.String(80)),
        sa.Column("chain", sa.String(80), nullable=False),
        sa.Column("input_hash", sa.String(80)),
        sa.Column("library_hash", sa.String(80)),
        sa.Column("weights_hash", sa.String(80)),
        *_envelope())
    for col in ("kind", "compound_uid", "parent_uid", "chain", "replaces"):
        op.create_index(f"ix_records_{col}", "records", [col])
    op.create_table(
        "observations",
        sa.Column("id", sa.Integer, primary_key=True, autoincrement=True),
        sa.Column("results_uid", sa.String(80), nullable=False),
        sa.Column("well", sa.String(10), nullable=False),
        sa.Column("version", sa.Integer, nullable=False),
        sa.Column("outcome", sa.String(40)),
        *_envelope(),
        sa.UniqueConstraint("results_uid", "well", "version", name="uq_observation_version"))
    op.create_index("ix_observations_results_uid", "observations", ["results_uid"])
    op.create_index("ix_observations_replaces", "observations", ["replaces"])


def downgrade() -> None:
    op.drop_table("observations")
    op.drop_table("records")
    op.drop_table("compounds")
