"""Bulk entry (plan CSV import, pasted rows, `create_initiatives`): the work per row is bounded,
counted in SQL statements, and a batch stores the same rows, lines, needs and audit entries as
one-by-one creation, all or nothing."""

from __future__ import annotations

import datetime as dt
from collections.abc import Iterator
from contextlib import contextmanager
from typing import Any

import pytest
from fastapi import FastAPI
from fastapi.testclient import TestClient
from sqlalchemy import delete, event
from sqlmodel import Session, col, func, select

from server.errors import InputError
from server.models import AuditEntry, EffortLine, Initiative, Need
from server.schemas import EffortIn, InitiativeCreate, InitiativeUpdate, TeamEffortIn
from server.store.initiatives import (
    create_initiative,
    create_initiatives,
    get_initiative,
    load_records,
    update_initiative,
)
from tests.factories import make_initiative, make_period, make_team
from tests.plans.conftest import counts

SMALL, LARGE = 20, 200


@contextmanager
def statements(app: FastAPI) -> Iterator[list[str]]:
    """The SQL statements the app's engine sends inside the block (an executemany counts once:
    it is one call to the driver)."""
    seen: list[str] = []

    def note(_conn: Any, _cursor: Any, statement: str, *_rest: Any) -> None:
        seen.append(statement)

    engine = app.state.engine
    event.listen(engine, "before_cursor_execute", note)
    try:
        yield seen
    finally:
        event.remove(engine, "before_cursor_execute", note)


def import_csv(rows: int) -> str:
    """Rows in a plan export's shape; every fourth has three points, every fifth needs the one
    before it."""
    lines = ["capacity_days,100", "", "key,title,low,likely,high,value,state,forced,needs"]
    for k in range(rows):
        low, high = ("1", "4") if k % 4 == 0 else ("", "")
        needs = f"k{k - 1}" if k % 5 == 4 else ""
        forced = "in" if k == 1 else ""
        lines.append(f"k{k},Item {k},{low},2,{high},{k + 1},candidate,{forced},{needs}")
    return "\n".join(lines) + "\n"


def post_import(client: TestClient, team_id: int, period_id: int, rows: int) -> dict[str, Any]:
    response = client.post(
        f"/api/v1/teams/{team_id}/plan-imports",
        json={"period_id": period_id, "csv": import_csv(rows)},
    )
    assert response.status_code == 201, response.text
    return response.json()


def test_import_statements_do_not_grow_with_the_rows(
    app: FastAPI, client: TestClient, session: Session
) -> None:
    period = make_period(session)
    small_team, large_team = make_team(session, "Small"), make_team(session, "Large")
    with statements(app) as small:
        post_import(client, small_team.id or 0, period.id or 0, SMALL)
    with statements(app) as large:
        body = post_import(client, large_team.id or 0, period.id or 0, LARGE)
    assert len(small) > 0
    # One-by-one creation sent about 11 statements per row (2,200 here); batched, the extra
    # 180 rows may cost at most one statement per ten rows.
    assert len(large) - len(small) <= (LARGE - SMALL) // 10, (len(small), len(large))
    assert len(body["initiative_ids"]) == LARGE


def test_paste_statements_do_not_grow_with_the_rows(
    app: FastAPI, form_client: TestClient, session: Session
) -> None:
    period = make_period(session)
    counted = []
    for name, rows in (("Small", SMALL), ("Large", LARGE)):
        team = make_team(session, name)
        text = "\n".join(f"Pasted {k}\t{k % 5 + 1}\t{k + 1}" for k in range(rows))
        with statements(app) as seen:
            response = form_client.post(
                f"/teams/{team.id}/plan/paste",
                data={
                    "csrf_token": form_client.csrf,  # type: ignore[attr-defined]
                    "text": text,
                    "period_id": str(period.id),
                },
                follow_redirects=False,
            )
        assert response.status_code == 303, response.text
        counted.append(len(seen))
        session.expire_all()
        stored = session.exec(
            select(func.count()).select_from(Initiative).where(Initiative.team_id == team.id)
        ).one()
        assert stored == rows
    assert counted[0] > 0
    assert counted[1] - counted[0] <= (LARGE - SMALL) // 10, counted


