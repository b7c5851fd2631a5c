"""Sign-in, sign-out, the first-run page (loopback only) and account management."""

from __future__ import annotations

from typing import Any

from fastapi import APIRouter, Request
from fastapi.responses import Response

from server.access import SESSION_COOKIE, is_loopback, safe_next
from server.deps import SessionDep, TemplatesDep
from server.errors import LoadlineError, NotFoundError
from server.routes.forms import form_text, see_other
from server.store import users as user_store
from server.store.users import ROLES, SESSION_HOURS

router = APIRouter(include_in_schema=False)


def _signed_in_response(request: Request, token: str, target: str) -> Response:
    response = see_other(safe_next(target))
    response.set_cookie(
        SESSION_COOKIE,
        token,
        max_age=SESSION_HOURS * 3600,
        httponly=True,
        samesite="lax",
        secure=request.url.scheme == "https",
    )
    return response


@router.get("/login")
def login_page(request: Request, templates: TemplatesDep, next: str = "/") -> Response:
    context = {"form": {"next": safe_next(next)}, "errors": {}}
    return templates.TemplateResponse(request, "login.html", context)


@router.post("/login")
async def login(request: Request, session: SessionDep, templates: TemplatesDep) -> Response:
    form = await request.form()
    username, password = form_text(form, "username"), form_text(form, "password", strip=False)
    target = safe_next(form_text(form, "next"))
    address = request.client.host if request.client else "unknown"
    try:
        user = user_store.authenticate(
            session, username=username, password=password, address=address
        )
    except LoadlineError as exc:
        context = {
            "form": {"username": username, "next": target},
            "errors": {"password": exc.message},
        }
        return templates.TemplateResponse(
            request, "login.html", context, status_code=exc.status_code
        )
    return _signed_in_response(request, user_store.start_session(session, user=user), target)


@router.post("/logout")
def logout(request: Request, session: SessionDep) -> Response:
    token = request.cookies.get(SESSION_COOKIE)
    if token:
        user_store.end_session(session, token=token)
    response = see_other("/login")
    response.delete_cookie(SESSION_COOKIE)
    return response


def _first_run_allowed(request: Request, session: SessionDep) -> None:
    """The set-up page exists only before the first account, and only on this machine."""
    host = request.client.host if request.client else None
    if user_store.count_users(session) > 0 or not is_loopback(host):
        raise NotFoundError("There is no set-up page here.")


@router.get("/setup")
def setup_page(request: Request, session: SessionDep, templates: TemplatesDep) -> Response:
    _first_run_allowed(request, session)
    return templates.TemplateResponse(request, "setup.html", {"form": {}, "errors": {}})


@router.post("/setup")
async def setup(request: Request, session: SessionDep, templates: TemplatesDep) -> Response:
    _first_run_allowed(request, session)
    form = await request.form()
    username = form_text(form, "username", strip=False)
    password = form_text(form, "password", strip=False)
    try:
        if password != form_text(form, "password_again", strip=False):
            raise LoadlineError("The two passwords differ.", field="password_again")
        user = user_store.create_user(session, username=username, password=password, role="admin")
    except LoadlineError as exc:
        context = {"form": {"username": username}, "errors": {exc.field or "form": exc.message}}
        return templates.TemplateResponse(request, "setup.html", context, status_code=422)
    return _signed_in_response(request, user_store.start_session(session, user=user), "/")


def _users_context(session: SessionDep) -> dict[str, Any]:
    return {
        "users": user_store.list_users(session),
        "roles": ROLES,
        "form": {"role": "editor"},
        "errors": {},
    }


@router.get("/users")
def users_page(request: Request, session: SessionDep, templates: TemplatesDep) -> Response:
    return templates.TemplateResponse(request, "users.html", _users_context(session))


@router.post("/users")
async def add_user(request: Request, session: SessionDep, templates: TemplatesDep) -> Response:
    form = await request.form()
    values = {"username": form_text(form, "username", strip=False), "role": form_text(form, "role")}
    try:
        user_store.create_user(session, password=form_text(form, "password", strip=False), **values)
    except LoadlineError as exc:
        context = _users_context(session) | {
            "form": values,
            "errors": {exc.field or "form": exc.message},
        }
        return templates.TemplateResponse(
            request, "users.html", context, status_code=exc.status_code
        )
    return see_other("/users")


@router.post("/users/{user_id}")
async def change_user(
    user_id: int, request: Request, session: SessionDep, templates: TemplatesDep
) -> Response:
    form = await request.form()
    try:
        user_store.set_role(
            session,
            user_id=user_id,
            role=form_text(form, "role"),
            disabled=form_text(form, "disabled") == "on",
        )
    except LoadlineError as exc:
        context = _users_context(session) | {"errors": {"form": exc.message}}
        return templates.TemplateResponse(
            request, "users.html", context, status_code=exc.status_code
        )
    return see_other("/users")
