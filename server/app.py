"""Application factory: settings, database, templates, routers, guards and error pages."""

from __future__ import annotations

from fastapi import FastAPI, Request
from fastapi.exception_handlers import http_exception_handler
from fastapi.exceptions import RequestValidationError
from fastapi.responses import JSONResponse, Response
from fastapi.staticfiles import StaticFiles
from fastapi.templating import Jinja2Templates
from sqlalchemy.exc import DataError, OperationalError
from starlette.exceptions import HTTPException as StarletteHTTPException

from server.access import AccessControl
from server.config import PROJECT_ROOT, Settings
from server.db import make_engine
from server.errors import LoadlineError
from server.refusals import back_link
from server.routes import (
    api_docs,
    api_initiatives,
    api_periods,
    api_plans,
    api_select,
    api_teams,
    audit,
    auth_pages,
    health,
    home_pages,
    initiative_pages,
    overview,
    plan_archive,
    plan_pages,
    published,
    team_pages,
)
from server.routes.fragments import (
    changes_url,
    error_fragment,
    is_htmx,
    not_a_page,
    page_above,
)
from server.routes.preconditions import NotModified
from server.security import RequestGuard
from server.templating import configure_templates, error_line
from server.validation import api_errors, field_and_message

API_DESCRIPTION = """
Loadline's JSON API. Efforts and capacities are person-days. Plans are estimates, not
promises; Loadline plans work and never rates people. Availability is stored as days only.
"""


def create_app(settings: Settings | None = None) -> FastAPI:
    """Build a Loadline application; each call has its own engine (tests build many)."""
    settings = settings or Settings.from_env()
    app = FastAPI(
        title="Loadline",
        version="0.1.0",
        description=API_DESCRIPTION,
        docs_url=None,  # served by routes/api_docs.py from vendored files
        redoc_url=None,
    )
    app.state.settings = settings
    app.state.engine = make_engine(settings)
    templates = Jinja2Templates(directory=str(PROJECT_ROOT / "templates"))
    configure_templates(templates)
    app.state.templates = templates

    app.mount("/static", StaticFiles(directory=str(PROJECT_ROOT / "static")), name="static")
    for module in (
        health,
        api_docs,
        api_teams,
        api_periods,
        api_initiatives,
        api_select,
        audit,
        auth_pages,
        home_pages,
        team_pages,
        initiative_pages,
        plan_pages,
        overview,
        api_plans,
        plan_archive,
        published,
    ):
        app.include_router(module.router)
    _add_error_handlers(app)
    # The last one added runs first: the guard (size, CSRF token, headers), then access rules.
    app.add_middleware(
        AccessControl,  # type: ignore[arg-type]
        engine=app.state.engine,
        proxy_header=settings.proxy_user_header,
        trusted_proxies=settings.trusted_proxies,
    )
    app.add_middleware(
        RequestGuard,  # type: ignore[arg-type]
        secret=settings.secret_key,
        max_body_bytes=settings.max_body_bytes,
    )
    return app


def _wants_json(request: Request) -> bool:
    return request.url.path.startswith("/api/") or "application/json" in request.headers.get(
        "accept", ""
    )


def _fragment_for(request: Request) -> bool:
    """An htmx request of a page: its error answers with a fragment, not a whole page."""
    return is_htmx(request) and not _wants_json(request)


def _error_page(
    request: Request, message: str, status_code: int, error: LoadlineError | None = None
) -> Response:
    if _fragment_for(request):
        return error_fragment(request, message, status_code, error)
    # A refused post: a way back to the page it came from (or the page above its address).
    back = (back_link(request) or page_above(request)) if request.method == "POST" else None
    context = {"message": message, "back_url": back, "changes_url": changes_url(error)}
    return request.app.state.templates.TemplateResponse(
        request, "error.html", context, status_code=status_code
    )


def _where_sent(request: Request, field: str) -> str:
    """The part of the request a refused field came in, as FastAPI's own "loc" names it."""
    head = field.split(".")[0]
    if head in request.path_params:
        return "path"
    return "query" if head in request.query_params else "body"


def _add_error_handlers(app: FastAPI) -> None:
    @app.exception_handler(StarletteHTTPException)
    async def _http(request: Request, exc: StarletteHTTPException) -> Response:
        if exc.status_code == 405 and not _wants_json(request):
            moved = not_a_page(request)
            if moved is not None:
                return moved
        if _fragment_for(request):
            return error_fragment(request, str(exc.detail), exc.status_code)
        return await http_exception_handler(request, exc)

    @app.exception_handler(NotModified)
    async def _not_modified(request: Request, exc: NotModified) -> Response:
        return Response(status_code=304, headers={"ETag": exc.etag})

    @app.exception_handler(RequestValidationError)
    async def _validation(request: Request, exc: RequestValidationError) -> Response:
        errors = api_errors(exc.errors())
        if _wants_json(request):
            return JSONResponse({"detail": errors}, status_code=422)
        # A page asked with a bad address (a hand-edited link): say so on a page, not in JSON.
        # The API's "msg" already starts with the field; a page names it once, in words.
        message = "; ".join(
            error_line(field, text) for field, text in map(field_and_message, exc.errors())
        )
        return _error_page(request, message, 422)

    @app.exception_handler(LoadlineError)
    async def _domain(request: Request, exc: LoadlineError) -> Response:
        if _wants_json(request) and exc.status_code == 422:
            # The same shape as request validation errors: a list naming each field.
            field = exc.field or "body"
            error = {
                "loc": [_where_sent(request, field), field],
                "msg": exc.message,
                "type": "value_error",
                "field": field,
            }
            return JSONResponse({"detail": [error]}, status_code=422)
        if _wants_json(request):
            return JSONResponse(
                {"detail": exc.detail()}, status_code=exc.status_code, headers=exc.headers()
            )
        return _error_page(request, exc.message, exc.status_code, exc)

    @app.exception_handler(OverflowError)
    @app.exception_handler(DataError)
    async def _number_out_of_range(request: Request, exc: Exception) -> Response:
        # An id or number too large for the database (SQLite raises OverflowError, PostgreSQL
        # a DataError): no row can have it, and nothing was stored.
        message = "A number in the request is too large for any stored item."
        if _wants_json(request):
            return JSONResponse({"detail": {"message": message}}, status_code=404)
        return _error_page(request, message, 404)

    @app.exception_handler(OperationalError)
    async def _database_unavailable(request: Request, exc: OperationalError) -> Response:
        # A locked or full database: say so plainly; nothing was stored.
        reason = str(exc.orig) if exc.orig is not None else "database error"
        message = (
            f"The database could not complete the change ({reason}). Nothing was saved; try again."
        )
        if _wants_json(request):
            return JSONResponse({"detail": {"message": message}}, status_code=503)
        return _error_page(request, message, 503)
