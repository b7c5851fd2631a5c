"""Initiatives with their effort lines and needs."""

from __future__ import annotations

import datetime as dt
from collections import defaultdict
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

from sqlalchemy import Select, delete, insert
from sqlalchemy import inspect as sa_inspect
from sqlalchemy.exc import IntegrityError
from sqlalchemy.orm import make_transient_to_detached
from sqlalchemy.orm.exc import StaleDataError
from sqlmodel import Session, SQLModel, col, func, select

from server.actor import current_actor
from server.errors import (
    ConflictError,
    DeletedError,
    InputError,
    NotFoundError,
    StaleVersionError,
)
from server.message_titles import conflict_with_titles
from server.models import (
    TITLE_MAX,
    AuditEntry,
    EffortLine,
    Initiative,
    Need,
    Period,
    Team,
    utcnow,
)
from server.schemas import (
    EffortIn,
    EffortPublic,
    InitiativeCreate,
    InitiativePublic,
    InitiativeUpdate,
    TeamEffortIn,
    own_effort_refusal,
)
from server.selector import Item, SelectorInputError
from server.selector import check_marks as selector_check_marks
from server.selector.set_names import SetNames, name_key
from server.store import audit
from server.store._common import and_list, first_named, get_or_404
from server.wording import counted, field_label, quoted

BACKLOG = "backlog"


def title_key(title: str) -> str:
    """How titles are compared to find the same one twice, as names and either-or sets are
    (`name_key`): runs of spaces as one, trimmed, ignoring case, accents typed either way and
    invisible characters. Pages show "Fare  rules" and "Fare\u200b rules" alike."""
    return name_key(title)


def _in_period(period_id: int | None) -> Any:
    """Rows of the period, or of the backlog for None."""
    if period_id is None:
        return col(Initiative.period_id).is_(None)
    return col(Initiative.period_id) == period_id


def _titles_query(team_id: int, period_id: int | None) -> Any:
    """The titles of the team's initiatives in the period, or in its backlog for None."""
    return select(Initiative.title).where(Initiative.team_id == team_id, _in_period(period_id))


def _set_spellings(
    session: Session, team_id: int, period_id: int | None, *, excluding: int | None = None
) -> SetNames:
    """The either-or set names the team uses in the period: a set is one set however its name
    is typed ("Search", "search "), so new members take the stored spelling.
    `excluding`: an initiative whose own name does not count (the one being changed)."""
    query = (
        select(Initiative.either_or)
        .where(Initiative.team_id == team_id, _in_period(period_id))
        .where(col(Initiative.either_or).is_not(None))
        .where(col(Initiative.id) != (excluding or 0))
        .order_by(col(Initiative.id))
    )
    return SetNames(name for name in session.exec(query) if name is not None)


def title_keys_in(session: Session, *, team_id: int, period_id: int | None) -> frozenset[str]:
    """The `title_key` of each of the team's initiatives in the period (None: the backlog)."""
    return frozenset(title_key(title) for title in session.exec(_titles_query(team_id, period_id)))


def title_clash_message(titles: Sequence[str], *, team_name: str, period_name: str | None) -> str:
    """Why these titles are refused: the team already has them in that period (or backlog)."""
    where = (
        f"team {team_name} for {period_name}" if period_name else f"the backlog of team {team_name}"
    )
    named = and_list(first_named([f"“{title}”" for title in titles], _LISTED))
    if len(titles) == 1:
        return f"{named} already exists in {where}; choose another title."
    return f"{named} already exist in {where}; choose other titles."


@dataclass(frozen=True)
class TitlesInUse:
    """One team's titles in one period (or its backlog), to refuse a new row before storing it."""

    keys: frozenset[str]
    team_name: str
    period_name: str | None  # None: the backlog

    def clash(self, title: str) -> str | None:
        """The refusal of `title` if the team already has it there, else None."""
        if title_key(title) not in self.keys:
            return None
        return title_clash_message(
            [title.strip()], team_name=self.team_name, period_name=self.period_name
        )


def titles_in_use(session: Session, *, team_id: int, period_id: int | None) -> TitlesInUse:
    team = get_or_404(session, Team, team_id, "team")
    period = None if period_id is None else get_or_404(session, Period, period_id, "period")
    return TitlesInUse(
        keys=title_keys_in(session, team_id=team_id, period_id=period_id),
        team_name=team.name,
        period_name=period.name if period is not None else None,
    )


