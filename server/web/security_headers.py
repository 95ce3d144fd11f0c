"""The security headers every response carries: what a browser may load, frame, send and use.

The policy is strict because nothing of ours needs more: scripts and styles come from
``/static`` only (no inline script, no ``style`` attribute, htmx told not to inject its own
style or evaluate text as code, ``templates/base.html``), images are ours or ``data:``, and no
page may be framed (``frame-ancestors 'none'``, and ``X-Frame-Options`` for older browsers),
so the approval form where a reviewer re-enters a password cannot be laid under another
site's page. ``Referrer-Policy: same-origin`` keeps our addresses (a share link's token is in
its path) from other sites, while our own form posts keep their ``Origin`` header: with
``no-referrer`` browsers send ``Origin: null``, which the CSRF check refuses.

A route that needs another value sets its header itself and keeps it (``setdefault``): the
client-link pages send ``no-referrer``, the report preview allows its one inline ``<style>`` by
nonce (``style_nonce``). HSTS is sent only in production, where the app is behind HTTPS
(RFC 6797 section 7.2: not over plain HTTP).
"""

from __future__ import annotations

import secrets

from starlette.datastructures import MutableHeaders
from starlette.types import ASGIApp, Message, Receive, Scope, Send

CSP = "; ".join(
    (
        "default-src 'none'",
        "script-src 'self'",
        "style-src 'self'",
        "img-src 'self' data:",
        "font-src 'self'",
        "connect-src 'self'",
        "form-action 'self'",
        "frame-ancestors 'none'",
        "base-uri 'none'",
        "object-src 'none'",
    )
)
"""The Content-Security-Policy of every page (CSP Level 3, W3C)."""

PERMISSIONS = ", ".join(
    f"{feature}=()"
    for feature in (
        "accelerometer",
        "autoplay",
        "camera",
        "display-capture",
        "fullscreen",
        "geolocation",
        "gyroscope",
        "hid",
        "magnetometer",
        "microphone",
        "midi",
        "payment",
        "publickey-credentials-get",
        "screen-wake-lock",
        "serial",
        "usb",
        "xr-spatial-tracking",
    )
)
"""Every powerful feature denied to every origin (W3C Permissions Policy): the app uses none."""

HSTS = "max-age=31536000; includeSubDomains"
"""One year, as HTTPS deployment guides advise (common practice); production only."""


def headers_for(*, production: bool) -> list[tuple[str, str]]:
    """The headers added to every response, in the order they are sent."""
    found = [
        ("Content-Security-Policy", CSP),
        ("X-Content-Type-Options", "nosniff"),
        ("X-Frame-Options", "DENY"),
        ("Referrer-Policy", "same-origin"),
        ("Permissions-Policy", PERMISSIONS),
        ("Cross-Origin-Opener-Policy", "same-origin"),
    ]
    if production:
        found.append(("Strict-Transport-Security", HSTS))
    return found


def style_nonce() -> str:
    """A fresh nonce for a response's one inline ``<style>`` element (CSP Level 3, 'nonce-')."""
    return secrets.token_urlsafe(18)


def csp_with_style_nonce(nonce: str) -> str:
    """The policy of every page, with one inline ``<style nonce=...>`` allowed."""
    return CSP.replace("style-src 'self'", f"style-src 'self' 'nonce-{nonce}'")


class SecurityHeaders:
    """ASGI middleware adding ``headers_for`` to every HTTP response that lacks them.

    Plain ASGI rather than Starlette's BaseHTTPMiddleware: it only touches the start message,
    so streamed downloads stay streamed and no task is spawned per request."""

    def __init__(self, app: ASGIApp, *, production: bool) -> None:
        self.app = app
        self.headers = headers_for(production=production)

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return

        async def send_with_headers(message: Message) -> None:
            if message["type"] == "http.response.start":
                headers = MutableHeaders(scope=message)
                for name, value in self.headers:
                    headers.setdefault(name, value)
            await send(message)

        await self.app(scope, receive, send_with_headers)
