"""The audit trail: one entry per change, written in the same transaction as the change."""

from __future__ import annotations

from typing import Any

from sqlmodel import Session, col, select

from server.actor import current_actor
from server.models import AuditEntry


def record(
    session: Session,
    *,
    actor: str = "",
    action: str,
    entity: str,
    entity_id: int | None,
    team_id: int | None = None,
    summary: str = "",
    before: dict[str, Any] | None = None,
    after: dict[str, Any] | None = None,
) -> AuditEntry:
    """Add an entry to the session; the caller's commit stores it with the change itself.

    The signed-in user of the current request is the actor; `actor` names it only when
    there is none (command line, tests).
    """
    entry = AuditEntry(
        actor=current_actor.get() or actor,
        action=action,
        entity=entity,
        entity_id=entity_id,
        team_id=team_id,
        summary=summary[:300],
        before=before,
        after=after,
    )
    session.add(entry)
    return entry


def list_entries(
    session: Session,
    *,
    entity: str | None = None,
    entity_id: int | None = None,
    team_id: int | None = None,
    limit: int = 200,
) -> list[AuditEntry]:
    query = select(AuditEntry).order_by(col(AuditEntry.id).desc()).limit(limit)
    if entity is not None:
        query = query.where(AuditEntry.entity == entity)
    if entity_id is not None:
        query = query.where(AuditEntry.entity_id == entity_id)
    if team_id is not None:
        query = query.where(AuditEntry.team_id == team_id)
    return list(session.exec(query))
