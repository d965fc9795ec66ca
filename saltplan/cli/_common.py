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


REPORT_FORMATS = ("html", "md", "docx", "pdf")   # = saltplan.reports.FORMATS


def format_options(default_help: str):
    """Add ``--format`` (repeatable or comma-separated: html, md, docx, pdf) and ``--paper``."""
    def deco(func):
        func = click.option("--paper", type=click.Choice(["a4", "letter"]), default="a4",
                            show_default=True, help="Page size of the Word and PDF files.")(func)
        func = click.option("--format", "formats", multiple=True, metavar="FMT",
                            callback=_check_formats,
                            help="Report format: html, md, docx (Word) or pdf (printed by "
                                 "headless Chromium); repeatable or comma-separated. "
                                 + default_help)(func)
        return func
    return deco


def _check_formats(ctx, param, value):
    out = []
    for v in value or ():
        for part in str(v).split(","):
            part = part.strip().lower()
            part = {"markdown": "md", "word": "docx"}.get(part, part)
            if part not in REPORT_FORMATS:
                raise click.BadParameter(f"'{part}' is not one of {', '.join(REPORT_FORMATS)}")
            out.append(part)
    return tuple(f for f in REPORT_FORMATS if f in out)


def need_pdf_tool(formats) -> None:
    """Fail before any work or output when PDF is asked for and Chromium is missing."""
    if "pdf" in (formats or ()):
        from ..reports.pdf import ChromiumMissing, find_chromium, missing_message

        if find_chromium() is None:
            raise ChromiumMissing(missing_message())


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
