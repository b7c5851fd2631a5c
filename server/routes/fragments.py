"""Errors of htmx requests as fragments that fit where they land, and answers for addresses
that only take a form's post.

htmx swaps an answer into the element that asked for it (`HX-Target`): a whole error page
there would nest a second layout inside the page. The app's error handlers call
`error_fragment` for every htmx request, whatever the route: a row's form (its id is
`edit-<id>`, sent as `HX-Trigger`) gets the row replaced by the message; the plan gets the
message in its alert slot and keeps everything else; any other target gets the message alone.
Error answers never move the address bar (`HX-Push-Url: false`): a boosted form would push
its post-only action, which a reload would then open with GET.
"""

from __future__ import annotations

import re

from fastapi import Request
from fastapi.responses import RedirectResponse, Response
from starlette.routing import Match

from server.errors import DeletedError, LoadlineError

_ROW_FORM = re.compile(r"^edit-(?P<id>\d+)$")
# Marks an error fragment, so the page's script swaps it in whatever the status.
FRAGMENT_HEADER = "Loadline-Error-Fragment"


def is_htmx(request: Request) -> bool:
    """An htmx request that swaps its answer into the page (not a history restore)."""
    return (
        request.headers.get("hx-request") == "true"
        and request.headers.get("hx-history-restore-request") != "true"
    )


def changes_url(error: LoadlineError | None) -> str | None:
    """The Changes page that records a deletion, for a deleted row."""
    if not isinstance(error, DeletedError):
        return None
    return f"/audit?team_id={error.team_id}" if error.team_id is not None else "/audit"


def error_fragment(
    request: Request, message: str, status_code: int, error: LoadlineError | None = None
) -> Response:
    """The message as a fragment for where the htmx request's answer lands."""
    row = _ROW_FORM.match(request.headers.get("hx-trigger") or "")
    target = request.headers.get("hx-target") or ""
    context = {"message": message, "changes_url": changes_url(error), "row_id": None}
    headers = {FRAGMENT_HEADER: "true", "HX-Push-Url": "false", "Vary": "HX-Request"}
    if row is not None:
        context["row_id"] = int(row["id"])
        headers |= {"HX-Retarget": f"#row-{row['id']}", "HX-Reswap": "outerHTML"}
    elif target == "plan":
        headers |= {"HX-Retarget": "#plan-alerts", "HX-Reswap": "innerHTML"}
    response = request.app.state.templates.TemplateResponse(
        request, "_error_fragment.html", context, status_code=status_code
    )
    response.headers.update(headers)
    return response


def page_above(request: Request) -> str | None:
    """The nearest address above this one that is a page (answers GET), such as the plan
    above a row's post-only save address."""
    parts = request.url.path.rstrip("/").split("/")
    while len(parts) > 1:
        parts.pop()
        path = "/".join(parts) or "/"
        scope = {"type": "http", "path": path, "root_path": "", "method": "GET"}
        for route in request.app.router.routes:
            if route.matches(scope)[0] == Match.FULL:
                return path
    return None


def not_a_page(request: Request) -> Response | None:
    """A GET of an address that only takes a post (a reload after a form's answer, a link
    copied from the address bar): go to the page above it, never a bare 405."""
    if request.method not in {"GET", "HEAD"}:
        return None
    above = page_above(request)
    return RedirectResponse(above, status_code=303) if above else None
