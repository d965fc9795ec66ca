"""Counterion library: schema, validation, loading, merging of user libraries, content hash.

The built-in library is the top-level ``counterions/`` folder (one YAML file per family),
shipped in the wheel as ``saltplan/_counterions`` and found with
:func:`saltplan._data.counterion_dir`. Users add or override entries with their own YAML
files (``--library PATH``); every plan records the merged library's :attr:`Library.hash`.
The schema (every field, allowed values, flags) is documented in ``counterions/README.md``.

Molecular weights are never typed: they are computed with RDKit
(``Descriptors.MolWt``, IUPAC average atomic masses) from the SMILES at load time.
"""
from __future__ import annotations

import difflib
import functools
import json
from collections.abc import Sequence
from dataclasses import dataclass, fields
from pathlib import Path
from typing import Any

from .._data import counterion_dir, load_yaml_path, sha256_text
from ..errors import CounterionLibraryError
from ._counterion_schema import FLAGS, validate_entry, validate_file

__all__ = ["FLAGS", "Counterion", "Library", "LibraryCheck", "load_counterions",
           "check_counterions"]

#: label prefix of files from the built-in library (paths differ between installs)
BUILTIN_LABEL = "built-in"


@dataclass(frozen=True)
class Counterion:
    """One counterion: an acid for salts of basic drugs or a base for salts of acidic drugs.

    Attributes
    ----------
    id : str
        USAN/INN salt-name stem in lower case (``"mesylate"``, ``"sodium"``).
    smiles : str
        The neutral acid or base as supplied; metal hydroxides as ion pairs
        (``"[Ca+2].[OH-].[OH-]"``).
    role : str
        ``"acid"`` (forms salts with basic drugs) or ``"base"`` (with acidic drugs).
    pka : tuple of float
        Every aqueous pKa, ascending; for bases the pKa of the conjugate acid(s).
    pka_sources : tuple of str
        One source per value (edition, table; "from memory" where so).
    pka_for_salt : float
        The pKa the ΔpKa rule compares with the drug's (see ``counterions/README.md``).
    mw : float
        Molecular weight of the whole SMILES [g/mol], RDKit ``Descriptors.MolWt``.
    ion_mw : float
        Mass of the counterion ion in the salt after ``n_protons`` transfers [g/mol]:
        acid minus the protons, amine plus the protons, metal/quaternary cation without
        its hydroxide.
    cation_mw : float or None
        For hydroxide-supplied bases (metals, choline): mass of the cation(s) [g/mol].
    charge : int
        Charge of that ion: ``-n_protons`` for acids, ``+n_protons`` for bases.
    n_protons : int
        Acids: protons that can transfer to a drug; bases: protons accepted.
    density_g_ml : float or None
        Density of the liquid or supplied solution [g/mL] (liquids and solutions only).
    solution_w_w : float or None
        Content of a supplied solution [% w/w] (``37`` for concentrated HCl).
    """

    id: str
    name: str
    family: str
    smiles: str
    formula: str
    role: str
    pka: tuple[float, ...]
    pka_sources: tuple[str, ...]
    pka_for_salt: float
    pka_note: str | None
    n_protons: int
    charge: int
    mw: float
    ion_mw: float
    cation_mw: float | None
    form: str
    density_g_ml: float | None
    density_source: str | None
    solution_w_w: float | None
    tier: int
    tier_source: str
    stoichiometries: tuple[str, ...]
    hygroscopicity: str
    hygroscopicity_source: str
    liabilities: tuple[str, ...]
    flags: tuple[str, ...]
    exposure_note: str | None
    references: tuple[str, ...]
    notes: str | None
    source: str

    def has_flag(self, flag: str) -> bool:
        if flag not in FLAGS:
            raise CounterionLibraryError(f"unknown flag '{flag}'", entry=self.id, field="flags")
        return flag in self.flags

    def to_dict(self) -> dict[str, Any]:
        out: dict[str, Any] = {}
        for f in fields(self):
            value = getattr(self, f.name)
            if isinstance(value, tuple):
                value = list(value)
            out[f.name] = value
        out["pka"] = [round(v, 2) for v in self.pka]
        out["pka_for_salt"] = round(self.pka_for_salt, 2)
        for key in ("mw", "ion_mw", "cation_mw"):
            if out[key] is not None:
                out[key] = round(out[key], 3)
        return out


