"""Access to the data files shipped with the package.

Everything is read lazily with :mod:`importlib.resources` and cached; importing
``saltplan`` parses no YAML. The top-level ``counterions/`` folder of the checkout is
shipped inside the wheel as ``saltplan/_counterions`` (see ``pyproject.toml``); in an
editable checkout it is read from the repository root.
"""
from __future__ import annotations

import functools
import hashlib
from importlib.resources import files
from pathlib import Path
from typing import Any

import yaml

from .errors import ParameterError


def package_file(*parts: str):
    """A Traversable for a file inside the installed package (``saltplan/<parts>``)."""
    node = files("saltplan")
    for part in parts:
        node = node.joinpath(part)
    return node


def counterion_dir() -> Path:
    """Folder holding the built-in counterion library (wheel or checkout)."""
    shipped = package_file("_counterions")
    if shipped.is_dir():
        return Path(str(shipped))
    checkout = Path(__file__).resolve().parent.parent / "counterions"
    if checkout.is_dir():
        return checkout
    raise ParameterError("built-in counterion library not found (neither saltplan/_counterions "
                         "in the installed package nor counterions/ in the checkout)")


_SafeBase = getattr(yaml, "CSafeLoader", yaml.SafeLoader)  # libyaml when available (faster)


class _UniqueKeyLoader(_SafeBase):
    """Safe loader that refuses duplicate mapping keys (a silent overwrite hides errors)."""


def _construct_mapping(loader, node, deep=False):
    seen = set()
    for key_node, _ in node.value:
        key = loader.construct_object(key_node, deep=deep)
        if key in seen:
            raise yaml.constructor.ConstructorError(
                None, None, f"duplicate key '{key}'", key_node.start_mark)
        seen.add(key)
    return loader.construct_mapping(node, deep=deep)


_UniqueKeyLoader.add_constructor(
    yaml.resolver.BaseResolver.DEFAULT_MAPPING_TAG, _construct_mapping)


def load_yaml_text(text: str, origin: str, error=ParameterError) -> Any:
    """Parse YAML safely (no object construction), refusing duplicate keys.

    Errors come back as ``error`` (a SaltplanError subclass) naming ``origin`` and the line.
    """
    try:
        return yaml.load(text, Loader=_UniqueKeyLoader)  # noqa: S506 - SafeLoader subclass
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        where = f" (line {mark.line + 1})" if mark is not None else ""
        problem = getattr(exc, "problem", None) or str(exc).splitlines()[0]
        raise error(f"not valid YAML{where}: {problem}", file=origin) from None


def load_yaml_path(path: str | Path, error=ParameterError) -> Any:
    path = Path(path)
    if not path.exists():
        raise error("file not found", file=str(path))
    if path.is_dir():
        raise error("is a directory, expected a YAML file", file=str(path))
    try:
        text = path.read_text(encoding="utf-8-sig")
    except UnicodeDecodeError as exc:
        raise error(f"not UTF-8 text (byte {exc.start})", file=str(path)) from None
    return load_yaml_text(text, str(path), error)


@functools.lru_cache(maxsize=None)
def package_yaml(*parts: str) -> Any:
    """Parse a YAML file shipped inside the package (cached)."""
    node = package_file(*parts)
    return load_yaml_text(node.read_text(encoding="utf-8"), "/".join(("saltplan",) + parts))


def sha256_text(*chunks: str) -> str:
    h = hashlib.sha256()
    for chunk in chunks:
        h.update(chunk.encode("utf-8"))
        h.update(b"\0")
    return h.hexdigest()
