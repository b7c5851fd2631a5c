"""Published plans: GET /p/{token}, a frozen read-only page for stakeholders.

Rendered only from the stored snapshot (one read of the publication, one of its plan; no
solve), on a base template with no navigation, no forms, no scripts and no CSRF token, so the
page is byte-for-byte the same on every view while the snapshot is. It asks not to be indexed
and sends no referrer. A revoked link answers 410 at once; an unknown one 404.

Whoever holds the link sees team totals only (planning.published_view): no member names, no
per-member days off, not who saved the plan. There are no downloads behind a link.
"""

from __future__ import annotations

import hashlib
import re
from typing import Any

from fastapi import APIRouter, Request
from fastapi.responses import Response

from server.deps import SessionDep, TemplatesDep
from server.planning.compare import single_curve_chart
from server.planning.published_view import published_view_of
from server.planning.snapshots import view_of
from server.routes.preconditions import NONE_MATCH_HEADER, BadIfMatchError, parse_if_none_match
from server.store import plans as store

router = APIRouter(include_in_schema=False)

# secrets.token_urlsafe(32) gives 43 URL-safe base64 characters; anything else is not a token.
_TOKEN = re.compile(r"^[A-Za-z0-9_-]{43}$")
PUBLISHED_CSP = (
    "default-src 'none'; style-src 'self'; img-src 'self' data:; base-uri 'none'; "
    "form-action 'none'; frame-ancestors 'none'"
)
PUBLISHED_HEADERS = {
    "Referrer-Policy": "no-referrer",
    "X-Robots-Tag": "noindex, nofollow",
    "Content-Security-Policy": PUBLISHED_CSP,
    # Revocation must bite at once: caches revalidate every time (cheaply, by ETag).
    "Cache-Control": "no-cache",
}


def _still_current(request: Request, etag: str) -> bool:
    """The browser's copy is this page (a malformed If-None-Match is just no match here)."""
    try:
        wanted = parse_if_none_match(request.headers.getlist(NONE_MATCH_HEADER))
    except BadIfMatchError:
        return False
    return wanted is not None and wanted.holds(etag)


def _page(
    templates: TemplatesDep,
    request: Request,
    name: str,
    context: dict[str, Any],
    status_code: int,
) -> Response:
    template = templates.get_template(name)
    body = template.render(context).encode("utf-8")
    etag = '"' + hashlib.sha256(body).hexdigest()[:32] + '"'
    headers = dict(PUBLISHED_HEADERS)
    if status_code == 200:
        headers["ETag"] = etag
        if _still_current(request, etag):
            return Response(status_code=304, headers=headers)
    return Response(body, status_code=status_code, media_type="text/html", headers=headers)


@router.get("/p/{token}")
def published_plan(
    token: str, request: Request, session: SessionDep, templates: TemplatesDep
) -> Response:
    found = store.find_published(session, token=token) if _TOKEN.match(token) else None
    if found is None:
        return _page(templates, request, "plans/published_missing.html", {"gone": False}, 404)
    db_publication, db_plan = found
    if db_publication.revoked_at is not None:
        return _page(templates, request, "plans/published_missing.html", {"gone": True}, 410)
    view = view_of(db_plan.inputs, db_plan.result)
    chart = single_curve_chart(view, label="Plan", name=db_plan.name)
    context = {"plan": db_plan, "view": view, "chart": chart, "public": published_view_of(view)}
    return _page(templates, request, "plans/published.html", context, 200)
