"""The ledger: an append-only store of compounds, plans, screens, results, selections and
decisions, on SQLite (default) or PostgreSQL.

Use :func:`open_ledger`; every ``record_*`` call is one database transaction (a killed
process leaves either the whole record or nothing). Nothing is updated or deleted in
normal use: a revision is a new row whose ``replaces`` names the row it supersedes, and
revising a row that already has a successor is refused (:class:`StaleVersionError`).
"""
from __future__ import annotations

import getpass
import json
import os
import re
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import IO, Any

import sqlalchemy as sa
from sqlalchemy import event
from sqlalchemy import exc as sa_exc
from sqlalchemy.engine import make_url

from .._version import __version__
from ._canonical import canonical_json, plain, sha256_of
from .errors import LedgerError, StaleVersionError
from .facts import refresh_chain
from .location import resolve_url
from .models import Compound, Observation, OutcomeFact, Record

#: name of Alembic's version table in a ledger
VERSION_TABLE = "ledger_schema_version"
_MIGRATIONS = Path(__file__).with_name("migrations")
_UID_PREFIX = {"compound": "cmp", "plan": "pln", "screen": "scr", "results": "res",
               "selection": "sel", "decision": "dec", "observation": "obs"}
_PG_LOCK = 0x5A17_1ED6  # advisory lock id held while a PostgreSQL ledger migrates


# --------------------------------------------------------------------------- results
@dataclass(frozen=True)
class Ref:
    """What a ``record_*`` call stored: kind, uid, revision (1 = first), whether the call
    found an identical record already stored (``existing``)."""

    kind: str
    uid: str
    revision: int = 1
    existing: bool = False
    version: int | None = None        # observations: the well's version after the save

    def to_dict(self) -> dict[str, Any]:
        out = {"kind": self.kind, "uid": self.uid, "revision": self.revision,
               "existing": self.existing}
        if self.version is not None:
            out["version"] = self.version
        return out


@dataclass(frozen=True)
class Mismatch:
    """A row whose stored checksum differs from the one recomputed by :meth:`Ledger.verify`."""

    table: str
    uid: str
    stored: str
    computed: str

    def to_dict(self) -> dict[str, str]:
        return {"table": self.table, "uid": self.uid, "stored": self.stored,
                "computed": self.computed}


@dataclass(frozen=True)
class VerifyReport:
    checked: int
    mismatches: tuple[Mismatch, ...]

    @property
    def ok(self) -> bool:
        return not self.mismatches

    def to_dict(self) -> dict[str, Any]:
        return {"checked": self.checked, "ok": self.ok,
                "mismatches": [m.to_dict() for m in self.mismatches]}


@dataclass(frozen=True)
class OutcomeRow:
    programme: str
    screens: int
    crystalline: int
    compounds: tuple[str, ...]

    def to_dict(self) -> dict[str, Any]:
        return {"programme": self.programme, "screens": self.screens,
                "crystalline": self.crystalline, "compounds": list(self.compounds)}


@dataclass(frozen=True)
class Outcomes:
    """Answer of :meth:`Ledger.outcomes`: per programme, how many screens (results chains)
    tried the counterion on a matching site and how many gave it crystalline in the
    intended stoichiometry (definition in :mod:`saltplan.ledger.facts`)."""

    counterion: str
    site_class: str | None
    pka_min: float | None
    pka_max: float | None
    rows: tuple[OutcomeRow, ...]

    @property
    def screens(self) -> int:
        return sum(r.screens for r in self.rows)

    @property
    def crystalline(self) -> int:
        return sum(r.crystalline for r in self.rows)

    def to_dict(self) -> dict[str, Any]:
        return {"counterion": self.counterion, "site_class": self.site_class,
                "pka_min": self.pka_min, "pka_max": self.pka_max,
                "screens": self.screens, "crystalline": self.crystalline,
                "definition": "screens = results files (with their revisions) whose design "
                              "has a sample well of the counterion on a matching API site; "
                              "crystalline = at least one such well crystalline, not a "
                              "free-form pattern, stoichiometry found within 10 % of the "
                              "intended one",
                "by_programme": [r.to_dict() for r in self.rows]}

    def render(self) -> str:
        """Plain-text view (terminal, demo): one row per programme and a total."""
        site = self.site_class or "any site class"
        if self.pka_min is None and self.pka_max is None:
            rng = "any pKa"
        else:
            lo = "" if self.pka_min is None else f"{self.pka_min:g}"
            hi = "" if self.pka_max is None else f"{self.pka_max:g}"
            rng = f"pKa {lo}–{hi}"
        lines = [f"outcomes    {self.counterion} on {site}, {rng}"]
        if not self.rows:
            lines.append("no recorded screen tried it on such a site")
        else:
            rows = [[r.programme, r.screens, r.crystalline, ", ".join(r.compounds)]
                    for r in self.rows]
            rows.append(["all", self.screens, self.crystalline, ""])
            lines.append(_text_table(rows, ["programme", "screens", "crystalline", "compounds"]))
        lines.append("(screens = recorded results files whose design had the counterion on such "
                     "a site; crystalline = at least one well crystalline, not a free-form "
                     "pattern, stoichiometry within 10 % of the intended one)")
        return "\n".join(lines)


