"""Request guards: body size limit, CSRF tokens for forms and htmx, security headers.

Written as plain ASGI middleware so that a form body can be read for its token and then handed
on unchanged to the route.
"""

from __future__ import annotations

import hashlib
import hmac
import secrets
from collections.abc import Awaitable, Callable, MutableMapping
from typing import Any

from starlette.datastructures import MutableHeaders
from starlette.requests import Request
from starlette.responses import PlainTextResponse

from server.refusals import refusal

Scope = MutableMapping[str, Any]
Message = MutableMapping[str, Any]
Receive = Callable[[], Awaitable[Message]]
Send = Callable[[Message], Awaitable[None]]
ASGIApp = Callable[[Scope, Receive, Send], Awaitable[None]]

BROWSER_COOKIE = "loadline_browser"
CSRF_FIELD = "csrf_token"
CSRF_HEADER = "x-csrf-token"
SAFE_METHODS = frozenset({"GET", "HEAD", "OPTIONS"})

CONTENT_SECURITY_POLICY = (
    "default-src 'self'; script-src 'self'; style-src 'self'; img-src 'self' data:; "
    "form-action 'self'; frame-ancestors 'none'; base-uri 'none'; object-src 'none'"
)


def csrf_token_for(secret: str, browser_id: str) -> str:
    """The CSRF token of one browser: an HMAC of its random cookie, never stored."""
    return hmac.new(secret.encode(), f"csrf:{browser_id}".encode(), hashlib.sha256).hexdigest()


def _is_published(path: str) -> bool:
    """A published plan's page: read by people without an account, and holding no form, so
    no browser cookie is set for it (nothing of Loadline stays in a stakeholder's browser)."""
    return path.startswith("/p/")


def _is_json(content_type: str | None) -> bool:
    """application/json, or a JSON-based type (application/problem+json), any parameters."""
    media = (content_type or "").split(";")[0].strip().lower()
    return media == "application/json" or (
        media.startswith("application/") and media.endswith("+json")
    )


def _is_api(path: str) -> bool:
    # The JSON API only accepts application/json bodies, which a cross-site page cannot send
    # without a CORS preflight (and no CORS headers are ever sent), so it needs no form token.
    return path.startswith("/api/")


class RequestGuard:
    """Limit body size, check CSRF on state-changing page requests, add security headers."""

    def __init__(self, app: ASGIApp, *, secret: str, max_body_bytes: int, https_only: bool = False):
        self.app = app
        self.secret = secret
        self.max_body_bytes = max_body_bytes
        self.https_only = https_only

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        request = Request(scope)
        browser_id = request.cookies.get(BROWSER_COOKIE, "")
        new_browser = not _valid_browser_id(browser_id)
        if new_browser:
            browser_id = secrets.token_urlsafe(24)
        scope.setdefault("state", {})
        scope["state"]["csrf_token"] = csrf_token_for(self.secret, browser_id)
        send = self._with_headers(send, browser_id if new_browser else None, scope["path"])

        declared = request.headers.get("content-length")
        if declared and declared.isdigit() and int(declared) > self.max_body_bytes:
            await self._reject(scope, receive, send, 413, "The request is too large.")
            return
        if scope["method"] in SAFE_METHODS:
            await self.app(scope, receive, send)
            return

        body, too_large = await _read_body(receive, self.max_body_bytes)
        if too_large:
            await self._reject(scope, receive, send, 413, "The request is too large.")
            return
        if body and _is_api(scope["path"]) and not _is_json(request.headers.get("content-type")):
            # Every body the API reads is JSON: anything else is refused as what it is, not
            # reported as a JSON object with no fields.
            await self._reject(
                scope,
                receive,
                send,
                415,
                "Send the body as JSON, with the header Content-Type: application/json.",
            )
            return
        replay = _replay(body)
        if not _is_api(scope["path"]):
            sent = request.headers.get(CSRF_HEADER) or await _form_token(scope, body)
            expected = scope["state"]["csrf_token"]
            if new_browser or not sent or not hmac.compare_digest(sent, expected):
                await self._reject(
                    scope,
                    replay,
                    send,
                    403,
                    "This form has expired or did not come from Loadline. Reload the page and "
                    "try again.",
                )
                return
        await self.app(scope, _replay(body), send)

    async def _reject(
        self, scope: Scope, receive: Receive, send: Send, status: int, text: str
    ) -> None:
        if _is_api(scope["path"]):
            await PlainTextResponse(text, status_code=status)(scope, receive, send)
            return
        # A page request: the message in the site layout (or beside the form, for htmx).
        await refusal(Request(scope), text, status)(scope, receive, send)

    def _with_headers(self, send: Send, new_browser_id: str | None, path: str) -> Send:
        async def wrapped(message: Message) -> None:
            if message["type"] == "http.response.start":
                headers = MutableHeaders(scope=message)
                headers.setdefault("Content-Security-Policy", CONTENT_SECURITY_POLICY)
                headers.setdefault("X-Content-Type-Options", "nosniff")
                headers.setdefault("X-Frame-Options", "DENY")
                headers.setdefault("Referrer-Policy", "same-origin")
                headers.setdefault("Cross-Origin-Opener-Policy", "same-origin")
                if new_browser_id is not None and not _is_published(path):
                    cookie = (
                        f"{BROWSER_COOKIE}={new_browser_id}; Path=/; HttpOnly; SameSite=Lax; "
                        "Max-Age=31536000"
                    )
                    if self.https_only:
                        cookie += "; Secure"
                    headers.append("Set-Cookie", cookie)
            await send(message)

        return wrapped


def _valid_browser_id(value: str) -> bool:
    return 20 <= len(value) <= 64 and all(c.isalnum() or c in "-_" for c in value)


async def _read_body(receive: Receive, limit: int) -> tuple[bytes, bool]:
    chunks: list[bytes] = []
    size = 0
    more = True
    while more:
        message = await receive()
        if message["type"] == "http.disconnect":
            break
        chunk = message.get("body", b"")
        size += len(chunk)
        if size > limit:
            return b"", True
        chunks.append(chunk)
        more = message.get("more_body", False)
    return b"".join(chunks), False


def _replay(body: bytes) -> Receive:
    sent = False

    async def receive() -> Message:
        nonlocal sent
        if sent:
            return {"type": "http.disconnect"}
        sent = True
        return {"type": "http.request", "body": body, "more_body": False}

    return receive


async def _form_token(scope: Scope, body: bytes) -> str | None:
    content_type = Request(scope).headers.get("content-type", "")
    if not content_type.startswith(("application/x-www-form-urlencoded", "multipart/form-data")):
        return None
    try:
        async with Request(scope, _replay(body)).form() as form:  # closes uploaded files
            value = form.get(CSRF_FIELD)
    except Exception:  # a malformed body has no usable token; the route never sees it
        return None
    return value if isinstance(value, str) else None
