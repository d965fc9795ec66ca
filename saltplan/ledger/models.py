"""SQLAlchemy 2 models of the ledger (the schema at the newest migration).

Every table is append-only in normal use: a revision is a new row whose ``replaces``
names the row it supersedes. ``outcome_facts`` is a derived index (rebuilt from the
records by :meth:`saltplan.ledger.Ledger.rebuild_index`), the only table rows of which
are replaced.

Tables
------
``compounds``     one row per compound version (name, programme, parent SMILES,
                  InChIKey, supplied form)
``records``       plans, screen designs, results files, selections and decisions
                  (``kind``), each with its full JSON body and provenance
``observations``  per-well observations of a results record; ``version`` counts the
                  edits of one well (optimistic locking)
``outcome_facts`` per results chain × counterion × stoichiometry: site class, site pKa,
                  programme, crystalline in the intended stoichiometry or not
"""
from __future__ import annotations

from sqlalchemy import Boolean, Float, Index, Integer, String, Text, UniqueConstraint
from sqlalchemy.orm import DeclarativeBase, Mapped, mapped_column

#: kinds of ``records`` rows
KINDS = ("plan", "screen", "results", "selection", "decision")


class Base(DeclarativeBase):
    pass


class _Envelope:
    """Columns every recorded row carries."""

    uid: Mapped[str] = mapped_column(String(80), unique=True, nullable=False)
    replaces: Mapped[str | None] = mapped_column(String(80), nullable=True, index=True)
    revision: Mapped[int] = mapped_column(Integer, nullable=False, default=1)
    saltplan_version: Mapped[str] = mapped_column(String(40), nullable=False)
    author: Mapped[str] = mapped_column(String(200), nullable=False)
    created: Mapped[str] = mapped_column(String(32), nullable=False)   # ISO 8601 UTC, "Z"
    body: Mapped[str] = mapped_column(Text, nullable=False)            # canonical JSON
    checksum: Mapped[str] = mapped_column(String(80), nullable=False)


class Compound(_Envelope, Base):
    __tablename__ = "compounds"

    id: Mapped[int] = mapped_column(Integer, primary_key=True, autoincrement=True)
    name: Mapped[str | None] = mapped_column(String(200), index=True)
    programme: Mapped[str] = mapped_column(String(100), nullable=False, index=True)
    parent_smiles: Mapped[str] = mapped_column(Text, nullable=False)
    inchikey: Mapped[str] = mapped_column(String(40), nullable=False, index=True)
    supplied_form: Mapped[str | None] = mapped_column(String(200))


class Record(_Envelope, Base):
    __tablename__ = "records"

    id: Mapped[int] = mapped_column(Integer, primary_key=True, autoincrement=True)
    kind: Mapped[str] = mapped_column(String(20), nullable=False, index=True)
    compound_uid: Mapped[str | None] = mapped_column(String(80), index=True)
    parent_uid: Mapped[str | None] = mapped_column(String(80), index=True)
    chain: Mapped[str] = mapped_column(String(80), nullable=False, index=True)
    input_hash: Mapped[str | None] = mapped_column(String(80))
    library_hash: Mapped[str | None] = mapped_column(String(80))
    weights_hash: Mapped[str | None] = mapped_column(String(80))


class Observation(_Envelope, Base):
    __tablename__ = "observations"
    __table_args__ = (UniqueConstraint("results_uid", "well", "version",
                                       name="uq_observation_version"),)

    id: Mapped[int] = mapped_column(Integer, primary_key=True, autoincrement=True)
    results_uid: Mapped[str] = mapped_column(String(80), nullable=False, index=True)
    well: Mapped[str] = mapped_column(String(10), nullable=False)
    version: Mapped[int] = mapped_column(Integer, nullable=False)
    outcome: Mapped[str | None] = mapped_column(String(40))


class OutcomeFact(Base):
    __tablename__ = "outcome_facts"
    __table_args__ = (Index("ix_fact_lookup", "counterion", "site_class", "site_pka"),)

    id: Mapped[int] = mapped_column(Integer, primary_key=True, autoincrement=True)
    results_chain: Mapped[str] = mapped_column(String(80), nullable=False, index=True)
    results_uid: Mapped[str] = mapped_column(String(80), nullable=False)
    programme: Mapped[str] = mapped_column(String(100), nullable=False)
    compound: Mapped[str | None] = mapped_column(String(200))
    counterion: Mapped[str] = mapped_column(String(100), nullable=False)
    stoichiometry: Mapped[str] = mapped_column(String(20), nullable=False)
    site_class: Mapped[str] = mapped_column(String(100), nullable=False)
    site_kind: Mapped[str] = mapped_column(String(10), nullable=False)
    site_pka: Mapped[float] = mapped_column(Float, nullable=False)
    wells: Mapped[int] = mapped_column(Integer, nullable=False)
    success: Mapped[bool] = mapped_column(Boolean, nullable=False)
