"""The audit trail: who changed what and when, as a page and through the API."""

from __future__ import annotations

import datetime as dt
from typing import Any

from fastapi import APIRouter, Query, Request
from fastapi.responses import Response
from pydantic import BaseModel

from server.deps import SessionDep, TemplatesDep
from server.store import audit as audit_store
from server.store.teams import list_teams

router = APIRouter()


class AuditEntryPublic(BaseModel):
    id: int
    at: dt.datetime
    actor: str
    action: str
    entity: str
    entity_id: int | None
    team_id: int | None
    summary: str
    before: dict[str, Any] | None
    after: dict[str, Any] | None
    undone_at: dt.datetime | None


@router.get("/api/v1/audit", response_model=list[AuditEntryPublic], tags=["audit"])
def audit_entries(
    session: SessionDep,
    entity: str | None = Query(None, max_length=40),
    entity_id: int | None = None,
    team_id: int | None = None,
    limit: int = Query(200, ge=1, le=1000),
) -> list[AuditEntryPublic]:
    """Newest first: initiative edits with old and new values, plan saves, publishes, revokes."""
    rows = audit_store.list_entries(
        session, entity=entity, entity_id=entity_id, team_id=team_id, limit=limit
    )
    return [AuditEntryPublic.model_validate(row, from_attributes=True) for row in rows]


@router.get("/audit", include_in_schema=False)
def audit_page(
    request: Request,
    session: SessionDep,
    templates: TemplatesDep,
    team_id: int | None = None,
) -> Response:
    entries = audit_store.list_entries(session, team_id=team_id, limit=300)
    context = {"entries": entries, "teams": list_teams(session), "team_id": team_id}
    return templates.TemplateResponse(request, "audit.html", context)
