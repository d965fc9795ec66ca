"""Where the ledger lives: argument, then ``SALTPLAN_LEDGER``, then a per-user file.

The per-user default is ``<user data dir>/saltplan/ledger.sqlite`` with the user data dir

* Linux and other POSIX: ``$XDG_DATA_HOME`` or ``~/.local/share`` (XDG Base Directory
  Specification);
* macOS: ``~/Library/Application Support``;
* Windows: ``%LOCALAPPDATA%``.

(A few lines of our own rather than a dependency: only this one folder is needed.)
A value without ``://`` is a file path (SQLite); ``postgresql://`` and
``postgresql+psycopg://`` URLs select PostgreSQL through psycopg 3.
"""
from __future__ import annotations

import os
import sys
from pathlib import Path

#: environment variable naming the ledger (a URL or a file path)
ENV_VAR = "SALTPLAN_LEDGER"


def user_data_dir() -> Path:
    if sys.platform == "win32":  # pragma: no cover - not the CI platform
        base = os.environ.get("LOCALAPPDATA") or str(Path.home() / "AppData" / "Local")
    elif sys.platform == "darwin":  # pragma: no cover
        base = str(Path.home() / "Library" / "Application Support")
    else:
        base = os.environ.get("XDG_DATA_HOME") or str(Path.home() / ".local" / "share")
    return Path(base) / "saltplan"


def default_path() -> Path:
    """The per-user default ledger file."""
    return user_data_dir() / "ledger.sqlite"


def resolve_url(url: str | os.PathLike | None = None) -> str:
    """The SQLAlchemy URL of the ledger: ``url``, else ``$SALTPLAN_LEDGER``, else the
    per-user file. File paths become ``sqlite:///<absolute path>``; ``postgresql://``
    becomes ``postgresql+psycopg://``."""
    text = os.fspath(url) if url is not None else (os.environ.get(ENV_VAR) or "").strip()
    if not text:
        text = str(default_path())
    if "://" not in text:
        return "sqlite:///" + str(Path(text).expanduser().resolve())
    if text.startswith("postgresql://") or text.startswith("postgres://"):
        text = "postgresql+psycopg://" + text.split("://", 1)[1]
    return text
