"""Neutralize text for Markdown output (CommonMark / GitHub-flavoured Markdown).

User-supplied text (compound names, notes, library entries' names and liabilities) must
render as the literal characters typed, never as a link, image, HTML tag, heading, list,
table cell break or code span. Backslash escapes are used (CommonMark spec 0.31, section
2.4: any ASCII punctuation may be backslash-escaped), so the text still reads right when
rendered and stays legible in the raw file.

The Markdown environment applies :func:`md_escape` to every ``{{ ... }}`` output through
Jinja's ``finalize`` hook (the Markdown twin of HTML autoescaping); template code marks
text it built itself (numbers, our own table markup) as :class:`MdRaw`.
"""
from __future__ import annotations

import re

#: characters escaped wherever they appear: emphasis, code, links/images, HTML, tables,
#: headings, strikethrough, entity references
_ALWAYS = frozenset("\\`*_[]<>#|~&{}!")   # "!" too: "![x](...)" is an image
#: block markers that need a following space (or the end) to start a list / setext heading
_LINE_START = re.compile(r"^(\s*)([-+=]|\d{1,9}[.)])(?=\s|$)")
_RULE = re.compile(r"^(\s*)([-=])(?=[-=\s]*$)")     # "---" thematic break, "===" setext
_SCHEME = re.compile(r"([A-Za-z][A-Za-z0-9+.-]{0,31}):(?=//)")
_WWW = re.compile(r"\b([wW]{3})\.")
_MAILISH = re.compile(r"@")


class MdRaw(str):
    """Text already safe for Markdown (built by the report code, not typed by a user)."""


def md_escape(value) -> str:
    """Return ``value`` as Markdown that renders literally.

    Newlines collapse to spaces (user text is always inline), ASCII punctuation with a
    Markdown meaning is backslash-escaped, a block marker at the start is escaped, and
    bare URLs / ``www.`` / e-mail addresses are broken so GFM's autolink extension does
    not turn them into links.

    >>> md_escape("[x](http://evil) <b>")
    '\\\\[x\\\\](http\\\\://evil) \\\\<b\\\\>'
    """
    if isinstance(value, MdRaw):
        return value
    text = " ".join(str(value).split())
    out = []
    for ch in text:
        out.append("\\" + ch if ch in _ALWAYS else ch)
    text = "".join(out)
    text = _SCHEME.sub(lambda m: m.group(1) + "\\:", text)
    text = _WWW.sub(lambda m: m.group(1) + "\\.", text)
    text = _MAILISH.sub("\\@", text)
    text = _RULE.sub(lambda m: m.group(1) + "\\" + m.group(2), text)
    text = _LINE_START.sub(lambda m: m.group(1) + "\\" + m.group(2) if len(m.group(2)) == 1
                           else m.group(1) + m.group(2)[:-1] + "\\" + m.group(2)[-1], text)
    return text


def finalize(value):
    """Jinja ``finalize`` for the Markdown environment: escape unless already raw."""
    if value is None:
        return MdRaw("")
    if isinstance(value, MdRaw):
        return value
    if isinstance(value, bool):
        return MdRaw("yes" if value else "no")
    if isinstance(value, int):
        return MdRaw(str(value))
    if isinstance(value, float):
        return MdRaw(f"{value:g}")
    return md_escape(value)


def raw(value) -> MdRaw:
    """Jinja filter ``raw``: mark report-built text as safe Markdown."""
    return MdRaw("" if value is None else str(value))
