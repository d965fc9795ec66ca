"""Request guards of the workbench: body size limit, start-up token, CSRF, headers.

All of them are plain ASGI middleware or small helpers, so each can be tested alone.
"""
from __future__ import annotations

import hmac
import secrets
from urllib.parse import parse_qs

from starlette.datastructures import Headers
from starlette.responses import PlainTextResponse, RedirectResponse

#: every response carries these; scripts and styles only from the server itself
#: (inline style attributes are allowed: the report's SVG drawings use them; no inline script)
SECURITY_HEADERS = {
    "content-security-policy": ("default-src 'self'; script-src 'self'; style-src 'self' "
                                "'unsafe-inline'; img-src 'self' data:; object-src 'none'; "
                                "base-uri 'none'; form-action 'self'; frame-ancestors 'none'"),
    "x-content-type-options": "nosniff",
    "referrer-policy": "no-referrer",
    "x-frame-options": "DENY",
    "cache-control": "no-store",
}

CSRF_COOKIE = "saltplan_csrf"
TOKEN_COOKIE = "saltplan_token"
CSRF_FIELD = "csrf_token"
CSRF_HEADER = "x-csrf-token"
UNSAFE_METHODS = {"POST", "PUT", "PATCH", "DELETE"}


class BodyLimit:
    """Refuse a request body larger than ``limit`` bytes (413), by Content-Length or as it
    streams in (chunked uploads cannot slip past)."""

    def __init__(self, app, limit: int):
        self.app, self.limit = app, limit

    async def __call__(self, scope, receive, send):
        if scope["type"] != "http":
            return await self.app(scope, receive, send)
        length = Headers(scope=scope).get("content-length")
        too_big = PlainTextResponse(f"upload too large: the limit is {self.limit // 1_000_000} MB",
                                    status_code=413)
        if length is not None and (not length.isdigit() or int(length) > self.limit):
            return await too_big(scope, receive, send)
        seen = 0

        async def limited():
            nonlocal seen
            message = await receive()
            if message["type"] == "http.request":
                seen += len(message.get("body", b""))
                if seen > self.limit:
                    raise _TooLarge()
            return message

        started = False

        async def tracking_send(message):
            nonlocal started
            if message["type"] == "http.response.start":
                started = True
            await send(message)

        try:
            await self.app(scope, limited, tracking_send)
        except _TooLarge:
            if not started:
                await too_big(scope, receive, send)


class _TooLarge(Exception):
    pass


class TokenGate:
    """When the server listens beyond this machine, every request needs the start-up token:
    once as ``?token=...`` (then kept in an HttpOnly cookie) or in the cookie."""

    def __init__(self, app, token: str | None):
        self.app, self.token = app, token

    async def __call__(self, scope, receive, send):
        if scope["type"] != "http" or not self.token:
            return await self.app(scope, receive, send)
        query = parse_qs(scope.get("query_string", b"").decode("latin-1"))
        given = (query.get("token") or [""])[0]
        cookie = _cookies(scope).get(TOKEN_COOKIE, "")
        if given and hmac.compare_digest(given, self.token):
            response = RedirectResponse(scope.get("path", "/") or "/", status_code=303)
            response.set_cookie(TOKEN_COOKIE, self.token, httponly=True, samesite="strict")
            return await response(scope, receive, send)
        if cookie and hmac.compare_digest(cookie, self.token):
            return await self.app(scope, receive, send)
        response = PlainTextResponse("this workbench needs the token printed when "
                                     "'saltplan serve' started: open the address it printed",
                                     status_code=401)
        return await response(scope, receive, send)


class SecurityHeaders:
    """Add :data:`SECURITY_HEADERS` and the CSRF cookie (double-submit) to every response."""

    def __init__(self, app):
        self.app = app

    async def __call__(self, scope, receive, send):
        if scope["type"] != "http":
            return await self.app(scope, receive, send)
        cookies = _cookies(scope)
        token = cookies.get(CSRF_COOKIE) or ""
        if len(token) < 20:
            token = secrets.token_urlsafe(24)
            scope.setdefault("state", {})["csrf_new"] = True
        scope.setdefault("state", {})["csrf"] = token

        async def with_headers(message):
            if message["type"] == "http.response.start":
                headers = [(k, v) for k, v in message.get("headers", [])
                           if k.decode("latin-1").lower() not in SECURITY_HEADERS]
                headers += [(k.encode(), v.encode()) for k, v in SECURITY_HEADERS.items()]
                if scope["state"].get("csrf_new"):
                    headers.append((b"set-cookie", f"{CSRF_COOKIE}={token}; Path=/; HttpOnly; "
                                    "SameSite=Strict".encode()))
                message = dict(message, headers=headers)
            await send(message)

        await self.app(scope, receive, with_headers)


def _cookies(scope) -> dict[str, str]:
    out: dict[str, str] = {}
    for part in Headers(scope=scope).get("cookie", "").split(";"):
        key, _, value = part.strip().partition("=")
        if key:
            out[key] = value
    return out


def csrf_ok(request, form) -> bool:
    """True when the form field (or the htmx header) matches the CSRF cookie."""
    cookie = request.cookies.get(CSRF_COOKIE, "")
    sent = str(form.get(CSRF_FIELD) or request.headers.get(CSRF_HEADER) or "")
    return bool(cookie) and bool(sent) and hmac.compare_digest(cookie, sent)
