"""Who is asking, and may they? One table of rules for every route, applied in one place.

Roles: viewers read everything except published-link management; editors also change data,
save, publish and revoke; admins also manage accounts. A request is signed in by a bearer token
(API clients), the session cookie (browsers), or, when configured, a user name header set by a
trusted reverse proxy (company single sign-on), accepted only from the configured addresses.
"""

from __future__ import annotations

import ipaddress
from dataclasses import dataclass
from typing import Any
from urllib.parse import quote

from anyio import to_thread
from sqlmodel import Session
from starlette.requests import Request
from starlette.responses import JSONResponse, PlainTextResponse, RedirectResponse, Response

from server.actor import current_actor
from server.models import UserAccount
from server.refusals import is_api as _is_api
from server.refusals import refusal
from server.security import ASGIApp, Receive, Scope, Send
from server.store import users as user_store

SESSION_COOKIE = "loadline_session"
ROLE_RANK = {"viewer": 1, "editor": 2, "admin": 3}
SAFE_METHODS = frozenset({"GET", "HEAD", "OPTIONS"})
_PUBLIC_PATHS = frozenset({"/health", "/login", "/logout", "/setup", "/favicon.ico"})
_PUBLIC_PREFIXES = ("/static/", "/p/")
_PUBLICATION_WORDS = ("/publication", "/publish", "/revoke")
_NO_USER_PREFIXES = ("/static/", "/p/", "/health")


@dataclass(frozen=True)
class SignedIn:
    user_id: int
    username: str
    role: str
    via: str  # "bearer", "cookie" or "proxy"

    def can(self, role: str) -> bool:
        return ROLE_RANK[self.role] >= ROLE_RANK[role]


def required_role(method: str, path: str) -> str | None:
    """The least role a request needs; None for public paths."""
    if path in _PUBLIC_PATHS or path.startswith(_PUBLIC_PREFIXES):
        return None
    if path.startswith(("/users", "/api/v1/users")):
        return "admin"
    if any(word in path for word in _PUBLICATION_WORDS):
        return "editor"
    return "viewer" if method in SAFE_METHODS else "editor"


def allowed(user: SignedIn | None, method: str, path: str) -> bool:
    """Whether this person may send this request: pages ask it before offering a control."""
    role = required_role(method, path)
    return role is None or (user is not None and user.can(role))


def is_loopback(host: str | None) -> bool:
    try:
        return host is not None and ipaddress.ip_address(host).is_loopback
    except ValueError:
        return False


class AccessControl:
    """ASGI middleware: resolve the user, enforce the rule table, refuse or pass on."""

    def __init__(self, app: ASGIApp, *, engine: Any, proxy_header: str, trusted_proxies: str):
        self.app = app
        self.engine = engine
        self.proxy_header = proxy_header.lower()
        self.trusted = {p.strip() for p in trusted_proxies.split(",") if p.strip()}

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        request = Request(scope)
        role = required_role(scope["method"], scope["path"])
        # Static files, published links and the health check need no user: no database
        # read for them (published links are the most viewed pages during a meeting).
        needs_user = role is not None or not scope["path"].startswith(_NO_USER_PREFIXES)
        signed_in = await to_thread.run_sync(self._resolve, request) if needs_user else None
        scope.setdefault("state", {})["user"] = signed_in
        refusal = None
        if role is not None:
            refusal = await to_thread.run_sync(self._refusal, request, signed_in, role)
        if refusal is not None:
            await refusal(scope, receive, send)
            return
        token = current_actor.set(signed_in.username if signed_in else "")
        try:
            await self.app(scope, receive, send)
        finally:
            current_actor.reset(token)

    def _resolve(self, request: Request) -> SignedIn | None:
        bearer = request.headers.get("authorization", "")
        with Session(self.engine) as session:
            if bearer.lower().startswith("bearer "):
                return _signed(
                    user_store.user_for_token(session, token=bearer[7:].strip()), "bearer"
                )
            cookie = request.cookies.get(SESSION_COOKIE)
            if cookie:
                found = _signed(user_store.user_for_token(session, token=cookie), "cookie")
                if found:
                    return found
            if self.proxy_header and request.client and request.client.host in self.trusted:
                name = request.headers.get(self.proxy_header, "").strip()
                if name:
                    return _signed(user_store.find_user(session, username=name), "proxy")
        return None

    def _refusal(self, request: Request, user: SignedIn | None, role: str) -> Response | None:
        is_api = _is_api(request)
        if user is None:
            if is_api:
                sent = request.headers.get("authorization", "")
                if sent.lower().startswith("bearer "):  # RFC 6750, section 3.1
                    message = (
                        "The bearer token sent is not known, or has expired or been revoked: "
                        "send a current one (`loadline api-token NAME` makes one)."
                    )
                    challenge = 'Bearer error="invalid_token"'
                elif sent:
                    message = "Authorization: only a bearer token is understood (Bearer ...)."
                    challenge = "Bearer"
                else:
                    message, challenge = "Sign in first: send a bearer token.", "Bearer"
                return JSONResponse(
                    {"detail": {"message": message, "field": "Authorization"}},
                    status_code=401,
                    headers={"WWW-Authenticate": challenge},
                )
            with Session(self.engine) as session:
                first_run = user_store.count_users(session) == 0
            if first_run and is_loopback(request.client.host if request.client else None):
                return RedirectResponse("/setup", status_code=303)
            if request.method not in SAFE_METHODS:
                return PlainTextResponse("Sign in first.", status_code=401)
            return RedirectResponse(f"/login?next={_next(request)}", status_code=303)
        if not user.can(role):
            message = f"Your role ({user.role}) may not do this; it needs {role}."
            if not is_api:
                message += " An administrator can change your role."
            return refusal(request, message, 403)
        if is_api and user.via != "bearer" and request.method not in SAFE_METHODS:
            # A browser's cookies ride along on cross-site requests; demand the page's token.
            sent = request.headers.get("x-csrf-token", "")
            if not sent or sent != request.scope.get("state", {}).get("csrf_token"):
                return JSONResponse(
                    {"detail": {"message": "Send the page's X-CSRF-Token header."}},
                    status_code=403,
                )
        return None


def _signed(user: UserAccount | None, via: str) -> SignedIn | None:
    if user is None:
        return None
    return SignedIn(user_id=user.id or 0, username=user.username, role=user.role, via=via)


def _next(request: Request) -> str:
    target = request.url.path + (f"?{request.url.query}" if request.url.query else "")
    return quote(target, safe="")


def safe_next(target: str | None) -> str:
    """Only local paths may follow a sign-in (no open redirect)."""
    if not target or not target.startswith("/") or target.startswith("//"):
        return "/"
    return target
