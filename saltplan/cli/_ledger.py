"""``--ledger``/``--record``/``--no-learn``/``--author`` of the planning commands, and
opening the ledger for a command.

A ledger is *in use* by ``plan``, ``screen``, ``select`` and ``batch`` when ``--ledger URL``
or ``--record`` is given or ``SALTPLAN_LEDGER`` is set. Then the ranking learns from its
screens (``plan``, ``screen``, ``batch``) unless ``--no-learn``, and ``--record`` stores the
result. Without a ledger nothing is opened and the output is exactly what it was before the
ledger existed.
"""
from __future__ import annotations

import os

import click


def ledger_url_option(func):
    return click.option(
        "--ledger", "ledger_url", metavar="URL|FILE", default=None,
        help="Ledger: a SQLite file, sqlite:///FILE or postgresql+psycopg://USER@HOST/DB "
             "(password from ~/.pgpass or PGPASSWORD) [default: $SALTPLAN_LEDGER, else the "
             "per-user file].")(func)


def author_option(func):
    return click.option("--author", default=None,
                        help="Author of the records [default: the operating-system user].")(func)


def ledger_options(func, *, learn: bool = True):
    """``--ledger``, ``--record``, ``--author`` and (``learn``) ``--no-learn``."""
    func = author_option(func)
    if learn:
        func = click.option("--no-learn", is_flag=True,
                            help="Rank with the published prior only, even with a "
                                 "ledger.")(func)
    func = click.option("--record", is_flag=True,
                        help="Record the result in the ledger.")(func)
    return ledger_url_option(func)


def in_use(ledger_url, record: bool) -> bool:
    from ..ledger import ENV_VAR

    return bool(ledger_url or record or (os.environ.get(ENV_VAR) or "").strip())


def open_cli_ledger(ledger_url, *, create: bool = True, author: str | None = None):
    from ..ledger import open_ledger

    return open_ledger(ledger_url, create=create, author=author)


def _missing_sqlite(ledger_url) -> str | None:
    """The file of a SQLite ledger that does not exist yet, else None."""
    from sqlalchemy.engine import make_url

    from ..ledger import resolve_url

    try:
        url = make_url(resolve_url(ledger_url))
    except Exception:   # let open_ledger say what is wrong with it
        return None
    if url.get_backend_name() != "sqlite" or not url.database or url.database == ":memory:":
        return None
    from pathlib import Path

    return None if Path(url.database).exists() else url.database


class CommandLedger:
    """The ledger of one planning command: opened when in use, its in-house evidence
    (None with ``--no-learn`` or no ledger), ``record(fn)`` when ``--record``."""

    def __init__(self, ledger_url, record: bool, no_learn: bool = False,
                 author: str | None = None):
        self.led = None
        self.inhouse = None
        self.recording = record
        if not in_use(ledger_url, record):
            return
        missing = None if record else _missing_sqlite(ledger_url)
        if missing is not None:
            if not no_learn:
                click.echo(f"note: no ledger at {missing} yet; ranked with the published "
                           "prior only", err=True)
            return
        self.led = open_cli_ledger(ledger_url, author=author)
        if not no_learn:
            self.inhouse = self.led.inhouse_evidence()

    def record(self, fn, *args, **kwargs):
        """``fn(ledger, ...)`` when recording; says what was stored on stderr."""
        if not self.recording or self.led is None:
            return None
        ref = fn(self.led, *args, **kwargs)
        say_recorded(ref, self.led.where)
        return ref

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        if self.led is not None:
            self.led.close()


def say_recorded(ref, where: str, err: bool = True) -> None:
    what = "already in" if ref.existing else "recorded in"
    click.echo(f"{ref.kind} {ref.uid} (revision {ref.revision}) {what} {where}", err=err)
