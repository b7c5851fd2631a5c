"""Initiatives with their effort lines and needs."""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from typing import Any

from sqlalchemy.orm.exc import StaleDataError
from sqlmodel import Session, col, func, select

from server.errors import InputError, StaleVersionError
from server.models import EffortLine, Initiative, Need, Period, Team, utcnow
from server.schemas import (
    EffortIn,
    EffortPublic,
    InitiativeCreate,
    InitiativePublic,
    InitiativeUpdate,
    TeamEffortIn,
)
from server.store import audit
from server.store._common import get_or_404

BACKLOG = "backlog"


@dataclass
class InitiativeRecord:
    """An initiative with its effort lines and needs loaded."""

    row: Initiative
    efforts: dict[int, EffortLine] = field(default_factory=dict)  # team_id -> line
    needs: list[int] = field(default_factory=list)

    @property
    def own_effort(self) -> EffortLine:
        return self.efforts[self.row.team_id]

    def to_public(self) -> InitiativePublic:
        row = self.row
        lines = [_effort_public(line) for tid, line in sorted(self.efforts.items())]
        return InitiativePublic(
            id=row.id or 0,
            team_id=row.team_id,
            period_id=row.period_id,
            title=row.title,
            notes=row.notes,
            effort=_effort_public(self.own_effort),
            other_efforts=[line for line in lines if line.team_id != row.team_id],
            value=row.value,
            confidence=row.confidence,
            state=row.state,
            either_or=row.either_or,
            needs=sorted(self.needs),
            version=row.version,
            created_at=row.created_at,
            updated_at=row.updated_at,
        )


def _effort_public(line: EffortLine) -> EffortPublic:
    return EffortPublic(team_id=line.team_id, likely=line.likely, low=line.low, high=line.high)


def load_records(session: Session, rows: Sequence[Initiative]) -> list[InitiativeRecord]:
    """Attach effort lines and needs to rows with two queries, whatever their number."""
    records = [InitiativeRecord(row=row) for row in rows]
    ids = [row.id for row in rows]
    if not ids:
        return records
    by_id = {record.row.id: record for record in records}
    for line in session.exec(select(EffortLine).where(col(EffortLine.initiative_id).in_(ids))):
        by_id[line.initiative_id].efforts[line.team_id] = line
    for need in session.exec(select(Need).where(col(Need.initiative_id).in_(ids))):
        by_id[need.initiative_id].needs.append(need.needed_id)
    return records


def list_initiatives(
    session: Session,
    *,
    team_id: int | None = None,
    period_id: int | str | None = None,
    involving_team: bool = False,
) -> list[InitiativeRecord]:
    """List initiatives; period_id may be BACKLOG for the unscheduled ones.

    With involving_team, a team's list also holds other teams' initiatives that carry effort
    for it (cross-team work).
    """
    query = select(Initiative).order_by(Initiative.position, Initiative.id)
    if team_id is not None:
        if involving_team:
            involved = select(EffortLine.initiative_id).where(EffortLine.team_id == team_id)
            query = query.where((Initiative.team_id == team_id) | col(Initiative.id).in_(involved))
        else:
            query = query.where(Initiative.team_id == team_id)
    if period_id == BACKLOG:
        query = query.where(col(Initiative.period_id).is_(None))
    elif period_id is not None:
        query = query.where(Initiative.period_id == period_id)
    return load_records(session, list(session.exec(query)))


def get_initiative(session: Session, *, initiative_id: int) -> InitiativeRecord:
    row = get_or_404(session, Initiative, initiative_id, "initiative")
    return load_records(session, [row])[0]


def _check_references(
    session: Session,
    *,
    team_id: int,
    period_id: int | None,
    other_efforts: Iterable[TeamEffortIn],
    needs: Iterable[int],
    initiative_id: int | None,
) -> None:
    if session.get(Team, team_id) is None:
        raise InputError(f"team_id: no team with id {team_id}.", field="team_id")
    if period_id is not None and session.get(Period, period_id) is None:
        raise InputError(f"period_id: no period with id {period_id}.", field="period_id")
    seen = {team_id}
    for line in other_efforts:
        if line.team_id in seen:
            raise InputError(
                f"other_efforts: team {line.team_id} is listed twice (or is the owning team).",
                field="other_efforts",
            )
        if session.get(Team, line.team_id) is None:
            raise InputError(
                f"other_efforts: no team with id {line.team_id}.", field="other_efforts"
            )
        seen.add(line.team_id)
    for needed_id in needs:
        if needed_id == initiative_id:
            raise InputError("needs: an initiative cannot need itself.", field="needs")
        if session.get(Initiative, needed_id) is None:
            raise InputError(f"needs: no initiative with id {needed_id}.", field="needs")


