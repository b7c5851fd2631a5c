"""The audit trail: one entry per change, written in the same transaction as the change."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

from sqlalchemy import insert
from sqlmodel import Session, col, select

from server.actor import current_actor
from server.models import AuditEntry


def entry(
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
    """A new entry, not yet added to any session.

    The signed-in user of the current request is the actor; `actor` names it only when
    there is none (command line, tests).
    """
    return AuditEntry(
        actor=current_actor.get() or actor,
        action=action,
        entity=entity,
        entity_id=entity_id,
        team_id=team_id,
        summary=summary[:300],
        before=before,
        after=after,
    )


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
    """Add an entry to the session; the caller's commit stores it with the change itself."""
    new = entry(
        actor=actor,
        action=action,
        entity=entity,
        entity_id=entity_id,
        team_id=team_id,
        summary=summary,
        before=before,
        after=after,
    )
    session.add(new)
    return new


def record_many(session: Session, entries: Sequence[AuditEntry]) -> None:
    """Write many entries (from `entry`) in the session's transaction as one executemany.

    For bulk changes: the session's own flush would send one INSERT per entry to read each
    id back, and no caller needs those ids. The entries stay outside the session.
    """
    if not entries:
        return
    table = AuditEntry.__table__  # type: ignore[attr-defined]
    columns = [column.key for column in table.columns if not column.primary_key]
    session.exec(insert(table), params=[{k: getattr(e, k) for k in columns} for e in entries])


def changed(before: dict[str, Any], after: dict[str, Any]) -> tuple[dict[str, Any], dict[str, Any]]:
    """The keys whose values differ, as (before, after): what an edit changed."""
    keys = [key for key in after if before.get(key) != after[key]]
    return {key: before.get(key) for key in keys}, {key: after[key] for key in keys}


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


def last_actor(session: Session, *, entity: str, entity_id: int | None) -> str:
    """Who made the newest change to a row ("" when unknown): named when a save collides."""
    if entity_id is None:
        return ""
    query = (
        select(AuditEntry.actor)
        .where(AuditEntry.entity == entity, AuditEntry.entity_id == entity_id)
        .order_by(col(AuditEntry.id).desc())
        .limit(1)
    )
    return session.exec(query).first() or ""
