"""PDF output of the reports for archiving: the HTML page printed by headless Chromium.

Why Chromium and not WeasyPrint: the PDF is the same layout a reader sees in the browser
(the report's CSS uses flex boxes and print rules that Chromium lays out as on screen and
that the browser tests already check), it needs no new Python dependency, and the Debian
``chromium`` package is on the machines we support (CI installs it). WeasyPrint would add
a dependency whose Pango/HarfBuzz libraries pip cannot install. Nothing here downloads a
browser: without Chromium the error names the package to install.

Chromium is driven over its DevTools pipe (``--remote-debugging-pipe``: JSON messages on
file descriptors 3 and 4), no network port is opened. ``Page.printToPDF`` sets the paper
(A4 or Letter), and a footer with the tool version, the input and library hashes and
"page N of M" on every page. The creation dates Chromium writes are replaced by the
report's own time, so the file changes only when the report or the browser changes.
"""
from __future__ import annotations

import base64
import json
import os
import re
import shutil
import subprocess
import sys
import tempfile
import time
from html import escape
from pathlib import Path

from ..errors import SaltplanError

__all__ = ["html_to_pdf", "find_chromium", "ChromiumMissing", "PAPER_INCHES", "missing_message"]

#: paper sizes [inch] (ISO 216 A4 = 210 × 297 mm; US Letter 8.5 × 11 in)
PAPER_INCHES = {"a4": (8.27, 11.69), "letter": (8.5, 11.0)}
TIMEOUT_S = 90.0
_FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--no-first-run",
          "--disable-background-networking", "--disable-component-update", "--disable-sync",
          "--disable-extensions", "--disable-default-apps", "--mute-audio",
          "--remote-debugging-pipe"]


class ChromiumMissing(SaltplanError, RuntimeError):
    """PDF output was asked for but no Chromium is installed."""


def find_chromium() -> str | None:
    """Path of the Chromium to print with: ``$SALTPLAN_CHROMIUM``, else ``chromium`` /
    ``chromium-browser`` / ``google-chrome`` on PATH; None when there is none."""
    env = os.environ.get("SALTPLAN_CHROMIUM")
    if env:
        return env if os.access(env, os.X_OK) else None
    for name in ("chromium", "chromium-browser", "google-chrome"):
        found = shutil.which(name)
        if found:
            return found
    return None


def missing_message() -> str:
    return ("PDF output needs Chromium: install the Debian package 'chromium' (apt-get install "
            "chromium) or set SALTPLAN_CHROMIUM to a Chromium executable")


def _footer_html(text: str) -> str:
    return ('<div style="font-family: sans-serif; font-size: 7px; color: #333; width: 100%; '
            'margin: 0 12mm; display: flex; justify-content: space-between;">'
            f'<span>{escape(text)}</span><span>page <span class="pageNumber"></span> of '
            '<span class="totalPages"></span></span></div>')


_TRAMPOLINE = ("import os, sys\n"
               "r, w = int(sys.argv[1]), int(sys.argv[2])\n"
               "os.dup2(r, 3); os.dup2(w, 4)\n"
               "[os.close(fd) for fd in (r, w) if fd not in (3, 4)]\n"
               "os.execv(sys.argv[3], sys.argv[3:])\n")


def _high(fds: tuple[int, int]) -> tuple[int, int]:
    """The pipe's descriptors moved to numbers >= 10, clear of the 3 and 4 the child needs."""
    import fcntl

    out = []
    for fd in fds:
        moved = fcntl.fcntl(fd, fcntl.F_DUPFD_CLOEXEC, 10)
        os.close(fd)
        out.append(moved)
    return out[0], out[1]


class _Pipe:
    """The DevTools protocol over Chromium's pipe (NUL-terminated JSON messages)."""

    def __init__(self, proc: subprocess.Popen, write_fd: int, read_fd: int):
        self.proc, self.w, self.r = proc, write_fd, read_fd
        self.buf = b""
        self.next_id = 0

    def send(self, method: str, params: dict | None = None, session: str | None = None) -> int:
        self.next_id += 1
        msg: dict = {"id": self.next_id, "method": method, "params": params or {}}
        if session:
            msg["sessionId"] = session
        os.write(self.w, json.dumps(msg).encode("utf-8") + b"\0")
        return self.next_id

    def read(self, deadline: float) -> dict:
        import select

        while b"\0" not in self.buf:
            left = deadline - time.monotonic()
            if left <= 0:
                raise TimeoutError("Chromium did not answer in time")
            ready, _, _ = select.select([self.r], [], [], left)
            if ready:
                chunk = os.read(self.r, 1 << 20)
                if not chunk:
                    raise RuntimeError("Chromium closed the DevTools pipe")
                self.buf += chunk
        raw, _, self.buf = self.buf.partition(b"\0")
        return json.loads(raw.decode("utf-8"))

    def call(self, method: str, params: dict | None = None, session: str | None = None,
             deadline: float = 0.0) -> dict:
        wanted = self.send(method, params, session)
        while True:
            msg = self.read(deadline)
            if msg.get("id") == wanted:
                if "error" in msg:
                    raise RuntimeError(f"Chromium {method}: {msg['error'].get('message')}")
                return msg.get("result") or {}

    def wait_event(self, name: str, deadline: float) -> None:
        while True:
            if self.read(deadline).get("method") == name:
                return


