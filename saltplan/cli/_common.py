"""Options and output helpers shared by the commands."""
from __future__ import annotations

import functools
import json

import click


def _set_verbose(ctx, _param, value):
    if value:
        ctx.ensure_object(dict)
        ctx.find_root().ensure_object(dict)
        ctx.find_root().obj["verbose"] = True
    return value


def common_options(func):
    """Add ``--json`` and ``--verbose`` to a command (``--verbose`` also works before it)."""
    func = click.option("--verbose", is_flag=True, expose_value=False, is_eager=True,
                        callback=_set_verbose, help="Show tracebacks on errors.")(func)
    func = click.option("--json", "as_json", is_flag=True,
                        help="Print machine-readable JSON instead of a table.")(func)
    return func


def echo_json(data) -> None:
    click.echo(dumps(data))


def dumps(data) -> str:
    """Deterministic JSON: sorted keys where dicts are unordered is NOT applied; key order
    is the dataclass field order, which is stable."""
    return json.dumps(data, indent=2, ensure_ascii=False, allow_nan=False)


def table(rows: list[list[str]], headers: list[str]) -> str:
    """Plain fixed-width table for the terminal."""
    cells = [headers] + [[str(c) for c in r] for r in rows]
    widths = [max(len(r[i]) for r in cells) for i in range(len(headers))]
    lines = ["  ".join(c.ljust(w) for c, w in zip(r, widths, strict=False)).rstrip() for r in cells]
    lines.insert(1, "  ".join("-" * w for w in widths))
    return "\n".join(lines)


max_atoms_option = click.option(
    "--max-atoms", type=click.IntRange(1, 10000), default=150, show_default=True,
    help="Refuse structures with more heavy atoms than this.")


def structure_argument(func):
    return click.argument("structure", metavar="SMILES|FILE")(func)


def wraps(func):
    return functools.wraps(func)
