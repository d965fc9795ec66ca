"""Report formats (``--format``) and the footer the Word and PDF pages carry."""
from __future__ import annotations

from typing import Any

__all__ = ["FORMATS", "DEFAULT_FORMATS", "check_formats", "footer_text"]

#: report formats a command can write (``--format``); html and md are the default
FORMATS = ("html", "md", "docx", "pdf")
DEFAULT_FORMATS = ("html", "md")


def footer_text(provenance: dict) -> str:
    """Footer of the Word and PDF pages: tool version, input and library hashes, time."""
    def short(h: Any) -> str:
        return str(h or "n/a")[:19]

    return (f"{provenance.get('tool', 'saltplan')} {provenance.get('version', '')} · input "
            f"{short(provenance.get('input_hash'))} · library "
            f"{short(provenance.get('library_hash'))} · {provenance.get('created', '')}")


def check_formats(formats: Any) -> tuple[str, ...]:
    """Validated report formats, in :data:`FORMATS` order ("md" also accepted as "markdown")."""
    chosen = []
    for f in formats or DEFAULT_FORMATS:
        for part in str(f).split(","):
            part = part.strip().lower()
            part = {"markdown": "md", "word": "docx"}.get(part, part)
            if part not in FORMATS:
                raise ValueError(f"unknown report format '{part}' (choose from "
                                 f"{', '.join(FORMATS)})")
            chosen.append(part)
    return tuple(f for f in FORMATS if f in chosen)