def test_an_import_stores_every_row_its_lines_needs_and_audit_entry(
    client: TestClient, session: Session
) -> None:
    team, period = make_team(session, "Kiln"), make_period(session)
    make_initiative(session, team, period, "Already there")  # position 1
    body = post_import(client, team.id or 0, period.id or 0, 30)
    ids = body["initiative_ids"]
    assert list(ids) == [f"k{k}" for k in range(30)]  # the file's order
    session.expire_all()
    rows = {
        row.id: row
        for row in session.exec(select(Initiative).where(col(Initiative.id).in_(ids.values())))
    }
    # Positions follow the file after the team's existing initiative.
    assert [rows[ids[f"k{k}"]].position for k in range(30)] == list(range(2, 32))
    assert rows[ids["k7"]].title == "Item 7"
    assert rows[ids["k7"]].value == 8
    lines = {
        line.initiative_id: line
        for line in session.exec(
            select(EffortLine).where(col(EffortLine.initiative_id).in_(ids.values()))
        )
    }
    assert (lines[ids["k0"]].low, lines[ids["k0"]].likely, lines[ids["k0"]].high) == (1, 2, 4)
    assert (lines[ids["k1"]].low, lines[ids["k1"]].high) == (None, None)
    needs = {
        (need.initiative_id, need.needed_id)
        for need in session.exec(select(Need).where(col(Need.initiative_id).in_(ids.values())))
    }
    assert needs == {(ids[f"k{k}"], ids[f"k{k - 1}"]) for k in range(4, 30, 5)}
    assert body["scenario"]["changes"]["forced_in"] == [ids["k1"]]
    entries = session.exec(
        select(AuditEntry)
        .where(
            AuditEntry.action == "initiative.create", col(AuditEntry.entity_id).in_(ids.values())
        )
        .order_by(col(AuditEntry.id))
    ).all()
    assert [e.entity_id for e in entries] == [ids[f"k{k}"] for k in range(30)]
    assert entries[3].summary == "Added “Item 3”"
    assert entries[3].after is not None
    assert entries[3].after["title"] == "Item 3"
    assert entries[3].after["effort"] == {
        "team_id": team.id,
        "likely": 2.0,
        "low": None,
        "high": None,
    }
    assert {e.actor for e in entries} == {"admin"}  # the signed-in account


def _batch(
    team_id: int, other_team_id: int, period_id: int, needed: int, backlog_title: str
) -> list[InitiativeCreate]:
    return [
        InitiativeCreate(
            team_id=team_id,
            period_id=period_id,
            title="Shared gateway",
            notes="with the other team",
            effort=EffortIn(likely=3, low=2, high=6),
            other_efforts=[TeamEffortIn(team_id=other_team_id, likely=1.5)],
            value=20,
            confidence=0.7,
            state="pinned",
            either_or="gateway",
            needs=[needed, needed],  # a repeated need is stored once
        ),
        InitiativeCreate(
            team_id=team_id,
            period_id=None,
            title=backlog_title,
            effort=EffortIn(likely=1),
            value=2,
        ),
    ]


def test_a_batch_stores_what_one_by_one_creation_stores(session: Session) -> None:
    team, other, period, later = (
        make_team(session, "Kiln"),
        make_team(session, "Quay"),
        make_period(session),
        make_period(session, "Sprint 2", dt.date(2027, 3, 15), dt.date(2027, 3, 26)),
    )
    needed = make_initiative(session, team, period, "Foundation").row.id or 0
    one_by_one = [
        create_initiative(session, initiative_in=item)
        for item in _batch(team.id or 0, other.id or 0, period.id or 0, needed, "Backlog item")
    ]
    # The same rows in the next period: in one plan two pinned members of one either-or set
    # would be refused. The backlog row gets another title: the backlog holds a title once.
    batched = create_initiatives(
        session,
        initiatives_in=_batch(team.id or 0, other.id or 0, later.id or 0, needed, "Backlog too"),
        actor="cli",
    )
    session.commit()
    assert [r.row.title for r in batched] == ["Shared gateway", "Backlog too"]
    unstable = {"id", "created_at", "updated_at", "period_id", "title"}

    def stored(initiative_id: int) -> dict[str, Any]:
        with Session(session.get_bind()) as fresh:  # read back, not the objects in memory
            public = get_initiative(fresh, initiative_id=initiative_id).to_public()
        return {k: v for k, v in public.model_dump().items() if k not in unstable}

    for single, batch in zip(one_by_one, batched, strict=True):
        assert stored(batch.row.id or 0) == stored(single.row.id or 0)
        in_memory = {k: v for k, v in batch.to_public().model_dump().items() if k not in unstable}
        assert in_memory == stored(batch.row.id or 0)
    assert [r.row.position for r in one_by_one + batched] == [2, 3, 4, 5]
    entries = session.exec(
        select(AuditEntry).where(
            AuditEntry.entity_id == batched[0].row.id, AuditEntry.action == "initiative.create"
        )
    ).all()
    assert len(entries) == 1
    assert entries[0].actor == "cli"
    assert entries[0].after == batched[0].to_public().model_dump(mode="json")


