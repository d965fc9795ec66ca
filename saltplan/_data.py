"""Access to the data files shipped with the package.

Everything is read lazily with :mod:`importlib.resources` and cached; importing
``saltplan`` parses no YAML. The top-level ``counterions/`` folder of the checkout is
shipped inside the wheel as ``saltplan/_counterions`` (see ``pyproject.toml``); in an
editable checkout it is read from the repository root.
"""
from __future__ import annotations

import functools
import hashlib
import re
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


#: a YAML document expanding to more nodes than this (aliases counted each time they are
#: used) is refused: an "alias bomb" of nine nested aliases expands to 10^8 strings.
MAX_YAML_NODES = 1_000_000


def _expanded_size(root) -> int | None:
    """Nodes of a composed YAML graph with aliases expanded (memoized, linear time).

    None for a recursive document (an alias inside its own anchor), which no data file needs.
    """
    sizes: dict[int, int] = {}
    open_nodes: set[int] = set()
    stack = [(root, False)]
    while stack:
        node, children_done = stack.pop()
        key = id(node)
        if key in sizes:
            continue
        if isinstance(node, yaml.MappingNode):
            kids = [n for pair in node.value for n in pair]
        elif isinstance(node, yaml.SequenceNode):
            kids = list(node.value)
        else:
            sizes[key] = 1
            continue
        if children_done:
            open_nodes.discard(key)
            sizes[key] = 1 + sum(sizes[id(k)] for k in kids)
            if sizes[key] > MAX_YAML_NODES:
                return sizes[key]
            continue
        if key in open_nodes:
            return None
        open_nodes.add(key)
        stack.append((node, True))
        for kid in kids:
            if id(kid) in open_nodes:
                return None
            if id(kid) not in sizes:
                stack.append((kid, False))
    return sizes[id(root)]


#: deeper flow nesting (``[[[...]]]``) than this is refused before parsing: libyaml's
#: composer recurses in C and a 10^5-deep document crashes the interpreter.
MAX_YAML_DEPTH = 100
_QUOTED_OR_COMMENT = re.compile(r'"(?:[^"\\\n]|\\.)*"|\'[^\'\n]*\'|#[^\n]*')
_BRACKETS = re.compile(r"[\[\]{}]")
_LEADING_DASHES = re.compile(r"(?:-[ \t]+)*")


def _flow_depth(text: str) -> int:
    """Deepest nesting of flow brackets outside quoted strings and comments."""
    depth = deepest = 0
    for match in _BRACKETS.finditer(_QUOTED_OR_COMMENT.sub("", text)):
        if match.group() in "[{":
            depth += 1
            deepest = max(deepest, depth)
        else:
            depth = max(depth - 1, 0)
    return deepest


def _block_depth(text: str) -> int:
    """Deepest nesting of block collections, read from indentation and leading dashes.

    Checked before parsing so that the refusal is saltplan's own, whichever PyYAML version
    (6.0.4 and later refuse deep block nesting themselves, earlier ones recurse) would react.
    """
    indents: list[int] = []
    deepest = 0
    for line in text.splitlines():
        stripped = line.lstrip(" ")
        if not stripped or stripped.startswith("#"):
            continue
        indent = len(line) - len(stripped)
        while indents and indents[-1] > indent:
            indents.pop()
        if not indents or indents[-1] < indent:
            indents.append(indent)
        dashes = _LEADING_DASHES.match(stripped).group().count("-")   # "- - x": nested lists
        deepest = max(deepest, len(indents) + dashes)
    return deepest


def load_yaml_text(text: str, origin: str, error=ParameterError) -> Any:
    """Parse YAML safely (no object construction), refusing duplicate keys.

    Tags that construct Python objects (``!!python/object/apply:...``) are refused by the
    safe loader; documents whose aliases expand beyond :data:`MAX_YAML_NODES` nodes are
    refused before construction. Errors come back as ``error`` (a SaltplanError subclass)
    naming ``origin`` and the line.
    """
    if _flow_depth(text) > MAX_YAML_DEPTH or _block_depth(text) > MAX_YAML_DEPTH:
        raise error(f"YAML nested deeper than {MAX_YAML_DEPTH} levels; refused", file=origin)
    loader = _UniqueKeyLoader(text)
    try:
        node = loader.get_single_node()
        if node is None:
            return None
        size = _expanded_size(node)
        if size is None:
            raise error("recursive YAML alias (an alias inside its own anchor); refused",
                        file=origin)
        if size > MAX_YAML_NODES:
            raise error(f"YAML aliases expand to more than {MAX_YAML_NODES:,} nodes; "
                        "refused (write the values out)", file=origin)
        return loader.construct_document(node)
    except RecursionError:
        raise error("YAML nested too deeply; refused", file=origin) from None
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        where = f" (line {mark.line + 1})" if mark is not None else ""
        problem = getattr(exc, "problem", None) or str(exc).splitlines()[0]
        raise error(f"not valid YAML{where}: {problem}", file=origin) from None
    finally:
        loader.dispose()


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


@functools.cache
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