@dataclass(frozen=True)
class InhouseEvidence:
    """A snapshot of the outcome index for the ranking (see :mod:`saltplan.plan.inhouse`).

    ``facts`` holds (counterion, site_class, site_pka, success, programme, chain)."""

    facts: tuple[tuple[str, str, float, bool, str, str], ...]
    source: str
    _by_key: dict = field(default_factory=dict, compare=False, repr=False)

    def __post_init__(self):
        index: dict[tuple[str, str], list] = {}
        for f in self.facts:
            index.setdefault((f[0], f[1]), []).append(f)
        object.__setattr__(self, "_by_key", index)

    def lookup(self, counterion: str, site_class: str, pka: float,
               window: float = 1.5) -> tuple[int, int, tuple[str, ...]]:
        """(screens, crystalline, programmes) for a counterion on sites of the same class
        with pKa within ±``window``; one screen counts once."""
        screens: dict[str, bool] = {}
        programmes: dict[str, int] = {}
        for _ci, _cls, spka, success, prog, chain in self._by_key.get((counterion, site_class), ()):
            if abs(spka - pka) <= window + 1e-9:
                screens[chain] = screens.get(chain, False) or success
                programmes[prog] = programmes.get(prog, 0) + 1
        order = tuple(sorted(programmes, key=lambda p: (-programmes[p], p)))
        return len(screens), sum(screens.values()), order


# --------------------------------------------------------------------------- opening
def _display(url: sa.URL) -> str:
    """What messages name: the file for SQLite, the URL without its password otherwise."""
    if url.get_backend_name() == "sqlite":
        return url.database or ":memory:"
    return url.render_as_string(hide_password=True)


def _translate(exc: BaseException, where: str) -> LedgerError:
    """A one-line LedgerError for a database error (never carrying a password)."""
    text = str(getattr(exc, "orig", None) or exc).splitlines()[0] if str(exc) else ""
    low = text.lower()
    if "locked" in low or "busy" in low:
        return LedgerError("ledger is locked by another process; try again when it has "
                           "finished (or use a PostgreSQL ledger for a team)", file=where)
    if "readonly" in low or "read-only" in low or "read only" in low:
        return LedgerError("ledger is read-only; ask for write access, or copy it and "
                           "point --ledger at the copy", file=where)
    if "not a database" in low or "malformed" in low or "corrupt" in low:
        return LedgerError("not a readable saltplan ledger (corrupt or another kind of "
                           "file); restore it from a backup or an export (`saltplan ledger "
                           "import`), or point --ledger elsewhere", file=where)
    if "unable to open" in low:
        return LedgerError("cannot open the ledger file (missing folder or no permission); "
                           "check the path or point --ledger elsewhere", file=where)
    if isinstance(exc, sa_exc.OperationalError) or "connection" in low:
        return LedgerError(f"cannot reach the ledger database ({_scrub(text)}); check the "
                           "server, the URL and the PG* environment variables", file=where)
    return LedgerError(f"ledger database error: {_scrub(text)}", file=where)


def _scrub(text: str) -> str:
    """Remove anything that looks like a password from a driver message."""
    text = re.sub(r"(password\s*=\s*)\S+", r"\1***", text, flags=re.I)
    return re.sub(r"(://[^:/@\s]+:)[^@\s]+@", r"\1***@", text)


def open_ledger(url: str | os.PathLike | None = None, *, create: bool = True,
                migrate: bool = True, author: str | None = None,
                timeout: float = 60.0) -> Ledger:
    """Open (and if need be create and migrate) a ledger.

    Parameters
    ----------
    url : str or path, optional
        SQLAlchemy URL (``sqlite:///file``, ``postgresql+psycopg://user@host/db``) or a
        file path. Default: ``$SALTPLAN_LEDGER``, else the per-user file
        (:func:`saltplan.ledger.default_path`). PostgreSQL credentials come from the URL or
        the standard ``PG*`` variables / ``~/.pgpass`` (libpq); they are never shown.
    create : bool
        Create a missing SQLite file (and its folder). False: a missing file is an error.
    migrate : bool
        Bring an older schema up to date in place (one transaction). False: an older
        schema is an error.
    author : str, optional
        Default author of the records written through this handle (else the OS user).
    timeout : float
        SQLite: seconds to wait for another writer before "locked" [default 60].

    Raises
    ------
    LedgerError
        Locked, read-only, corrupt, newer-schema or unreachable ledger (one line naming
        the file or the URL without its password, and what to do).
    """
    text = resolve_url(url)
    try:
        parsed = make_url(text)
    except sa_exc.ArgumentError:
        raise LedgerError("not a database URL or file path (expected a file path, "
                          "sqlite:///FILE or postgresql+psycopg://USER@HOST/DB)",
                          file=_scrub(text)) from None
    backend = parsed.get_backend_name()
    if backend not in ("sqlite", "postgresql"):
        raise LedgerError(f"unsupported database '{backend}' (SQLite or PostgreSQL)",
                          file=_display(parsed))
    if backend == "postgresql" and parsed.drivername != "postgresql+psycopg":
        parsed = parsed.set(drivername="postgresql+psycopg")
    where = _display(parsed)
    if backend == "sqlite":
        engine = _sqlite_engine(parsed, where, create, timeout)
    else:
        engine = sa.create_engine(parsed, pool_pre_ping=False, hide_parameters=True)
    ledger = Ledger(engine, where, author=author)
    try:
        ledger._prepare(migrate)
    except BaseException:
        engine.dispose()
        raise
    return ledger


