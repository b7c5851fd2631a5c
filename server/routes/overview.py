"""The period overview: every team's plan summary, and cross-team work planned jointly."""

from __future__ import annotations

from typing import Any

from fastapi import APIRouter, Request
from fastapi.responses import JSONResponse, Response

from server.deps import SessionDep, SettingsDep, TemplatesDep
from server.planning.overview import PeriodOverview, overview_for, overview_json

router = APIRouter(include_in_schema=False)


@router.get("/periods/{period_id}/overview")
def period_overview(
    period_id: int,
    request: Request,
    session: SessionDep,
    settings: SettingsDep,
    templates: TemplatesDep,
) -> Response:
    overview: PeriodOverview = overview_for(
        session, period_id=period_id, resolution=settings.resolution_days
    )
    if "application/json" in request.headers.get("accept", ""):
        return JSONResponse(overview_json(overview))
    context: dict[str, Any] = {"overview": overview}
    return templates.TemplateResponse(request, "overview.html", context)