def html_to_pdf(html: str, *, paper: str = "a4", footer: str = "",
                chromium: str | None = None, created: str | None = None) -> bytes:
    """PDF bytes of a self-contained report page, printed by headless Chromium.

    Raises
    ------
    ChromiumMissing
        No Chromium found (one line naming the package to install).
    """
    if paper not in PAPER_INCHES:
        raise ValueError(f"paper must be one of {', '.join(PAPER_INCHES)}, got {paper!r}")
    exe = chromium or find_chromium()
    if exe is None:
        raise ChromiumMissing(missing_message())
    width, height = PAPER_INCHES[paper]
    with tempfile.TemporaryDirectory(prefix="saltplan-pdf-") as tmp:
        page = Path(tmp) / "report.html"
        page.write_text(html, encoding="utf-8")
        cmd_r, cmd_w = _high(os.pipe())
        out_r, out_w = _high(os.pipe())

        # a small Python trampoline moves our pipe ends to the descriptors 3 and 4 that
        # Chromium expects, then execs it (no shell; arguments passed as a list)
        proc = subprocess.Popen(  # noqa: S603 - fixed argument list
            [sys.executable, "-c", _TRAMPOLINE, str(cmd_r), str(out_w), exe, *_FLAGS,
             f"--user-data-dir={tmp}/profile", "about:blank"],
            stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
            close_fds=True, pass_fds=(cmd_r, out_w))
        os.close(cmd_r)
        os.close(out_w)
        pipe = _Pipe(proc, cmd_w, out_r)
        deadline = time.monotonic() + TIMEOUT_S
        try:
            target = pipe.call("Target.createTarget", {"url": "about:blank"},
                               deadline=deadline)["targetId"]
            session = pipe.call("Target.attachToTarget", {"targetId": target, "flatten": True},
                                deadline=deadline)["sessionId"]
            pipe.call("Page.enable", session=session, deadline=deadline)
            pipe.send("Page.navigate", {"url": page.as_uri()}, session)
            pipe.wait_event("Page.loadEventFired", deadline)
            result = pipe.call("Page.printToPDF", {
                "paperWidth": width, "paperHeight": height, "printBackground": True,
                "marginTop": 0.5, "marginBottom": 0.6, "marginLeft": 0.45, "marginRight": 0.45,
                "displayHeaderFooter": True, "headerTemplate": "<span></span>",
                "footerTemplate": _footer_html(footer), "preferCSSPageSize": False,
            }, session=session, deadline=deadline)
            try:
                pipe.send("Browser.close")
            except OSError:
                pass
        except (TimeoutError, RuntimeError, OSError, KeyError, ValueError) as exc:
            raise SaltplanError(f"PDF printing with {exe} failed: {exc}") from None
        finally:
            for fd in (cmd_w, out_r):
                try:
                    os.close(fd)
                except OSError:
                    pass
            try:
                proc.wait(timeout=10)
            except subprocess.TimeoutExpired:
                proc.kill()
                proc.wait()
    return _fixed_dates(base64.b64decode(result["data"]), created)


_DATE = re.compile(rb"/(CreationDate|ModDate) \(D:(\d{14})([^)]*)\)")


def _fixed_dates(pdf: bytes, created: str | None) -> bytes:
    """Replace Chromium's time stamps by the report's own (same length: offsets stay valid)."""
    stamp = re.sub(r"\D", "", created or "")[:14] or "20000101000000"
    stamp = stamp.ljust(14, "0").encode("ascii")

    def sub(m: re.Match) -> bytes:
        tail = m.group(3)
        fixed_tail = (b"+00'00'" if len(tail) == 7 else b"Z" + b" " * (len(tail) - 1)
                      if tail else b"")
        return b"/" + m.group(1) + b" (D:" + stamp + fixed_tail + b")"

    pdf = _DATE.sub(sub, pdf)
    # tagged-PDF structure ids count DOM nodes of the browser session: renumber them by
    # first appearance, same width (byte offsets stay valid)
    ids: dict[bytes, bytes] = {}

    def node(m: re.Match) -> bytes:
        width = len(m.group(1))
        new = ids.setdefault(m.group(1), str(len(ids) + 1).zfill(width).encode("ascii"))
        return b"node" + new if len(new) == width else m.group(0)

    return re.sub(rb"node(\d{8})", node, pdf)
