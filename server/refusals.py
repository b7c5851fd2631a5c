"""A refused request (403 and the like) answered in the shape its sender can read.

The access rules and the form-token check run as middleware, before any route, so they
answer here: JSON for the API, the bare message for htmx (static/loadline.js shows it beside
the form that sent it), and otherwise a page in the site layout with a link back.
"""

from __future__ import annotations

from urllib.parse import urlsplit

from starlette.requests import Request
from starlette.responses import JSONResponse, PlainTextResponse, Response


def is_api(request: Request) -> bool:
    return request.url.path.startswith("/api/") or request.url.path == "/openapi.json"


def back_link(request: Request) -> str | None:
    """The page the request came from, when it is one of ours (never another site)."""
    referer = request.headers.get("referer", "")
    if not referer:
        return None
    parts = urlsplit(referer)
    if parts.netloc and parts.netloc != request.url.netloc:
        return None
    path = parts.path or "/"
    if not path.startswith("/") or path.startswith("//"):
        return None
    target = path + (f"?{parts.query}" if parts.query else "")
    here = request.url.path + (f"?{request.url.query}" if request.url.query else "")
    return None if target == here else target


def refusal(request: Request, message: str, status_code: int, **headers: str) -> Response:
    if is_api(request):
        return JSONResponse(
            {"detail": {"message": message}}, status_code=status_code, headers=headers
        )
    if request.headers.get("hx-request") == "true":
        return PlainTextResponse(message, status_code=status_code, headers=headers)
    templates = getattr(request.app.state, "templates", None) if "app" in request.scope else None
    if templates is None:  # the middleware without its application (never in serving)
        return PlainTextResponse(message, status_code=status_code, headers=headers)
    context = {"message": message, "back_url": back_link(request), "status_code": status_code}
    response = templates.TemplateResponse(
        request, "error.html", context, status_code=status_code, headers=headers
    )
    return response