def _sqlite_engine(url: sa.URL, where: str, create: bool, timeout: float) -> sa.Engine:
    path = url.database
    if path and path != ":memory:" and not url.query.get("uri"):
        p = Path(path)
        if p.is_dir():
            raise LedgerError("is a folder, not a ledger file; name a file (e.g. "
                              f"{p / 'ledger.sqlite'})", file=where)
        if not p.exists():
            if not create:
                raise LedgerError("no ledger here; record something first or check the "
                                  "path", file=where)
            try:
                p.parent.mkdir(parents=True, exist_ok=True)
            except OSError as exc:
                raise LedgerError(f"cannot create the ledger folder ({exc.strerror}); point "
                                  "--ledger elsewhere", file=where) from None
        elif not os.access(p, os.W_OK) or not os.access(p.parent, os.W_OK):
            raise LedgerError("ledger is read-only (the file or its folder cannot be "
                              "written, and SQLite's WAL mode needs both); ask for write "
                              "access, or copy it and point --ledger at the copy", file=where)
    engine = sa.create_engine(url, connect_args={"timeout": float(timeout)})

    @event.listens_for(engine, "connect")
    def _on_connect(dbapi_conn, _record):
        # we issue BEGIN ourselves; the busy wait is the driver's `timeout`
        dbapi_conn.isolation_level = None
        cur = dbapi_conn.cursor()
        try:
            cur.execute("PRAGMA journal_mode = WAL")
            cur.execute("PRAGMA synchronous = NORMAL")
        finally:
            cur.close()

    @event.listens_for(engine, "begin")
    def _on_begin(conn):
        # take the write lock at the start: no lock upgrade deadlocks between writers
        conn.exec_driver_sql("BEGIN IMMEDIATE")

    return engine


def _alembic_config(connection):
    from alembic.config import Config

    cfg = Config()
    cfg.set_main_option("script_location", str(_MIGRATIONS))
    cfg.attributes["connection"] = connection
    return cfg


def head_revision() -> str:
    """Newest schema revision this saltplan knows."""
    from alembic.script import ScriptDirectory

    cfg = _alembic_config(None)
    return str(ScriptDirectory.from_config(cfg).get_current_head())


def known_revisions() -> list[str]:
    from alembic.script import ScriptDirectory

    script = ScriptDirectory.from_config(_alembic_config(None))
    return [s.revision for s in script.walk_revisions()]


def migrate_to(connection, revision: str = "head") -> None:
    """Run the migrations up to ``revision`` on an open connection (inside its
    transaction). Used by :func:`open_ledger` and by the tests of old schemas."""
    from alembic import command

    command.upgrade(_alembic_config(connection), revision)