@dataclass(frozen=True)
class Override:
    """A user library entry that replaced an earlier entry with the same id."""

    id: str
    replaced: str   # source label of the replaced entry
    by: str         # source label of the new entry

    def to_dict(self) -> dict[str, str]:
        return {"id": self.id, "replaced": self.replaced, "by": self.by}


class Library(Sequence):
    """The merged counterion library: a sequence of :class:`Counterion` ordered by id.

    Attributes
    ----------
    hash : str
        ``"sha256:<hex>"`` of the canonical content (sorted keys, entries by id) of every
        merged entry: stable across runs, file order and key order; changes with any value.
    sources : tuple of str
        Files merged, in order (built-in files as ``"built-in/<name>.yaml"``).
    overrides : tuple of Override
        Entries replaced by user libraries.
    """

    def __init__(self, entries: Sequence[Counterion], hash: str, sources: Sequence[str],
                 overrides: Sequence[Override] = ()):
        self._entries = tuple(sorted(entries, key=lambda c: c.id))
        self._by_id = {c.id: c for c in self._entries}
        self.hash = hash
        self.sources = tuple(sources)
        self.overrides = tuple(overrides)

    def __getitem__(self, index):
        return self._entries[index]

    def __len__(self) -> int:
        return len(self._entries)

    def __repr__(self) -> str:
        return f"<Library {len(self)} counterions, {self.hash[:19]}>"

    @property
    def ids(self) -> tuple[str, ...]:
        return tuple(self._by_id)

    def __contains__(self, item) -> bool:
        if isinstance(item, str):
            return item in self._by_id
        return item in self._entries

    def get(self, id: str) -> Counterion:
        """The entry with this id; unknown ids raise with a "did you mean" suggestion."""
        try:
            return self._by_id[id]
        except KeyError:
            pass
        key = str(id).strip().lower()
        if key in self._by_id:
            return self._by_id[key]
        close = difflib.get_close_matches(key, self._by_id, n=3, cutoff=0.6)
        hint = f"; did you mean {', '.join(repr(c) for c in close)}?" if close else \
            "; run `saltplan library list` for the ids"
        raise CounterionLibraryError(f"unknown counterion '{id}'{hint}", entry=str(id))

    def by_role(self, role: str) -> tuple[Counterion, ...]:
        """Entries with ``role`` (``"acid"`` or ``"base"``), ordered by id."""
        if role not in ("acid", "base"):
            raise CounterionLibraryError(f"role must be 'acid' or 'base', got {role!r}",
                                         field="role")
        return tuple(c for c in self._entries if c.role == role)

    def to_dict(self) -> dict[str, Any]:
        return {"hash": self.hash, "sources": list(self.sources),
                "overrides": [o.to_dict() for o in self.overrides],
                "counterions": [c.to_dict() for c in self._entries]}


@dataclass(frozen=True)
class LibraryCheck:
    """Result of ``saltplan library check``: what was validated and the merged hash."""

    files: tuple[str, ...]
    entries: int
    acids: int
    bases: int
    hash: str
    overrides: tuple[Override, ...]

    def to_dict(self) -> dict[str, Any]:
        return {"ok": True, "files": list(self.files), "entries": self.entries,
                "acids": self.acids, "bases": self.bases, "hash": self.hash,
                "overrides": [o.to_dict() for o in self.overrides]}


# --------------------------------------------------------------------------- loading
def _builtin_files() -> list[Path]:
    folder = counterion_dir()
    return sorted(p for p in folder.glob("*.yaml") if p.is_file())


def _user_files(paths) -> list[tuple[Path, str]]:
    if isinstance(paths, (str, Path)):
        paths = [paths]
    out: list[tuple[Path, str]] = []
    for raw in paths:
        path = Path(raw)
        if path.is_dir():
            found = sorted(p for p in path.glob("*.yaml") if p.is_file())
            if not found:
                raise CounterionLibraryError("folder holds no *.yaml library file",
                                             file=str(path))
            out.extend((p, str(p)) for p in found)
        else:
            out.append((path, str(path)))
    return out