def title_clash(
    session: Session,
    wanted: Sequence[tuple[int, int | None, str]],
    *,
    ignore_id: int | None = None,
) -> ConflictError | None:
    """The refusal of (team_id, period_id, title) rows whose title the team already has in
    the period, or None.

    Two rows of one title in one plan cannot be told apart in plans, explanations, exports and
    comparisons. ignore_id is the initiative being changed: its own title is no clash. The
    refusal is a ConflictError on field "title", naming the clashing titles of the first place
    that has any.
    """
    by_place: dict[tuple[int, int | None], list[str]] = defaultdict(list)
    for team_id, period_id, title in wanted:
        by_place[(team_id, period_id)].append(title)
    for (team_id, period_id), titles in by_place.items():
        query = _titles_query(team_id, period_id)
        if ignore_id is not None:
            query = query.where(col(Initiative.id) != ignore_id)
        taken = {title_key(title) for title in session.exec(query)}
        clashes = [title for title in titles if title_key(title) in taken]
        if clashes:
            team = get_or_404(session, Team, team_id, "team")
            period = None if period_id is None else get_or_404(session, Period, period_id, "period")
            return ConflictError(
                title_clash_message(
                    clashes, team_name=team.name, period_name=period.name if period else None
                ),
                field="title",
            )
    return None


def _refuse_title_clashes(
    session: Session,
    wanted: Sequence[tuple[int, int | None, str]],
    *,
    ignore_id: int | None = None,
) -> None:
    """The check before writing: raise `title_clash`'s refusal, if any."""
    refusal = title_clash(session, wanted, ignore_id=ignore_id)
    if refusal is not None:
        raise refusal


def refused_title_clash(
    session: Session,
    exc: IntegrityError,
    wanted: Sequence[tuple[int, int | None, str]],
    *,
    ignore_id: int | None = None,
) -> ConflictError:
    """The refusal for a write the title indexes turned down (`exc`, raised at the write).

    Another writer stored one of the titles after this one's check read the titles: the
    session is rolled back (nothing of this transaction stays) and the check runs again, so
    the refusal is the one the check gives when it sees the clash first (should the other row
    be gone again by then, the titles of the first place are named). An IntegrityError of
    another constraint is a NotFoundError when the team or period went meanwhile, else raised
    again as it was.
    """
    session.rollback()
    if not _is_title_index(exc):
        # A team or period deleted since the write looked it up: the 404 of asking again.
        for team_id, period_id, _ in wanted[:1]:
            get_or_404(session, Team, team_id, "team")
            if period_id is not None:
                get_or_404(session, Period, period_id, "period")
        raise exc
    refusal = title_clash(session, wanted, ignore_id=ignore_id)
    if refusal is not None:
        return refusal
    team_id, period_id, _ = wanted[0]
    team = get_or_404(session, Team, team_id, "team")
    period = None if period_id is None else get_or_404(session, Period, period_id, "period")
    titles = [title for t, p, title in wanted if (t, p) == (team_id, period_id)]
    return ConflictError(
        title_clash_message(
            titles, team_name=team.name, period_name=period.name if period else None
        ),
        field="title",
    )


def _is_title_index(exc: IntegrityError) -> bool:
    """Whether the database refused the write for the title indexes (SQLite names the
    columns, PostgreSQL the index; both mention title_key)."""
    return "title_key" in str(exc.orig)


def parted_titles(rows: Iterable[tuple[int, int, int | None, str]]) -> dict[int, str]:
    """New titles for the later twins among (id, team_id, period_id, title) rows.

    The rule of migration 0003, for rows written past the store (a workspace restore): in each
    team and period the lowest id keeps its title, and each later row of the same `title_key`
    gets " (2)", " (3)", ... appended, the first number whose title is still free there (the
    title shortened to fit TITLE_MAX first). Returns id -> new title for the renamed rows.
    """
    rows = sorted(rows)
    taken: dict[tuple[int, int | None], set[str]] = defaultdict(set)
    for _, team_id, period_id, title in rows:
        taken[(team_id, period_id)].add(title_key(title))
    kept: dict[tuple[int, int | None], set[str]] = defaultdict(set)
    renamed: dict[int, str] = {}
    for row_id, team_id, period_id, title in rows:
        place, key = (team_id, period_id), title_key(title)
        if key not in kept[place]:
            kept[place].add(key)
            continue
        number = 2
        while True:
            suffix = f" ({number})"
            candidate = title[: TITLE_MAX - len(suffix)].rstrip() + suffix
            if title_key(candidate) not in taken[place]:
                break
            number += 1
        taken[place].add(title_key(candidate))
        kept[place].add(title_key(candidate))
        renamed[row_id] = candidate
    return renamed


def _refuse_repeated_titles(initiatives_in: Sequence[InitiativeCreate]) -> None:
    """Refuse a batch that holds one title twice for the same team and period."""
    first: dict[tuple[int, int | None, str], int] = {}
    for number, item in enumerate(initiatives_in, start=1):
        key = (item.team_id, item.period_id, title_key(item.title))
        if key in first:
            raise InputError(
                f"title: Rows {first[key]} and {number} have the same title “{item.title}”; "
                "give each initiative its own title.",
                field="title",
            )
        first[key] = number


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