# --------------------------------------------------------------------------- the ledger
class Ledger:
    """A handle on one ledger database (from :func:`open_ledger`).

    Thread-safe like a SQLAlchemy engine; open one per process. ``with open_ledger() as
    led:`` closes it at the end.
    """

    def __init__(self, engine: sa.Engine, where: str, author: str | None = None):
        self.engine = engine
        self.where = where
        self.author = author

    # ------------------------------------------------------------------ plumbing
    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()

    def close(self) -> None:
        """Release the connections (SQLite: the WAL is checkpointed and removed)."""
        self.engine.dispose()

    @property
    def backend(self) -> str:
        """``sqlite`` or ``postgresql``."""
        return self.engine.dialect.name

    def _tx(self):
        return _Tx(self)

    def _prepare(self, migrate: bool) -> None:
        from alembic.runtime.migration import MigrationContext

        head = head_revision()
        with self._tx() as conn:
            if self.backend == "postgresql":
                conn.execute(sa.select(sa.func.pg_advisory_xact_lock(_PG_LOCK)))
            ctx = MigrationContext.configure(conn, opts={"version_table": VERSION_TABLE})
            current = ctx.get_current_revision()
            if current == head:
                return
            if current is not None and current not in known_revisions():
                raise LedgerError(
                    f"ledger schema '{current}' is newer than this saltplan knows "
                    f"(newest '{head}'); upgrade saltplan (pip install -U saltplan)",
                    file=self.where)
            if current is None:
                tables = set(sa.inspect(conn).get_table_names())
                if tables - {VERSION_TABLE}:
                    raise LedgerError("database holds tables but is not a saltplan ledger; "
                                      "point --ledger at a new file or an empty database",
                                      file=self.where)
            elif not migrate:
                raise LedgerError(f"ledger schema '{current}' is older than '{head}'; open "
                                  "it once with write access to upgrade it", file=self.where)
            migrate_to(conn, "head")

    def schema_revision(self) -> str | None:
        from alembic.runtime.migration import MigrationContext

        with self.engine.connect() as conn:
            rev = MigrationContext.configure(
                conn, opts={"version_table": VERSION_TABLE}).get_current_revision()
            conn.rollback()
            return rev

    def _author(self, author: str | None) -> str:
        if author:
            return str(author)
        if self.author:
            return self.author
        try:
            return getpass.getuser()
        except Exception:  # pragma: no cover - no user database entry
            return "unknown"

    # ------------------------------------------------------------------ compounds
    def record_compound(self, parent, *, programme: str | None = None, name: str | None = None,
                        author: str | None = None, created: str | None = None) -> Ref:
        """Record a compound (a :class:`~saltplan.structure.Parent`, its dict, or a plan's
        ``parent`` dict). Identity: the InChIKey of the parent. An identical current entry
        is returned as is (``existing=True``); a changed name, programme or supplied form
        becomes a new version replacing the current one.

        ``programme`` defaults to the letters before the first ``-`` of the name
        (``HRN-101`` → ``HRN``), else ``unassigned``.
        """
        with self._tx() as conn:
            return self._compound(conn, plain(parent), programme, name, author, created)

    def _compound(self, conn, parent: dict, programme, name, author, created) -> Ref:
        smiles = parent.get("smiles")
        if not smiles:
            raise LedgerError("compound has no parent SMILES", file=self.where)
        name = name or parent.get("name")
        programme = programme or _programme_of(name)
        fields_ = {"name": name, "programme": programme, "parent_smiles": smiles,
                   "inchikey": _inchikey(smiles), "supplied_form": parent.get("supplied_as")}
        current = conn.execute(
            sa.select(Compound.__table__).where(Compound.inchikey == fields_["inchikey"])
            .order_by(Compound.revision.desc(), Compound.id.desc()).limit(1)).first()
        if current is not None and all(getattr(current, k) == v for k, v in fields_.items()):
            return Ref("compound", current.uid, current.revision, existing=True)
        body = {"parent": {k: parent.get(k) for k in ("smiles", "formula", "mw", "input")
                           if k in parent}}
        return self._insert(conn, Compound, "compound", body, author, created,
                            replaces=current.uid if current is not None else None,
                            revision=current.revision + 1 if current is not None else 1,
                            extra=fields_)

    # ------------------------------------------------------------------ records
    def record_plan(self, plan, *, programme: str | None = None, author: str | None = None,
                    replaces: str | None = None, created: str | None = None) -> Ref:
        """Record a plan (:class:`~saltplan.plan.Plan` or its ``to_dict()``) and its
        compound, in one transaction. An identical plan body already recorded for the
        compound is returned (``existing=True``) rather than stored twice."""
        data = plain(plan)
        with self._tx() as conn:
            return self._plan(conn, data, programme, author, replaces, created)

    def _plan(self, conn, data, programme, author, replaces, created) -> Ref:
        _need(data, ("parent", "provenance", "candidates"), "plan", self.where)
        comp = self._compound(conn, data["parent"], programme, data.get("name"), author, created)
        prov = data.get("provenance") or {}
        same = self._same_body(conn, "plan", data, prov.get("input_hash"))
        if same is not None and replaces is None:
            return same
        return self._record(conn, "plan", data, author, created, compound_uid=comp.uid,
                            parent_uid=None, replaces=replaces, hashes=prov)

    def record_screen(self, design, *, plan_uid: str | None = None,
                      programme: str | None = None, author: str | None = None,
                      replaces: str | None = None, created: str | None = None) -> Ref:
        """Record a screen design (:class:`~saltplan.screen.ScreenDesign` or its dict).
        Its plan (``design["plan"]``) is recorded too unless ``plan_uid`` names it."""
        data = plain(design)
        _need(data, ("plan", "wells"), "screen design", self.where)
        with self._tx() as conn:
            return self._screen(conn, data, plan_uid, programme, author, replaces, created)

    def _screen(self, conn, data, plan_uid, programme, author, replaces, created) -> Ref:
        if plan_uid is None:
            plan_ref = self._plan(conn, data["plan"], programme, author, None, created)
        else:
            plan_ref = self._ref(conn, plan_uid, "plan")
        plan_row = self._row(conn, plan_ref.uid)
        same = self._same_body(conn, "screen", data, None, parent_uid=plan_ref.uid)
        if same is not None and replaces is None:
            return same
        prov = data["plan"].get("provenance") or {}
        return self._record(conn, "screen", data, author, created,
                            compound_uid=plan_row.compound_uid, parent_uid=plan_ref.uid,
                            replaces=replaces, hashes=prov)

    def record_results(self, results, *, screen_uid: str | None = None, design=None,
                       programme: str | None = None, author: str | None = None,
                       replaces: str | None = None, created: str | None = None) -> Ref:
        """Record a results file (:class:`~saltplan.select.Results` or its dict) with one
        observation (version 1) per reported well, against the screen ``screen_uid`` or the
        ``design`` (recorded too when given instead). ``replaces`` names the results record
        this file revises (refused when that one already has a newer revision). The same file
        recorded again for the same screen is returned (``existing=True``), not stored twice."""
        data = plain(results)
        _need(data, ("observations",), "results", self.where)
        with self._tx() as conn:
            if screen_uid is None:
                if design is None:
                    raise LedgerError("results need the screen they belong to (screen uid or "
                                      "design)", file=self.where)
                screen_uid = self._screen(conn, plain(design), None, programme, author, None,
                                          created).uid
            screen_row = self._row(conn, self._ref(conn, screen_uid, "screen").uid)
            prov = (json.loads(screen_row.body).get("plan") or {}).get("provenance") or {}
            prov = dict(prov, input_hash="sha256:" + str(data.get("sha256") or ""))
            same = self._same_body(conn, "results", data, prov["input_hash"],
                                   parent_uid=screen_uid)
            if same is not None and replaces is None:   # the same file recorded again
                return same
            ref = self._record(conn, "results", data, author, created,
                               compound_uid=screen_row.compound_uid, parent_uid=screen_uid,
                               replaces=replaces, hashes=prov)
            who = self._author(author)
            when = created or _now()
            for obs in data["observations"]:
                self._insert(conn, Observation, "observation", obs, who, when, replaces=None,
                             revision=1, extra={"results_uid": ref.uid, "well": obs["well"],
                                                "version": 1, "outcome": obs.get("outcome")})
            refresh_chain(conn, self._row(conn, ref.uid).chain)
            return ref

    def save_observation(self, results_uid: str, well: str, observation: dict, *,
                         expected_version: int, author: str | None = None) -> Ref:
        """Save one well's observation as a new version (autosave of a workbench).

        ``expected_version`` is the version the editor started from (0 for a well not yet
        reported). When another save came first, :class:`StaleVersionError` says which
        version is current; nothing is written. The observation dict has the fields of
        :class:`saltplan.select.results.Observation`; ``well`` is set from the argument.
        Returns a Ref whose ``version`` is the new version number.
        """
        if not isinstance(observation, dict):
            raise LedgerError("observation must be a mapping of field to value",
                              file=self.where)
        obs = plain(dict(observation, well=well))
        try:
            with self._tx() as conn:
                res = self._row(conn, self._ref(conn, results_uid, "results").uid)
                current = conn.execute(
                    sa.select(Observation.__table__).where(Observation.results_uid == res.uid,
                                                 Observation.well == well)
                    .order_by(Observation.version.desc()).limit(1)).first()
                have = current.version if current is not None else 0
                if have != expected_version:
                    raise StaleVersionError(
                        f"well {well} of results {res.uid} is at version {have}, not "
                        f"{expected_version}: someone saved it meanwhile; reload the well "
                        "and apply your change again", file=self.where)
                ref = self._insert(conn, Observation, "observation", obs, author, None,
                                   replaces=current.uid if current is not None else None,
                                   revision=have + 1,
                                   extra={"results_uid": res.uid, "well": well,
                                          "version": have + 1, "outcome": obs.get("outcome")})
                refresh_chain(conn, res.chain)
                return Ref("observation", ref.uid, ref.revision, version=have + 1)
        except sa_exc.IntegrityError:
            # a concurrent save took the same version number first (PostgreSQL)
            raise StaleVersionError(
                f"well {well} of results {results_uid} was saved by someone else at the "
                "same moment; reload the well and apply your change again",
                file=self.where) from None

    def observations(self, results_uid: str) -> list[dict[str, Any]]:
        """Current observation of every well of a results record, each with its
        ``version`` (for :meth:`save_observation`), in well order."""
        with self.engine.connect() as conn:
            rows = conn.execute(
                sa.select(Observation.well, Observation.version, Observation.body)
                .where(Observation.results_uid == results_uid)
                .order_by(Observation.id)).all()
            conn.rollback()
        latest: dict[str, tuple[int, dict]] = {}
        for well, version, body in rows:
            if well not in latest or version > latest[well][0]:
                latest[well] = (version, json.loads(body))
        return [dict(b, version=v) for v, b in latest.values()]

    def find_results(self, sha256: str) -> list[str]:
        """Uids of the results records of a results file (by its SHA-256), oldest first."""
        digest = sha256.split(":", 1)[-1]
        with self.engine.connect() as conn:
            uids = list(conn.execute(sa.select(Record.uid)
                                     .where(Record.kind == "results",
                                            Record.input_hash == "sha256:" + digest)
                                     .order_by(Record.id)).scalars())
            conn.rollback()
        return uids

    def record_selection(self, selection, *, results_uid: str | None = None,
                         author: str | None = None, replaces: str | None = None,
                         created: str | None = None) -> Ref:
        """Record a selection (:class:`~saltplan.select.Selection` or its dict) made from
        the results record ``results_uid`` (default: the newest results record of the file
        named by the selection's ``provenance.results_hash``)."""
        data = plain(selection)
        _need(data, ("outcome", "provenance"), "selection", self.where)
        if results_uid is None:
            found = self.find_results(str(data["provenance"].get("results_hash") or "-"))
            if not found:
                raise LedgerError("the results file of this selection is not in the ledger; "
                                  "record the results first (saltplan ledger record results)",
                                  file=self.where)
            results_uid = found[-1]
        with self._tx() as conn:
            res = self._row(conn, self._ref(conn, results_uid, "results").uid)
            return self._record(conn, "selection", data, author, created,
                                compound_uid=res.compound_uid, parent_uid=res.uid,
                                replaces=replaces, hashes=data.get("provenance") or {})

    def record_decision(self, selection_uid: str, *, chosen: str, rationale: str,
                        author: str | None = None, replaces: str | None = None,
                        created: str | None = None) -> Ref:
        """Record a decision taken on a selection: the chosen form (e.g. ``"mesylate/A"``)
        and the reasons in words. A changed decision is a new revision (``replaces``)."""
        if not chosen or not str(chosen).strip():
            raise LedgerError("a decision needs the chosen form", file=self.where)
        with self._tx() as conn:
            sel = self._row(conn, self._ref(conn, selection_uid, "selection").uid)
            body = {"chosen": str(chosen).strip(), "rationale": str(rationale or "").strip(),
                    "selection": sel.uid}
            return self._record(conn, "decision", body, author, created,
                                compound_uid=sel.compound_uid, parent_uid=sel.uid,
                                replaces=replaces, hashes={})

    # ------------------------------------------------------------------ internals
    def _row(self, conn, uid: str) -> Record:
        row = conn.execute(sa.select(Record.__table__).where(Record.uid == uid)).first()
        if row is None:
            raise LedgerError(f"no record '{uid}' in this ledger", file=self.where)
        return row

    def _ref(self, conn, uid: str, kind: str) -> Ref:
        row = self._row(conn, uid)
        if row.kind != kind:
            raise LedgerError(f"record '{uid}' is a {row.kind}, not a {kind}", file=self.where)
        return Ref(kind, row.uid, row.revision, existing=True)

    def _same_body(self, conn, kind, data, input_hash, parent_uid=None) -> Ref | None:
        q = sa.select(Record.uid, Record.revision, Record.body).where(Record.kind == kind)
        if input_hash is not None:
            q = q.where(Record.input_hash == input_hash)
        if parent_uid is not None:
            q = q.where(Record.parent_uid == parent_uid)
        text = canonical_json(data)
        for uid, revision, body in conn.execute(q.order_by(Record.id)).all():
            if body == text:
                return Ref(kind, uid, revision, existing=True)
        return None

    def _record(self, conn, kind, data, author, created, *, compound_uid, parent_uid,
                replaces, hashes) -> Ref:
        revision = 1
        chain = None
        if replaces is not None:
            old = conn.execute(sa.select(Record.__table__).where(Record.uid == replaces)
                               .with_for_update()).first()
            if old is None:
                raise LedgerError(f"no record '{replaces}' to revise", file=self.where)
            if old.kind != kind:
                raise LedgerError(f"record '{replaces}' is a {old.kind}, not a {kind}",
                                  file=self.where)
            newer = conn.execute(sa.select(Record.uid).where(Record.replaces == replaces)
                                 .limit(1)).scalar()
            if newer is not None:
                raise StaleVersionError(f"record '{replaces}' was already revised by "
                                        f"'{newer}'; revise the newest one", file=self.where)
            revision, chain = old.revision + 1, old.chain
        extra = {"kind": kind, "compound_uid": compound_uid, "parent_uid": parent_uid,
                 "input_hash": hashes.get("input_hash") or hashes.get("plan_input_hash"),
                 "library_hash": hashes.get("library_hash"),
                 "weights_hash": hashes.get("weights_hash")}
        ref = self._insert(conn, Record, kind, data, author, created, replaces=replaces,
                           revision=revision, extra=extra, chain=chain)
        return ref

    def _insert(self, conn, model, kind, body, author, created, *, replaces, revision,
                extra, chain=None) -> Ref:
        fields_ = dict(extra, replaces=replaces, revision=revision,
                       saltplan_version=__version__, author=self._author(author),
                       created=created or _now())
        content = dict(fields_, body=body)
        checksum = sha256_of(_checksum_content(model, content))
        uid = f"{_UID_PREFIX[kind]}-{checksum.split(':', 1)[1][:24]}"
        values = dict(fields_, uid=uid, body=canonical_json(body), checksum=checksum)
        if model is Record:
            values["chain"] = chain or uid
        exists = conn.execute(sa.select(model.uid).where(model.uid == uid)).scalar()
        if exists is None:
            conn.execute(sa.insert(model).values(**values))
        return Ref(kind, uid, revision, existing=exists is not None)

    # ------------------------------------------------------------------ reading
    def show(self, uid: str) -> dict[str, Any]:
        """One record (compound, record or observation) with its envelope and body; a
        results record also lists its current observations, and every record the uids of
        its newer revisions (``replaced_by``)."""
        with self.engine.connect() as conn:
            for model in (Record, Compound, Observation):
                row = conn.execute(sa.select(model.__table__).where(model.uid == uid)).first()
                if row is not None:
                    out = _row_dict(model, row)
                    out["replaced_by"] = list(conn.execute(
                        sa.select(model.uid).where(model.replaces == uid)
                        .order_by(model.id)).scalars())
                    break
            else:
                conn.rollback()
                raise LedgerError(f"no record '{uid}' in this ledger", file=self.where)
            conn.rollback()
        if out.get("kind") == "results":
            out["current_observations"] = self.observations(uid)
        return out

    def history(self, compound: str) -> dict[str, Any]:
        """Everything recorded for a compound (name, InChIKey or compound uid): its
        versions and every plan, screen, results file, selection and decision, oldest
        first, each with uid, revision, what it replaces and what it derives from."""
        with self.engine.connect() as conn:
            comps = conn.execute(
                sa.select(Compound.__table__).where(sa.or_(Compound.name == compound,
                                                           Compound.inchikey == compound,
                                                           Compound.uid == compound))
                .order_by(Compound.id)).all()
            if not comps:
                conn.rollback()
                raise LedgerError(f"no compound '{compound}' in this ledger (give a name, "
                                  "an InChIKey or a compound uid)", file=self.where)
            keys = sorted({c.inchikey for c in comps})
            comps = conn.execute(sa.select(Compound.__table__)
                                 .where(Compound.inchikey.in_(keys))
                                 .order_by(Compound.id)).all()
            uids = [c.uid for c in comps]
            recs = conn.execute(sa.select(Record.__table__).where(Record.compound_uid.in_(uids))
                                .order_by(Record.created, Record.id)).all()
            replaced = {r.replaces for r in recs if r.replaces}
            conn.rollback()
        head = comps[-1]
        return {
            "compound": {"name": head.name, "programme": head.programme,
                         "inchikey": head.inchikey, "parent_smiles": head.parent_smiles,
                         "supplied_form": head.supplied_form},
            "versions": [{"uid": c.uid, "revision": c.revision, "name": c.name,
                          "programme": c.programme, "created": c.created,
                          "author": c.author} for c in comps],
            "records": [{"uid": r.uid, "kind": r.kind, "revision": r.revision,
                         "replaces": r.replaces, "derived_from": r.parent_uid,
                         "current": r.uid not in replaced, "created": r.created,
                         "author": r.author, "summary": _summary(r)} for r in recs],
        }

    def outcomes(self, counterion: str, site_class: str | None = None,
                 pka_min: float | None = None, pka_max: float | None = None) -> Outcomes:
        """How many screens tried ``counterion`` on API sites of ``site_class`` (catalogue
        id such as ``amine_tertiary``; None = any) with pKa in [``pka_min``, ``pka_max``],
        and how many of them gave a crystalline salt of the intended stoichiometry, per
        programme. Uses the current revision of each results file."""
        f = OutcomeFact
        conds = [f.counterion == counterion]
        if site_class:
            conds.append(f.site_class == site_class)
        if pka_min is not None:
            conds.append(f.site_pka >= float(pka_min))
        if pka_max is not None:
            conds.append(f.site_pka <= float(pka_max))
        q = (sa.select(f.programme, f.results_chain, sa.func.max(sa.case((f.success, 1),
                                                                          else_=0)),
                       sa.func.min(f.compound))
             .where(*conds).group_by(f.programme, f.results_chain))
        with self.engine.connect() as conn:
            rows = conn.execute(q).all()
            conn.rollback()
        per: dict[str, list] = {}
        for prog, _chain, ok, comp in rows:
            entry = per.setdefault(prog, [0, 0, set()])
            entry[0] += 1
            entry[1] += int(ok or 0)
            if comp:
                entry[2].add(comp)
        out = tuple(OutcomeRow(p, v[0], v[1], tuple(sorted(v[2]))) for p, v in sorted(per.items()))
        return Outcomes(counterion, site_class, pka_min, pka_max, out)

    def inhouse_evidence(self) -> InhouseEvidence:
        """The whole outcome index as an in-memory snapshot for the ranking."""
        f = OutcomeFact
        with self.engine.connect() as conn:
            rows = conn.execute(sa.select(f.counterion, f.site_class, f.site_pka, f.success,
                                          f.programme, f.results_chain)
                                .order_by(f.results_chain, f.counterion, f.stoichiometry)).all()
            conn.rollback()
        return InhouseEvidence(tuple((r[0], r[1], float(r[2]), bool(r[3]), r[4], r[5])
                                     for r in rows), source=self.where)

    def counts(self) -> dict[str, int]:
        """Rows per kind (compounds, each record kind, observations)."""
        with self.engine.connect() as conn:
            out = {"compound": conn.execute(sa.select(sa.func.count()).select_from(Compound)).scalar()}
            for kind, n in conn.execute(sa.select(Record.kind, sa.func.count())
                                        .group_by(Record.kind).order_by(Record.kind)).all():
                out[kind] = n
            out["observation"] = conn.execute(
                sa.select(sa.func.count()).select_from(Observation)).scalar()
            conn.rollback()
        return {k: int(v or 0) for k, v in out.items()}

    # ------------------------------------------------------------------ integrity
    def verify(self) -> VerifyReport:
        """Recompute every row's checksum; list the rows whose stored checksum differs
        (edited outside saltplan, or damaged)."""
        bad = []
        checked = 0
        with self.engine.connect() as conn:
            for model, table in ((Compound, "compounds"), (Record, "records"),
                                 (Observation, "observations")):
                for row in conn.execute(sa.select(model.__table__).order_by(model.id)):
                    checked += 1
                    try:
                        content = _content_of(model, row)
                        computed = sha256_of(_checksum_content(model, content))
                    except (ValueError, TypeError):
                        computed = "unreadable body"
                    if computed != row.checksum:
                        bad.append(Mismatch(table, row.uid, row.checksum, computed))
            conn.rollback()
        return VerifyReport(checked, tuple(bad))

    def rebuild_index(self) -> int:
        """Rebuild the outcome index from the records (it is derived data)."""
        from .facts import rebuild_facts

        with self._tx() as conn:
            return rebuild_facts(conn)

    # ------------------------------------------------------------------ exchange
    def export_jsonl(self, out: str | os.PathLike | IO[str]) -> int:
        """Write every row as JSON Lines (compounds, records, observations, each in the
        order recorded); returns the number of lines. The output is the exchange format
        of :meth:`import_jsonl`."""
        def lines() -> Iterator[str]:
            with self.engine.connect() as conn:
                for model, table in ((Compound, "compound"), (Record, "record"),
                                     (Observation, "observation")):
                    for row in conn.execute(sa.select(model.__table__).order_by(model.id)):
                        yield canonical_json(dict(_row_dict(model, row), table=table)) + "\n"
                conn.rollback()

        if hasattr(out, "write"):
            n = 0
            for line in lines():
                out.write(line)
                n += 1
            return n
        from .._io import write_text_atomic

        text = "".join(lines())
        write_text_atomic(Path(out), text)
        return text.count("\n")

    def import_jsonl(self, source: str | os.PathLike | IO[str]) -> dict[str, int]:
        """Merge an export into this ledger in one transaction: rows already present (same
        uid) are skipped, so importing twice adds nothing. Every line's checksum is
        checked first; a bad line refuses the whole file (nothing imported). Returns
        ``{"added": n, "skipped": m}``."""
        name = getattr(source, "name", None) or str(source)
        if hasattr(source, "read"):
            text = source.read()
        else:
            try:
                text = Path(source).read_text(encoding="utf-8")
            except (OSError, UnicodeDecodeError) as exc:
                raise LedgerError(f"cannot read the export ({exc})", file=name) from None
        models: dict[str, Any] = {"compound": Compound, "record": Record,
                                  "observation": Observation}
        rows = []
        for n, line in enumerate(text.splitlines(), start=1):
            if not line.strip():
                continue
            try:
                data = json.loads(line)
                model = models[data.pop("table")]
                content = {k: data[k] for k in _FIELDS[model]}
                content["body"] = data["body"]
            except (ValueError, KeyError, TypeError, AttributeError):
                raise LedgerError("not a saltplan ledger export line", file=name,
                                  row=n) from None
            computed = sha256_of(_checksum_content(model, content))
            if computed != data.get("checksum") or not str(data.get("uid", "")).endswith(
                    computed.split(":", 1)[1][:24]):
                raise LedgerError("checksum does not match the line's content (edited or "
                                  "damaged); nothing imported", file=name, row=n)
            rows.append((n, model, data))
        added = skipped = 0
        chains = set()
        with self._tx() as conn:
            for n, model, data in rows:
                if conn.execute(sa.select(model.uid).where(model.uid == data["uid"])).scalar():
                    skipped += 1
                    continue
                values = {k: data[k] for k in _FIELDS[model]}
                values.update(uid=data["uid"], checksum=data["checksum"],
                              body=canonical_json(data["body"]))
                if model is Record:
                    values["chain"] = self._chain_of(conn, data)
                    if data["kind"] == "results":
                        chains.add(values["chain"])
                if model is Observation:
                    res = conn.execute(sa.select(Record.chain)
                                       .where(Record.uid == data["results_uid"])).scalar()
                    if res is not None:
                        chains.add(res)
                try:
                    with conn.begin_nested():
                        conn.execute(sa.insert(model).values(**values))
                except sa_exc.IntegrityError:
                    raise LedgerError(f"well {data.get('well')} version {data.get('version')} "
                                      "was edited differently in both ledgers; nothing "
                                      "imported (resolve the well in one ledger first)",
                                      file=name, row=n) from None
                added += 1
            for chain in sorted(chains):
                refresh_chain(conn, chain)
        return {"added": added, "skipped": skipped}

    def _chain_of(self, conn, data) -> str:
        if not data.get("replaces"):
            return data["uid"]
        chain = conn.execute(sa.select(Record.chain)
                             .where(Record.uid == data["replaces"])).scalar()
        return chain or data.get("chain") or data["uid"]