def test_batch_rows_are_session_rows_that_can_be_edited(session: Session) -> None:
    team, period = make_team(session, "Kiln"), make_period(session)
    records = create_initiatives(
        session,
        initiatives_in=[
            InitiativeCreate(
                team_id=team.id or 0,
                period_id=period.id,
                title=f"Row {k}",
                effort=EffortIn(likely=2),
                value=k + 1,
            )
            for k in range(3)
        ],
    )
    session.commit()
    middle = records[1]
    assert session.get(Initiative, middle.row.id) is middle.row  # no second copy was loaded
    changed = update_initiative(
        session,
        initiative_id=middle.row.id or 0,
        initiative_in=InitiativeUpdate(version=1, value=50, effort=EffortIn(likely=4)),
    )
    assert (changed.row.version, changed.row.value, changed.own_effort.likely) == (2, 50, 4)


def test_a_reused_id_replaces_a_stale_row_in_the_session(session: Session) -> None:
    team, period = make_team(session, "Kiln"), make_period(session)
    gone = make_initiative(session, team, period, "Deleted behind the session's back")
    gone_id = gone.row.id
    # Deleted by SQL, so the session still holds the row and its (cascade-deleted) effort line.
    session.exec(delete(Initiative).where(col(Initiative.id) == gone_id))  # type: ignore[call-overload]
    session.commit()
    again = create_initiative(
        session,
        initiative_in=InitiativeCreate(
            team_id=team.id or 0,
            period_id=period.id,
            title="New",
            effort=EffortIn(likely=1),
            value=1,
        ),
    )
    # SQLite hands out the largest id + 1, so the new row may take the deleted row's id.
    assert session.get(Initiative, again.row.id) is again.row
    assert get_initiative(session, initiative_id=again.row.id or 0).row.title == "New"


def test_every_bad_row_of_a_batch_is_named_and_nothing_is_stored(session: Session) -> None:
    team, period = make_team(session, "Kiln"), make_period(session)
    good = InitiativeCreate(
        team_id=team.id or 0, period_id=period.id, title="Fine", effort=EffortIn(likely=1), value=1
    )
    before = counts(session)
    lines_before = session.exec(select(func.count()).select_from(EffortLine)).one()
    with pytest.raises(InputError) as refused:
        create_initiatives(
            session,
            initiatives_in=[
                good,
                good.model_copy(update={"period_id": 9999}),
                good,
                good.model_copy(update={"needs": [8888]}),
                good.model_copy(
                    update={"other_efforts": [TeamEffortIn(team_id=team.id or 0, likely=1)]}
                ),
            ],
        )
    session.rollback()
    assert refused.value.message == (
        "Row 2, period_id: No period with id 9999. "
        "Row 4, needs: No initiative with id 8888. "
        f"Row 5, other_efforts: Team {team.id} is listed twice (or is the owning team)."
    )
    assert refused.value.field == "period_id"  # the first bad row's field
    assert counts(session) == before
    assert session.exec(select(func.count()).select_from(EffortLine)).one() == lines_before
    # One initiative on its own keeps the message without a row number.
    with pytest.raises(InputError, match=r"^team_id: No team with id 7777\.$"):
        create_initiative(session, initiative_in=good.model_copy(update={"team_id": 7777}))


def test_many_bad_rows_are_counted_after_the_first_ten(session: Session) -> None:
    team = make_team(session, "Kiln")
    bad = InitiativeCreate(
        team_id=team.id or 0, period_id=9999, title="x", effort=EffortIn(likely=1), value=1
    )
    with pytest.raises(InputError) as refused:
        create_initiatives(session, initiatives_in=[bad] * 25)
    assert refused.value.message.count("period_id: No period") == 10
    assert refused.value.message.startswith("Row 1, ")
    assert refused.value.message.endswith(" And 15 more rows.")


def test_rows_committed_between_the_queries_of_one_read_are_skipped(session: Session) -> None:
    """Under READ COMMITTED each query sees new commits: the lines query, filtered by a
    subquery, can meet an initiative the rows query did not return. Reproduced here by
    reading one row with a subquery that also finds a second."""
    team, period = make_team(session), make_period(session)
    first = make_initiative(session, team, period, "Quay wall", needs=[]).row
    later = make_initiative(session, team, period, "Crane rail", needs=[first.id or 0]).row
    every_id = select(Initiative.id)
    records = load_records(session, [first], ids_from=every_id)
    assert [r.row.id for r in records] == [first.id]
    assert set(records[0].efforts) == {team.id}
    assert records[0].needs == []
    assert later.id is not None