def load_records(
    session: Session, rows: Sequence[Initiative], *, ids_from: Select[Any] | None = None
) -> list[InitiativeRecord]:
    """Attach effort lines and needs to rows with two queries, whatever their number.

    ids_from, a query of the rows' ids, filters the two queries by a subquery instead of a
    list of ids: a long IN list costs more to send than the lines it finds.
    """
    records = [InitiativeRecord(row=row) for row in rows]
    if not records:
        return records
    wanted: Any = ids_from if ids_from is not None else [row.id for row in rows]
    by_id = {record.row.id: record for record in records}
    # The subquery runs again with each query: under READ COMMITTED (PostgreSQL) it can find
    # an initiative another writer committed after the rows were read. Its lines and needs
    # belong to a row this read does not hold, so they are skipped.
    lines = select(EffortLine).where(col(EffortLine.initiative_id).in_(wanted))
    for line in session.exec(lines):
        record = by_id.get(line.initiative_id)
        if record is not None:
            record.efforts[line.team_id] = line
    for need in session.exec(select(Need).where(col(Need.initiative_id).in_(wanted))):
        record = by_id.get(need.initiative_id)
        if record is not None:
            record.needs.append(need.needed_id)
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
    ids = query.with_only_columns(col(Initiative.id)).order_by(None)
    return load_records(session, list(session.exec(query)), ids_from=ids)


def get_initiative(session: Session, *, initiative_id: int) -> InitiativeRecord:
    row = session.get(Initiative, initiative_id)
    if row is None:
        raise deleted_refusal(session, initiative_id) or NotFoundError(
            f"No initiative with id {initiative_id}.", field="initiative_id"
        )
    return load_records(session, [row])[0]


def deleted_refusal(session: Session, initiative_id: int) -> DeletedError | None:
    """An initiative no longer stored, named from its deletion's audit entry (None: no entry,
    so there never was one of that id)."""
    query = (
        select(AuditEntry)
        .where(AuditEntry.entity == "initiative", AuditEntry.entity_id == initiative_id)
        .where(AuditEntry.action == "initiative.delete")
        .order_by(col(AuditEntry.id).desc())
        .limit(1)
    )
    gone = session.exec(query).first()
    if gone is None:
        return None
    title = str((gone.before or {}).get("title") or f"initiative {initiative_id}")
    me = current_actor.get()
    who = "you, on another page" if me and gone.actor == me else "someone else"
    return DeletedError(
        f"“{title}” was deleted by {who}.",
        field="initiative_id",
        title=title,
        team_id=gone.team_id,
    )


# Ids per IN (...) list: far below the bound-parameter limits of SQLite and PostgreSQL.
_IN_CHUNK = 500
# Bad rows of a batch named one by one in the error; the rest are counted.
_LISTED = 10


def _existing_ids(
    session: Session, model: type[Team | Period | Initiative], ids: Iterable[int]
) -> set[int]:
    """Which of `ids` have a row in `model`'s table: one query per chunk, not one per id."""
    wanted = sorted(set(ids))
    found: set[int] = set()
    id_column = col(model.id)
    for start in range(0, len(wanted), _IN_CHUNK):
        chunk = wanted[start : start + _IN_CHUNK]
        found.update(session.exec(select(id_column).where(id_column.in_(chunk))))
    return found


@dataclass(frozen=True)
class _References:
    """The rows that exist among everything a batch of initiatives refers to."""

    teams: set[int]
    periods: set[int]
    initiatives: set[int]

    @classmethod
    def load(
        cls,
        session: Session,
        *,
        team_ids: Iterable[int],
        period_ids: Iterable[int],
        initiative_ids: Iterable[int],
    ) -> _References:
        return cls(
            teams=_existing_ids(session, Team, team_ids),
            periods=_existing_ids(session, Period, period_ids),
            initiatives=_existing_ids(session, Initiative, initiative_ids),
        )


def _reference_error(
    refs: _References,
    *,
    team_id: int,
    period_id: int | None,
    other_efforts: Iterable[TeamEffortIn],
    needs: Iterable[int],
    initiative_id: int | None,
) -> InputError | None:
    """The first reference of one initiative that points at nothing, in the order named."""
    if team_id not in refs.teams:
        return InputError(f"team_id: No team with id {team_id}.", field="team_id")
    if period_id is not None and period_id not in refs.periods:
        return InputError(f"period_id: No period with id {period_id}.", field="period_id")
    seen = {team_id}
    for line in other_efforts:
        if line.team_id in seen:
            return InputError(
                f"other_efforts: Team {line.team_id} is listed twice (or is the owning team).",
                field="other_efforts",
            )
        if line.team_id not in refs.teams:
            return InputError(
                f"other_efforts: No team with id {line.team_id}.", field="other_efforts"
            )
        seen.add(line.team_id)
    for needed_id in needs:
        if needed_id == initiative_id:
            return InputError("needs: An initiative cannot need itself.", field="needs")
        if needed_id not in refs.initiatives:
            return InputError(f"needs: No initiative with id {needed_id}.", field="needs")
    return None