class _Tx:
    """``with ledger._tx() as conn``: one transaction; database errors → LedgerError."""

    def __init__(self, ledger: Ledger):
        self.ledger = ledger
        self.ctx: Any = None

    def __enter__(self):
        try:
            self.ctx = self.ledger.engine.begin()
            return self.ctx.__enter__()
        except sa_exc.DBAPIError as exc:
            raise _translate(exc, self.ledger.where) from None

    def __exit__(self, et, ev, tb):
        try:
            result = self.ctx.__exit__(et, ev, tb)
        except sa_exc.IntegrityError:
            raise
        except sa_exc.DBAPIError as exc:
            raise _translate(exc, self.ledger.where) from None
        if isinstance(ev, sa_exc.DBAPIError) and not isinstance(ev, sa_exc.IntegrityError):
            raise _translate(ev, self.ledger.where) from None
        return result


# --------------------------------------------------------------------------- helpers
def _text_table(rows: list[list[Any]], headers: list[str]) -> str:
    """Fixed-width plain-text table (the CLI's layout)."""
    cells = [headers] + [[str(c) for c in r] for r in rows]
    widths = [max(len(r[i]) for r in cells) for i in range(len(headers))]
    lines = ["  ".join(c.ljust(w) for c, w in zip(r, widths, strict=True)).rstrip()
             for r in cells]
    lines.insert(1, "  ".join("-" * w for w in widths))
    return "\n".join(lines)


