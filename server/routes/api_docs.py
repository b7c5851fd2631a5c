"""The interactive API description at /docs, served from vendored files (no CDN, no inline
script), so it works on a closed network under the content security policy."""

from __future__ import annotations

from fastapi import APIRouter, Request
from fastapi.responses import Response

from server.deps import TemplatesDep

router = APIRouter(include_in_schema=False)


@router.get("/docs")
def api_docs(request: Request, templates: TemplatesDep) -> Response:
    return templates.TemplateResponse(request, "api_docs.html", {})