def _check_references(
    session: Session,
    *,
    team_id: int,
    period_id: int | None,
    other_efforts: Iterable[TeamEffortIn],
    needs: Iterable[int],
    initiative_id: int | None,
) -> None:
    other_efforts, needs = list(other_efforts), list(needs)
    refs = _References.load(
        session,
        team_ids=[team_id, *(line.team_id for line in other_efforts)],
        period_ids=[] if period_id is None else [period_id],
        initiative_ids=needs,
    )
    error = _reference_error(
        refs,
        team_id=team_id,
        period_id=period_id,
        other_efforts=other_efforts,
        needs=needs,
        initiative_id=initiative_id,
    )
    if error is not None:
        raise error


def _check_batch(session: Session, initiatives_in: Sequence[InitiativeCreate]) -> None:
    """Check every new initiative's references with a few queries for the whole batch."""
    refs = _References.load(
        session,
        team_ids=[
            team_id
            for item in initiatives_in
            for team_id in (item.team_id, *(line.team_id for line in item.other_efforts))
        ],
        period_ids=[item.period_id for item in initiatives_in if item.period_id is not None],
        initiative_ids=[needed for item in initiatives_in for needed in item.needs],
    )
    errors: list[tuple[int, InputError]] = []
    for number, item in enumerate(initiatives_in, start=1):
        error = _reference_error(
            refs,
            team_id=item.team_id,
            period_id=item.period_id,
            other_efforts=item.other_efforts,
            needs=item.needs,
            initiative_id=None,
        )
        if error is not None:
            errors.append((number, error))
    if not errors:
        return
    if len(initiatives_in) == 1:
        raise errors[0][1]
    # Every bad row, by its number in the batch (the first few, then how many more).
    named = " ".join(f"Row {number}, {error.message}" for number, error in errors[:_LISTED])
    more = f" And {counted(len(errors) - _LISTED, 'more row')}." if len(errors) > _LISTED else ""
    raise InputError(f"{named}{more}", field=errors[0][1].field)


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
    return " → ".join(quoted(rows.get(i, str(i))) for i in ids)


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


def _next_positions(session: Session, team_ids: Iterable[int]) -> dict[int, int]:
    """The last position used in each team (0 for none): new initiatives go after it."""
    teams = sorted(set(team_ids))
    last = dict.fromkeys(teams, 0)
    for start in range(0, len(teams), _IN_CHUNK):
        query = (
            select(Initiative.team_id, func.max(Initiative.position))
            .where(col(Initiative.team_id).in_(teams[start : start + _IN_CHUNK]))
            .group_by(Initiative.team_id)
        )
        for team_id, position in session.exec(query):
            last[team_id] = int(position or 0)
    return last


def create_initiative(
    session: Session, *, initiative_in: InitiativeCreate, commit: bool = True, actor: str = ""
) -> InitiativeRecord:
    """Store a new initiative; with commit=False the caller commits."""
    record = create_initiatives(session, initiatives_in=[initiative_in], actor=actor)[0]
    if commit:
        session.commit()
    return record


def _insert_rows(
    session: Session, rows: Sequence[SQLModel], key: tuple[str, ...], *, with_ids: bool = False
) -> None:
    """INSERT new rows of one table in batches and make them rows of the session.

    The session's own flush sends one INSERT per row on SQLite, to read each new id back in
    the order of the rows. Here the rows go as one executemany, which SQLAlchemy sends as
    multi-row INSERT ... VALUES (...), (...) RETURNING statements ("insertmanyvalues", up to
    1,000 rows each and within the drivers' parameter limits). The RETURNING rows carry `key`,
    columns that are unique among `rows`, so the ids are matched back whatever order the
    database returns them in. The rows keep the values they were built with (no read-back)
    and join the session as persistent, clean rows, as if they had been flushed. with_ids:
    the rows carry their ids (initiatives brought back), which are sent too.
    """
    if not rows:
        return
    table = type(rows[0]).__table__  # type: ignore[attr-defined]
    columns = [column.key for column in table.columns if with_ids or not column.primary_key]
    statement = insert(table).returning(table.c.id, *(table.c[name] for name in key))
    values = [{name: getattr(row, name) for name in columns} for row in rows]
    ids = {tuple(found[1:]): found[0] for found in session.exec(statement, params=values)}
    for row in rows:
        row.id = ids[tuple(getattr(row, name) for name in key)]  # type: ignore[attr-defined]
        make_transient_to_detached(row)
        # SQLite may reuse the id of a row a database cascade deleted; a stale copy of that
        # row still held by the session would clash with the new one, so it is dropped.
        stale = session.identity_map.get(sa_inspect(row).key)
        if stale is not None:
            session.expunge(stale)
        session.add(row)