def _needs_cycle(session: Session, start_id: int, needs: Iterable[int]) -> list[int] | None:
    """Return a path start -> ... -> start if the new needs would close a cycle."""
    graph: dict[int, list[int]] = defaultdict(list)
    for need in session.exec(select(Need)):
        if need.initiative_id != start_id:
            graph[need.initiative_id].append(need.needed_id)
    graph[start_id] = list(needs)
    stack: list[tuple[int, list[int]]] = [(start_id, [start_id])]
    visited: set[int] = set()
    while stack:
        node, path = stack.pop()
        for nxt in graph.get(node, []):
            if nxt == start_id:
                return [*path, start_id]
            if nxt not in visited:
                visited.add(nxt)
                stack.append((nxt, [*path, nxt]))
    return None


def _titles(session: Session, ids: Iterable[int]) -> str:
    rows = {
        row.id: row.title
        for row in session.exec(select(Initiative).where(col(Initiative.id).in_(list(ids))))
    }
    return " -> ".join(repr(rows.get(i, str(i))) for i in ids)


def _set_effort(session: Session, db_row: Initiative, team_id: int, effort: EffortIn) -> None:
    query = select(EffortLine).where(
        EffortLine.initiative_id == db_row.id, EffortLine.team_id == team_id
    )
    line = session.exec(query).first() or EffortLine(
        initiative_id=db_row.id or 0, team_id=team_id, likely=effort.likely
    )
    line.likely, line.low, line.high = effort.likely, effort.low, effort.high
    session.add(line)


def _replace_other_efforts(session: Session, db_row: Initiative, lines: list[TeamEffortIn]) -> None:
    keep = {line.team_id for line in lines}
    for old in session.exec(select(EffortLine).where(EffortLine.initiative_id == db_row.id)):
        if old.team_id != db_row.team_id and old.team_id not in keep:
            session.delete(old)
    for line in lines:
        _set_effort(session, db_row, line.team_id, line)


def _replace_needs(session: Session, db_row: Initiative, needs: list[int]) -> None:
    wanted = list(dict.fromkeys(needs))
    existing = {
        n.needed_id: n for n in session.exec(select(Need).where(Need.initiative_id == db_row.id))
    }
    for needed_id, old in existing.items():
        if needed_id not in wanted:
            session.delete(old)
    for needed_id in wanted:
        if needed_id not in existing:
            session.add(Need(initiative_id=db_row.id or 0, needed_id=needed_id))


def _next_position(session: Session, team_id: int) -> int:
    query = select(func.max(Initiative.position)).where(Initiative.team_id == team_id)
    return int(session.exec(query).one() or 0) + 1


def create_initiative(
    session: Session, *, initiative_in: InitiativeCreate, commit: bool = True, actor: str = ""
) -> InitiativeRecord:
    """Store a new initiative; with commit=False the caller commits (bulk imports)."""
    _check_references(
        session,
        team_id=initiative_in.team_id,
        period_id=initiative_in.period_id,
        other_efforts=initiative_in.other_efforts,
        needs=initiative_in.needs,
        initiative_id=None,
    )
    db_row = Initiative(
        team_id=initiative_in.team_id,
        period_id=initiative_in.period_id,
        title=initiative_in.title,
        notes=initiative_in.notes,
        value=initiative_in.value,
        confidence=initiative_in.confidence,
        state=initiative_in.state,
        either_or=initiative_in.either_or,
        position=_next_position(session, initiative_in.team_id),
    )
    session.add(db_row)
    session.flush()
    _set_effort(session, db_row, db_row.team_id, initiative_in.effort)
    _replace_other_efforts(session, db_row, initiative_in.other_efforts)
    _replace_needs(session, db_row, initiative_in.needs)
    session.flush()
    created = get_initiative(session, initiative_id=db_row.id or 0)
    audit.record(
        session,
        actor=actor,
        action="initiative.create",
        entity="initiative",
        entity_id=db_row.id,
        team_id=db_row.team_id,
        summary=f"Added “{db_row.title}”",
        after=created.to_public().model_dump(mode="json"),
    )
    if commit:
        session.commit()
    return created