_COMMON = ("replaces", "revision", "saltplan_version", "author", "created")
_FIELDS = {
    Compound: ("name", "programme", "parent_smiles", "inchikey", "supplied_form") + _COMMON,
    Record: ("kind", "compound_uid", "parent_uid", "input_hash", "library_hash",
             "weights_hash") + _COMMON,
    Observation: ("results_uid", "well", "version", "outcome") + _COMMON,
}


def _checksum_content(model, content: dict) -> dict:
    return {k: content.get(k) for k in _FIELDS[model] + ("body",)}


def _content_of(model, row) -> dict:
    out = {k: getattr(row, k) for k in _FIELDS[model]}
    out["body"] = json.loads(row.body)
    return out


def _row_dict(model, row) -> dict[str, Any]:
    out = {"uid": row.uid}
    out.update({k: getattr(row, k) for k in _FIELDS[model]})
    if model is Record:
        out["chain"] = row.chain
    out["checksum"] = row.checksum
    out["body"] = json.loads(row.body)
    return out


def _summary(r) -> str:
    body = json.loads(r.body)
    if r.kind == "plan":
        top = [f"{c['counterion']} {c['stoichiometry']}" for c in body.get("candidates", [])[:3]]
        return f"verdict {body.get('verdict', {}).get('code')}; top {', '.join(top) or 'none'}"
    if r.kind == "screen":
        t = body.get("totals") or {}
        return f"{t.get('wells', len(body.get('wells', [])))} wells, {t.get('api_mg', '?')} mg API"
    if r.kind == "results":
        return (f"{body.get('file')}: {len(body.get('observations', []))} wells reported"
                + (" (INVENTED DATA)" if body.get("invented") else ""))
    if r.kind == "selection":
        return f"{body.get('outcome')}: {body.get('summary', '')}"[:160]
    if r.kind == "decision":
        return f"chosen {body.get('chosen')}"
    return ""


def _need(data, keys, what, where) -> None:
    if not isinstance(data, dict) or any(k not in data for k in keys):
        raise LedgerError(f"not a {what} (expected the fields {', '.join(keys)})", file=where)


def _programme_of(name: str | None) -> str:
    m = re.match(r"^([A-Za-z]{2,10})-", name or "")
    return m.group(1).upper() if m else "unassigned"


def _inchikey(smiles: str) -> str:
    from rdkit import Chem, RDLogger

    RDLogger.DisableLog("rdApp.*")  # type: ignore[attr-defined]
    try:
        mol = Chem.MolFromSmiles(smiles)
        key = Chem.MolToInchiKey(mol) if mol is not None else ""
    finally:
        RDLogger.EnableLog("rdApp.*")  # type: ignore[attr-defined]
    return key or "unknown"


def _now() -> str:
    from .._provenance import now_iso

    return now_iso()