def _store_lines_and_needs(
    session: Session, stored: Sequence[tuple[Initiative, InitiativeCreate, list[int]]]
) -> list[InitiativeRecord]:
    """For rows just inserted (row, what it was made from, its needs): insert every team's
    effort line and the needs in batches, check the marks, and return the records."""
    records: list[InitiativeRecord] = []
    for db_row, item, needs in stored:
        record = InitiativeRecord(row=db_row, needs=needs)
        for team_id, effort in [(db_row.team_id, item.effort)] + [
            (line.team_id, line) for line in item.other_efforts
        ]:
            record.efforts[team_id] = EffortLine(
                initiative_id=db_row.id or 0,
                team_id=team_id,
                likely=effort.likely,
                low=effort.low,
                high=effort.high,
            )
        records.append(record)
    lines = [line for record in records for line in record.efforts.values()]
    _insert_rows(session, lines, ("initiative_id", "team_id"))
    add_needs(session, needs=[(r.row.id or 0, n) for r in records for n in r.needs])
    check_marks(session, records)
    return records


def create_initiatives(
    session: Session, *, initiatives_in: Sequence[InitiativeCreate], actor: str = ""
) -> list[InitiativeRecord]:
    """Store new initiatives, in order, with one `initiative.create` audit entry each.

    Every row's references are checked before anything is written; a bad one raises (naming
    every bad row when there are several), and so does a title the team already has in the
    period or one the batch holds twice there. Then a fixed number of statements per 1,000 rows,
    not per row: multi-row INSERTs of the initiatives, their effort lines and needs, and one
    executemany of the audit entries. Nothing is committed: the caller commits, so a bulk
    import stays all or nothing.
    """
    if not initiatives_in:
        return []
    _check_batch(session, initiatives_in)
    _refuse_repeated_titles(initiatives_in)
    wanted = [(item.team_id, item.period_id, item.title) for item in initiatives_in]
    _refuse_title_clashes(session, wanted)
    positions = _next_positions(session, (item.team_id for item in initiatives_in))
    spellings: dict[tuple[int, int | None], SetNames] = {}
    rows: list[Initiative] = []
    for item in initiatives_in:
        either_or = item.either_or
        if either_or is not None:
            place = (item.team_id, item.period_id)
            if place not in spellings:
                spellings[place] = _set_spellings(session, *place)
            either_or = spellings[place].spelling(either_or)
        positions[item.team_id] += 1  # unique in the team, so (team_id, position) finds the id
        rows.append(
            Initiative(
                team_id=item.team_id,
                period_id=item.period_id,
                title=item.title,
                notes=item.notes,
                value=item.value,
                confidence=item.confidence,
                state=item.state,
                either_or=either_or,
                position=positions[item.team_id],
                version=1,
            )
        )
    try:
        _insert_rows(session, rows, ("team_id", "position"))
    except IntegrityError as exc:  # a title stored by another writer since the check
        raise refused_title_clash(session, exc, wanted) from exc
    records = _store_lines_and_needs(
        session,
        [
            (db_row, item, list(dict.fromkeys(item.needs)))
            for db_row, item in zip(rows, initiatives_in, strict=True)
        ],
    )
    # Built from what was stored, so the entries need no read-back of the rows.
    entries = [
        audit.entry(
            actor=actor,
            action="initiative.create",
            entity="initiative",
            entity_id=record.row.id,
            team_id=record.row.team_id,
            summary=f"Added “{record.row.title}”",
            after=record.to_public().model_dump(mode="json"),
        )
        for record in records
    ]
    audit.record_many(session, entries)
    return records


def check_marks(
    session: Session, records: Iterable[InitiativeRecord], *, field: str | None = None
) -> None:
    """Refuse pins, rule-outs, needs and either-or sets that no plan could honour.

    Run after writing the initiatives, before the commit: each plan they take part in (their
    own team's and every team they carry effort for, in their period) is reloaded and checked
    as the selector would check it, with the needs inside that plan. Raises InputError naming
    the initiatives by title; field, when given, is the one the message belongs to (e.g. the
    state someone just set), else the selector's own (either_or or needs).
    """
    _check_plans(session, _plans_of(records), field)


def _plans_of(records: Iterable[InitiativeRecord]) -> set[tuple[int, int]]:
    """The (team, period) plans these initiatives take part in."""
    return {
        (team_id, record.row.period_id)
        for record in records
        if record.row.period_id is not None
        for team_id in record.efforts
    }


def _check_plans(session: Session, plans: set[tuple[int, int]], field: str | None) -> None:
    for team_id, period_id in sorted(plans):
        records = list_initiatives(
            session, team_id=team_id, period_id=period_id, involving_team=True
        )
        inside = {str(r.row.id) for r in records}
        items = [
            Item(
                key=str(r.row.id),
                effort=1.0,
                value=1.0,
                pinned=r.row.state == "pinned",
                ruled_out=r.row.state == "ruled_out",
                needs=tuple(str(n) for n in r.needs if str(n) in inside),
                either_or=r.row.either_or,
            )
            for r in records
        ]
        try:
            selector_check_marks(items)
        except SelectorInputError as exc:
            titles = {str(r.row.id): r.row.title for r in records}
            raise InputError(
                conflict_with_titles(exc.message, titles), field=field or exc.field
            ) from exc