def update_initiative(
    session: Session, *, initiative_id: int, initiative_in: InitiativeUpdate, actor: str = ""
) -> InitiativeRecord:
    """Apply a change based on `initiative_in.version`; refuse it if the row moved on."""
    record = get_initiative(session, initiative_id=initiative_id)
    db_row = record.row
    if initiative_in.version != db_row.version:
        raise StaleVersionError(
            f"This initiative was changed by someone else (now version {db_row.version}, your "
            f"change was based on version {initiative_in.version}). Your values were not saved; "
            "compare them with the current ones and apply again.",
            current=record.to_public().model_dump(mode="json"),
        )
    before = record.to_public().model_dump(mode="json")
    changes = initiative_in.model_fields_set - {"version"}
    needs = initiative_in.needs if "needs" in changes and initiative_in.needs is not None else None
    other = (
        initiative_in.other_efforts
        if "other_efforts" in changes and initiative_in.other_efforts is not None
        else None
    )
    period_id = initiative_in.period_id if "period_id" in changes else db_row.period_id
    _check_references(
        session,
        team_id=db_row.team_id,
        period_id=period_id,
        other_efforts=other or [],
        needs=needs or [],
        initiative_id=initiative_id,
    )
    if needs is not None:
        cycle = _needs_cycle(session, initiative_id, needs)
        if cycle:
            raise InputError(
                f"needs: this would make a needs cycle: {_titles(session, cycle)}.", field="needs"
            )
    # One UPDATE of the row (one version step) however many fields change: no autoflush
    # while the effort lines and needs are queried.
    with session.no_autoflush:
        for name in ("title", "notes", "value", "state"):
            if name in changes and getattr(initiative_in, name) is not None:
                setattr(db_row, name, getattr(initiative_in, name))
        for name in ("period_id", "confidence", "either_or"):  # these may be cleared with null
            if name in changes:
                setattr(db_row, name, getattr(initiative_in, name))
        if "effort" in changes and initiative_in.effort is not None:
            _set_effort(session, db_row, db_row.team_id, initiative_in.effort)
        if other is not None:
            _replace_other_efforts(session, db_row, other)
        if needs is not None:
            _replace_needs(session, db_row, needs)
        db_row.updated_at = utcnow()  # also makes the row dirty, so its version is bumped
        session.add(db_row)
    try:
        session.flush()
        after = get_initiative(session, initiative_id=initiative_id).to_public()
        audit.record(
            session,
            actor=actor,
            action="initiative.update",
            entity="initiative",
            entity_id=initiative_id,
            team_id=db_row.team_id,
            summary=_change_summary(db_row.title, before, after.model_dump(mode="json")),
            before=_changed(before, after.model_dump(mode="json")),
            after=_changed(after.model_dump(mode="json"), before),
        )
        session.commit()
    except StaleDataError as exc:  # another writer got in between our read and our write
        session.rollback()
        current = get_initiative(session, initiative_id=initiative_id)
        raise StaleVersionError(
            "This initiative was changed by someone else while you saved; your values were "
            "not saved. Compare them with the current ones and apply again.",
            current=current.to_public().model_dump(mode="json"),
        ) from exc
    return get_initiative(session, initiative_id=initiative_id)


def delete_initiative(session: Session, *, initiative_id: int, actor: str = "") -> None:
    record = get_initiative(session, initiative_id=initiative_id)
    audit.record(
        session,
        actor=actor,
        action="initiative.delete",
        entity="initiative",
        entity_id=initiative_id,
        team_id=record.row.team_id,
        summary=f"Deleted “{record.row.title}”",
        before=record.to_public().model_dump(mode="json"),
    )
    session.delete(record.row)
    session.commit()


_UNTRACKED = {"version", "updated_at", "created_at"}


def _changed(values: dict[str, Any], other: dict[str, Any]) -> dict[str, Any]:
    """The fields of `values` that differ from `other` (what an edit changed)."""
    return {k: v for k, v in values.items() if k not in _UNTRACKED and other.get(k) != v}


def _change_summary(title: str, before: dict[str, Any], after: dict[str, Any]) -> str:
    fields = sorted(_changed(after, before))
    return f"Changed {', '.join(fields) or 'nothing'} of “{title}”"
