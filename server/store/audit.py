"""The audit trail: one entry per change, written in the same transaction as the change."""

from __future__ import annotations

import datetime as dt
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

from sqlalchemy import insert
from sqlmodel import Session, col, func, select

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


@dataclass(frozen=True)
class EntryFilter:
    """Which entries a reader asked for; `until` is exclusive (the start of the day after)."""

    entity: str | None = None
    entity_id: int | None = None
    team_id: int | None = None
    since: dt.datetime | None = None
    until: dt.datetime | None = None

    def where(self, query: Any) -> Any:
        if self.entity is not None:
            query = query.where(AuditEntry.entity == self.entity)
        if self.entity_id is not None:
            query = query.where(AuditEntry.entity_id == self.entity_id)
        if self.team_id is not None:
            query = query.where(AuditEntry.team_id == self.team_id)
        if self.since is not None:
            query = query.where(col(AuditEntry.at) >= _in_utc(self.since))
        if self.until is not None:
            query = query.where(col(AuditEntry.at) < _in_utc(self.until))
        return query


def _in_utc(moment: dt.datetime) -> dt.datetime:
    """Times are stored in UTC; a time without a zone is read as UTC too."""
    if moment.tzinfo is None:
        return moment.replace(tzinfo=dt.UTC)
    return moment.astimezone(dt.UTC)


def list_entries(
    session: Session,
    *,
    entity: str | None = None,
    entity_id: int | None = None,
    team_id: int | None = None,
    before_id: int | None = None,
    limit: int = 200,
) -> list[AuditEntry]:
    """Newest first; `before_id` pages back: only entries older than that entry (by id)."""
    wanted = EntryFilter(entity=entity, entity_id=entity_id, team_id=team_id)
    return page_of_entries(session, wanted=wanted, before_id=before_id, limit=limit)


def page_of_entries(
    session: Session,
    *,
    wanted: EntryFilter,
    before_id: int | None = None,
    after_id: int | None = None,
    limit: int = 100,
) -> list[AuditEntry]:
    """Up to `limit` entries, newest first, by keyset on the id: older than `before_id`, or
    the ones just newer than `after_id` (the page before, read backwards). Entries added
    meanwhile never shift a page, since they only take larger ids."""
    query = wanted.where(select(AuditEntry))
    if after_id is not None:
        query = query.where(col(AuditEntry.id) > after_id)
        rows = list(session.exec(query.order_by(col(AuditEntry.id)).limit(limit)))
        return rows[::-1]
    if before_id is not None:
        query = query.where(col(AuditEntry.id) < before_id)
    return list(session.exec(query.order_by(col(AuditEntry.id).desc()).limit(limit)))


def count_entries(session: Session, *, wanted: EntryFilter, newer_than: int | None = None) -> int:
    """How many entries match; with `newer_than`, only those of a larger id."""
    query = wanted.where(select(func.count()).select_from(AuditEntry))
    if newer_than is not None:
        query = query.where(col(AuditEntry.id) > newer_than)
    return int(session.exec(query).one())


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


def last_entry(session: Session, *, action: str, entity_id: int) -> AuditEntry | None:
    """The newest entry of an action on a row (a deleted team's, say), or None."""
    query = (
        select(AuditEntry)
        .where(AuditEntry.action == action, AuditEntry.entity_id == entity_id)
        .order_by(col(AuditEntry.id).desc())
        .limit(1)
    )
    return session.exec(query).first()