def add_needs(session: Session, *, needs: Iterable[tuple[int, int]]) -> None:
    """Store (initiative_id, needed_id) pairs in bulk, e.g. between the rows of one import.

    The caller has checked them: both ends exist and they close no cycle. Repeated pairs are
    stored once.
    """
    pairs = list(dict.fromkeys(needs))
    rows = [Need(initiative_id=initiative_id, needed_id=needed) for initiative_id, needed in pairs]
    _insert_rows(session, rows, ("initiative_id", "needed_id"))


def update_initiative(
    session: Session, *, initiative_id: int, initiative_in: InitiativeUpdate, actor: str = ""
) -> InitiativeRecord:
    """Apply a change based on `initiative_in.version`; refuse it if the row moved on."""
    record = get_initiative(session, initiative_id=initiative_id)
    db_row = record.row
    if initiative_in.version > db_row.version:
        raise StaleVersionError(
            f"This initiative is at version {db_row.version}; there is no version "
            f"{initiative_in.version} yet. Your values were not saved; read the current ones "
            "and apply your change to them.",
            current=record.to_public().model_dump(mode="json"),
        )
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
    effort = initiative_in.effort
    if effort is not None and effort.team_id not in (None, db_row.team_id):
        raise InputError(
            f"effort.team_id: {own_effort_refusal(effort.team_id, db_row.team_id)}",
            field="effort.team_id",
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
    title = initiative_in.title if "title" in changes and initiative_in.title else db_row.title
    # Only a new title or period can make a clash; the title indexes refuse one that another
    # writer makes between this check and the flush below.
    wanted = [(db_row.team_id, period_id, title)]
    if period_id != db_row.period_id or title_key(title) != title_key(db_row.title):
        _refuse_title_clashes(session, wanted, ignore_id=initiative_id)
    if needs is not None:
        cycle = _needs_cycle(session, initiative_id, needs)
        if cycle:
            raise InputError(
                f"needs: This would make a needs cycle: {_titles(session, cycle)}.", field="needs"
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
        if db_row.either_or is not None and changes & {"either_or", "period_id"}:
            spellings = _set_spellings(
                session, db_row.team_id, db_row.period_id, excluding=initiative_id
            )
            db_row.either_or = spellings.spelling(db_row.either_or)
        if "effort" in changes and initiative_in.effort is not None:
            _set_effort(session, db_row, db_row.team_id, initiative_in.effort)
        if other is not None:
            _replace_other_efforts(session, db_row, other)
        if needs is not None:
            _replace_needs(session, db_row, needs)
        db_row.updated_at = utcnow()  # also makes the row dirty, so its version is bumped
        session.add(db_row)
    try:
        try:
            session.flush()
        except IntegrityError as exc:  # a title stored by another writer since the check
            raise refused_title_clash(session, exc, wanted, ignore_id=initiative_id) from exc
        stored = get_initiative(session, initiative_id=initiative_id)
        if changes & {"state", "either_or", "needs", "period_id", "other_efforts"}:
            try:
                check_marks(session, [stored], field="state" if "state" in changes else None)
            except InputError:
                session.rollback()
                raise
        after = stored.to_public().model_dump(mode="json")
        if not _changed(after, before):
            # Saved unchanged: no new version (a colleague's copy stays current), no entry.
            session.rollback()
            return get_initiative(session, initiative_id=initiative_id)
        audit.record(
            session,
            actor=actor,
            action="initiative.update",
            entity="initiative",
            entity_id=initiative_id,
            team_id=db_row.team_id,
            summary=_change_summary(db_row.title, before, after),
            before=_changed(before, after),
            after=_changed(after, before),
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


def needs_from_outside(session: Session, rows: Sequence[Initiative]) -> list[str]:
    """Say which initiatives outside `rows` need one of them: one clause per needed row.

    Deleting `rows` would make the database drop those needs without a version step or an
    audit entry, and the dependants could then be chosen without what they need; so deletes
    are refused while this is not empty. Needs among `rows` themselves go with them.
    """
    doomed = {row.id or 0: row for row in rows}
    ids = sorted(doomed)
    needed_by: dict[int, list[Initiative]] = defaultdict(list)
    for start in range(0, len(ids), _IN_CHUNK):
        query = (
            select(Need.needed_id, Initiative)
            .join(Initiative, col(Initiative.id) == Need.initiative_id)
            .where(col(Need.needed_id).in_(ids[start : start + _IN_CHUNK]))
        )
        for needed_id, dependant in session.exec(query):
            if dependant.id not in doomed:
                needed_by[needed_id].append(dependant)
    if not needed_by:
        return []
    # Another team's dependant is named with its team, or it is hard to find.
    foreign = {
        dependant.team_id
        for needed_id, dependants in needed_by.items()
        for dependant in dependants
        if dependant.team_id != doomed[needed_id].team_id
    }
    teams = {
        team.id: team.name
        for team in session.exec(select(Team).where(col(Team.id).in_(sorted(foreign))))
    }
    parts = []
    for needed_id in ids:
        owner = doomed[needed_id].team_id
        # The owning team's dependants first, each team's in its list order.
        dependants = sorted(
            needed_by.get(needed_id, []),
            key=lambda d: (d.team_id != owner, d.team_id, d.position, d.id or 0),
        )
        if not dependants:
            continue
        names = [
            quoted(d.title) + (f" (team {teams[d.team_id]})" if d.team_id in teams else "")
            for d in dependants
        ]
        parts.append(f"“{doomed[needed_id].title}” is needed by {and_list(first_named(names))}")
    return parts


def delete_needs_among(session: Session, initiative_ids: Iterable[int]) -> None:
    """Delete the needs between these initiatives, before the initiatives themselves.

    A need's needed_id is ON DELETE RESTRICT: the database refuses to delete an initiative
    that another one needs. Rows deleted together may need each other; those needs go first.
    A need from outside the rows is left, so the database refuses one that another writer
    added after the store's check.
    """
    ids = sorted(set(initiative_ids))
    doomed = set(ids)
    among: list[int] = []
    for start in range(0, len(ids), _IN_CHUNK):
        query = select(Need.id, Need.initiative_id).where(
            col(Need.needed_id).in_(ids[start : start + _IN_CHUNK])
        )
        among.extend(need_id for need_id, dependant in session.exec(query) if dependant in doomed)
    for start in range(0, len(among), _IN_CHUNK):
        session.exec(delete(Need).where(col(Need.id).in_(among[start : start + _IN_CHUNK])))


def needed_refusal(session: Session, rows: Sequence[Initiative]) -> ConflictError | None:
    """The refusal to delete `rows` while an initiative not among them needs one, or None."""
    needed = needs_from_outside(session, rows)
    if not needed:
        return None
    advice = "remove those needs" if len(needed) > 1 else "remove it from their needs"
    return ConflictError(f"{'; '.join(needed)}; {advice} first.", field="initiative_id")


def _refuse_needed(session: Session, rows: Sequence[Initiative]) -> None:
    """The check before deleting: raise `needed_refusal`'s refusal, if any."""
    refusal = needed_refusal(session, rows)
    if refusal is not None:
        raise refusal


def _still_stored(session: Session, ids: Iterable[int]) -> list[Initiative]:
    rows = (session.get(Initiative, row_id) for row_id in ids)
    return [row for row in rows if row is not None]


def delete_initiatives(session: Session, *, initiative_ids: Sequence[int], actor: str = "") -> None:
    """Delete initiatives together, with an `initiative.delete` audit entry each, in one commit.

    Refused, with nothing deleted, while an initiative not among them needs one of them: by
    the check here, and by the database (needs are ON DELETE RESTRICT) when another writer
    adds such a need between the check and the commit; the refusal is the same.
    """
    records = [get_initiative(session, initiative_id=i) for i in dict.fromkeys(initiative_ids)]
    _refuse_needed(session, [record.row for record in records])
    ids = [record.row.id or 0 for record in records]
    versions = {record.row.id or 0: record.row.version for record in records}
    for record in records:
        audit.record(
            session,
            actor=actor,
            action="initiative.delete",
            entity="initiative",
            entity_id=record.row.id,
            team_id=record.row.team_id,
            summary=f"Deleted “{record.row.title}”",
            # With its place in the team's list, so an undo puts it back there.
            before=record.to_public().model_dump(mode="json") | {"position": record.row.position},
        )
    delete_needs_among(session, ids)
    for record in records:
        session.delete(record.row)
    try:
        session.commit()
    except IntegrityError as exc:  # a need added by another writer since the check
        session.rollback()
        refusal = needed_refusal(session, _still_stored(session, ids))
        if refusal is None:
            raise
        raise refusal from exc
    except StaleDataError as exc:  # changed or deleted by another writer since it was read
        session.rollback()
        raise changed_while_deleting(session, versions) from exc


def changed_while_deleting(session: Session, versions: Mapping[int, int]) -> ConflictError:
    """Why deleting initiatives read at `versions` was refused: another writer deleted one of
    them meanwhile (the 404 a later request would get), or changed one, so the audit entry
    would not hold what was deleted. Nothing was deleted."""
    changed = []
    for initiative_id, version in versions.items():
        row = get_initiative(session, initiative_id=initiative_id).row
        if row.version != version:
            changed.append(f"{quoted(row.title)} (now version {row.version})")
    return ConflictError(
        f"Someone else changed {and_list(changed or ['an initiative'])} while it was being "
        "deleted. Nothing was deleted; look at it again and delete it again if it should "
        "still go.",
        field="initiative_id",
    )


def delete_initiative(session: Session, *, initiative_id: int, actor: str = "") -> None:
    """Delete one initiative; refused while another initiative needs it."""
    delete_initiatives(session, initiative_ids=[initiative_id], actor=actor)


_UNTRACKED = {"version", "updated_at", "created_at"}


def _changed(values: dict[str, Any], other: dict[str, Any]) -> dict[str, Any]:
    """The fields of `values` that differ from `other` (what an edit changed)."""
    return {k: v for k, v in values.items() if k not in _UNTRACKED and other.get(k) != v}


def field_in_words(name: str) -> str:
    """An initiative's field as the pages name it ("period", not "period_id"), for the
    summaries the audit trail and undo show; they have always said "value", which the
    Changes list's columns call "value score"."""
    return "value" if name == "value" else field_label(name)


def _change_summary(title: str, before: dict[str, Any], after: dict[str, Any]) -> str:
    fields = sorted(field_in_words(name) for name in _changed(after, before))
    return f"Changed {and_list(fields) if fields else 'nothing'} of “{title}”"


# --- bringing deleted initiatives back under their own ids ---------------------------------


@dataclass(frozen=True)
class Restoring:
    """A deleted initiative to store again: its values, and the identity it had."""

    initiative_id: int
    initiative_in: InitiativeCreate
    position: int | None = None  # None: after the team's last initiative
    created_at: dt.datetime | None = None
    version: int = 1  # the version it had; it comes back one step on, so open forms notice


def restore_initiatives(
    session: Session, *, restoring: Sequence[Restoring], actor: str = ""
) -> list[InitiativeRecord]:
    """Store deleted initiatives again, each under the id it had where that id is free.

    Deleting an initiative removes its row, and the database's cascades take its effort lines
    (every team's) and its own needs with it; needs of others on it are refused beforehand
    (`needs_from_outside`). So the row, those lines and those needs are what comes back, and
    everything that names the initiative by id (scenarios' forced lists, saved plans, other
    initiatives' needs) points at it again. An explicit id does not move PostgreSQL's
    sequence, which has passed it already, and SQLite's initiative table is AUTOINCREMENT
    (migration 0005), so ids are not handed out twice; should the id be taken anyway (a row
    written past the store), the initiative comes back under a new id (the returned record
    says which). The references, titles and marks are checked as
    for new initiatives, in one batch; one `initiative.restore` audit entry each; no commit.
    """
    if not restoring:
        return []
    items = [r.initiative_in for r in restoring]
    # Needs on initiatives restored in the same batch are stored with them, not checked first.
    batch = {r.initiative_id for r in restoring}
    _check_batch(
        session,
        [i.model_copy(update={"needs": [n for n in i.needs if n not in batch]}) for i in items],
    )
    _refuse_repeated_titles(items)
    _refuse_title_clashes(session, [(i.team_id, i.period_id, i.title) for i in items])
    taken = _existing_ids(session, Initiative, [r.initiative_id for r in restoring])
    positions = _next_positions(session, (item.team_id for item in items))
    kept: list[Initiative] = []
    renewed: list[Initiative] = []
    rows: list[Initiative] = []
    for r in restoring:
        item = r.initiative_in
        either_or = item.either_or
        if either_or is not None:
            either_or = _set_spellings(session, item.team_id, item.period_id).spelling(either_or)
        position = r.position
        if position is None:
            positions[item.team_id] += 1
            position = positions[item.team_id]
        free = r.initiative_id not in taken
        row = Initiative(
            id=r.initiative_id if free else None,
            team_id=item.team_id,
            period_id=item.period_id,
            title=item.title,
            notes=item.notes,
            value=item.value,
            confidence=item.confidence,
            state=item.state,
            either_or=either_or,
            position=position,
            version=r.version + 1,
            created_at=r.created_at or utcnow(),
        )
        (kept if free else renewed).append(row)
        rows.append(row)
    _insert_rows(session, kept, ("id",), with_ids=True)
    for row in renewed:  # rare: one at a time, as positions of restored rows may repeat
        _insert_rows(session, [row], ("team_id", "position"))
    new_id = {r.initiative_id: row.id or 0 for r, row in zip(restoring, rows, strict=True)}
    # A need on another restored initiative follows it to the id it got back.
    records = _store_lines_and_needs(
        session,
        [
            (row, r.initiative_in, [new_id.get(n, n) for n in dict.fromkeys(r.initiative_in.needs)])
            for row, r in zip(rows, restoring, strict=True)
        ],
    )
    audit.record_many(
        session,
        [
            audit.entry(
                actor=actor,
                action="initiative.restore",
                entity="initiative",
                entity_id=record.row.id,
                team_id=record.row.team_id,
                summary=f"Brought back “{record.row.title}”",
                after=record.to_public().model_dump(mode="json")
                | {"restored_from": r.initiative_id},
            )
            for record, r in zip(records, restoring, strict=True)
        ],
    )
    return records


def existing_initiative_ids(session: Session, ids: Iterable[int]) -> set[int]:
    """Which of `ids` name an initiative that is stored now."""
    return _existing_ids(session, Initiative, ids)