def _stamp(path: Path) -> tuple[int, int]:
    try:
        st = path.stat()
    except OSError:
        return (-1, -1)  # missing: the loader raises a proper error
    return (st.st_mtime_ns, st.st_size)


def load_counterions(paths: str | Path | Sequence[str | Path] | None = None) -> Library:
    """Load the built-in counterion library, then merge user libraries in order.

    Parameters
    ----------
    paths : str, Path or sequence of them, optional
        User library YAML files (or folders of them). Each adds entries or overrides
        earlier entries with the same id. Within one file, and between built-in files,
        a repeated id is an error.

    Returns
    -------
    Library
        Cached per set of files and their modification times.

    Raises
    ------
    CounterionLibraryError
        Naming the file, entry and field of the first problem found.
    """
    builtin = [(p, f"{BUILTIN_LABEL}/{p.name}", False) for p in _builtin_files()]
    user = [(p, label, True) for p, label in _user_files(paths or ())]
    key = tuple((str(p.resolve()) if p.exists() else str(p), label, is_user, *_stamp(p))
                for p, label, is_user in builtin + user)
    return _load_cached(key)


@functools.lru_cache(maxsize=32)
def _load_cached(key) -> Library:
    return build_library([(Path(path), label, is_user) for path, label, is_user, *_ in key])


def build_library(files: Sequence[tuple[Path, str, bool]]) -> Library:
    """Validate and merge ``(path, label, is_user)`` files into a :class:`Library`.

    Use :func:`load_counterions`; this uncached entry point exists for tests and tools
    that assemble their own set of "built-in" files.
    """
    entries: dict[str, tuple[Counterion, dict]] = {}
    overrides: list[Override] = []
    for path, label, is_user in files:
        family, parsed = _parse_file(str(path), *_stamp(path))
        seen_here: set[str] = set()
        for values, canonical in parsed:
            cid = values["id"]
            if cid in seen_here:
                raise CounterionLibraryError(f"duplicate id '{cid}' (already defined above "
                                             "in this file)", file=str(path), entry=cid,
                                             field="id")
            seen_here.add(cid)
            if cid in entries:
                previous = entries[cid][0].source
                if not is_user:
                    raise CounterionLibraryError(
                        f"duplicate id '{cid}' (also defined in {previous}); only a user "
                        "library (--library) may override an entry", file=str(path),
                        entry=cid, field="id")
                overrides.append(Override(cid, previous, label))
            entries[cid] = (Counterion(family=family, source=label, **values), dict(canonical))
    if not entries:
        raise CounterionLibraryError("the counterion library is empty")
    canonical_all = [entries[cid][1] for cid in sorted(entries)]
    digest = sha256_text(json.dumps(canonical_all, sort_keys=True, ensure_ascii=False,
                                    separators=(",", ":")))
    return Library([c for c, _ in entries.values()], hash=f"sha256:{digest}",
                   sources=[label for _, label, _ in files], overrides=overrides)


@functools.lru_cache(maxsize=256)
def _parse_file(path: str, _mtime_ns: int, _size: int) -> tuple[str, tuple]:
    """Validate one file (cached per path and modification stamp): (family, entries)."""
    data = load_yaml_path(path, error=CounterionLibraryError)
    family, raw_entries = validate_file(data, path)
    return family, tuple(validate_entry(raw, file=path, index=i)
                         for i, raw in enumerate(raw_entries))


def check_counterions(paths=None) -> LibraryCheck:
    """Validate the built-in library merged with ``paths`` (user libraries); report it.

    Raises :class:`CounterionLibraryError` for the first problem (file, entry, field).
    """
    lib = load_counterions(paths)
    return LibraryCheck(files=lib.sources, entries=len(lib), acids=len(lib.by_role("acid")),
                        bases=len(lib.by_role("base")), hash=lib.hash,
                        overrides=lib.overrides)
