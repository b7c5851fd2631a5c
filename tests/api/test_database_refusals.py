"""The database refuses the loser of a check-then-write race with the store's own refusal.

Each test stores the row that the winner of the race would have stored, then makes the
losing write with the store's check before writing turned off (as if it had read the rows an
instant before the winner committed). The title indexes (migration 0003) and the RESTRICT
foreign keys (0004) must refuse it: the same ConflictError (409 on the API) as the check gives,
the session rolled back, and every table as it was.

Workspace: team Harbour with "Quay wall" and "Crane rail" (which needs it) in Sprint 1,
team Lighthouse.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Callable
from typing import Any

import pytest
from fastapi import FastAPI
from fastapi.testclient import TestClient
from sqlmodel import Session

from server.db import one_transaction
from server.errors import ConflictError
from server.models import Period, SavedPlan, Team
from server.planning.paste import commit_paste, parse_paste
from server.planning.scenarios import ScenarioChanges
from server.schemas import (
    AvailabilityCreate,
    EffortIn,
    InitiativeCreate,
    InitiativeUpdate,
    PeriodCreate,
    TeamEffortIn,
)
from server.store import initiatives as initiative_store
from server.store import periods as period_store
from server.store import plans as plan_store
from server.store import teams as team_store
from server.store.initiatives import (
    create_initiative,
    create_initiatives,
    delete_initiative,
    update_initiative,
)
from server.store.periods import create_period, delete_period
from server.store.teams import delete_team
from tests.api.conftest import Snapshot, Workspace
from tests.api.support import error_fields, error_text
from tests.factories import make_initiative, make_period
from tests.pages.parsed_page import Form, parse

IN_SPRINT = "already exists in team Harbour for Sprint 1; choose another title."


def _no_check(*_args: object, **_kwargs: object) -> None:
    """A check before writing that lets everything through (the race's loser)."""


@pytest.fixture
def unchecked_titles(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(initiative_store, "_refuse_title_clashes", _no_check)


def _new(workspace: Workspace, title: str, period_id: int | None = -1) -> InitiativeCreate:
    return InitiativeCreate(
        team_id=workspace.team,
        period_id=workspace.period if period_id == -1 else period_id,
        title=title,
        effort=EffortIn(likely=1),
        value=1,
    )


def _team(session: Session, team_id: int) -> Team:
    team = session.get(Team, team_id)
    assert team is not None
    return team


# --- titles -----------------------------------------------------------------------------------


@pytest.mark.usefixtures("unchecked_titles")
@pytest.mark.parametrize("title", ["Quay wall", "quay WALL", "Quay  wall", "  QUAY WALL  "])
def test_a_title_stored_meanwhile_is_refused_by_the_database(
    session: Session, workspace: Workspace, snapshot: Callable[[], Snapshot], title: str
) -> None:
    before = snapshot()
    with pytest.raises(ConflictError) as refused:
        create_initiative(session, initiative_in=_new(workspace, title))
    assert refused.value.field == "title"
    assert refused.value.message == f"“{title.strip()}” {IN_SPRINT}"
    assert snapshot() == before
    # The session was rolled back and takes the next write.
    create_initiative(session, initiative_in=_new(workspace, "Tide gauge"))


@pytest.mark.usefixtures("unchecked_titles")
def test_the_backlog_is_guarded_by_the_database_too(
    session: Session, workspace: Workspace, snapshot: Callable[[], Snapshot]
) -> None:
    make_initiative(session, _team(session, workspace.team), None, "Dredging")
    before = snapshot()
    with pytest.raises(ConflictError) as refused:
        create_initiative(session, initiative_in=_new(workspace, "dredging", None))
    assert refused.value.field == "title"
    assert refused.value.message == (
        "“dredging” already exists in the backlog of team Harbour; choose another title."
    )
    assert snapshot() == before


@pytest.mark.usefixtures("unchecked_titles")
def test_other_teams_periods_and_the_backlog_still_share_titles(
    session: Session, workspace: Workspace
) -> None:
    later = make_period(session, "Sprint 2")
    records = create_initiatives(
        session,
        initiatives_in=[
            _new(workspace, "Quay wall", later.id),
            _new(workspace, "Quay wall", None),
            _new(workspace, "Quay wall").model_copy(update={"team_id": workspace.other_team}),
        ],
    )
    session.commit()
    assert [record.row.title_key for record in records] == ["quay wall"] * 3


@pytest.mark.usefixtures("unchecked_titles")
def test_a_refused_title_takes_back_the_rest_of_its_transaction(
    session: Session, workspace: Workspace, snapshot: Callable[[], Snapshot]
) -> None:
    before = snapshot()

    def period_and_two_batches() -> None:
        with one_transaction(session.get_bind()) as joined:
            create_period(
                joined,
                period_in=PeriodCreate(
                    name="Sprint 9",
                    kind="sprint",
                    start_date=dt.date(2027, 5, 3),
                    end_date=dt.date(2027, 5, 14),
                ),
            )
            create_initiatives(joined, initiatives_in=[_new(workspace, "Tide gauge")])
            create_initiatives(joined, initiatives_in=[_new(workspace, "Crane RAIL")])

    with pytest.raises(ConflictError) as refused:
        period_and_two_batches()
    assert refused.value.message == f"“Crane RAIL” {IN_SPRINT}"
    assert snapshot() == before


@pytest.mark.usefixtures("unchecked_titles")
def test_a_rename_or_move_onto_a_title_stored_meanwhile_is_refused(
    session: Session, workspace: Workspace, snapshot: Callable[[], Snapshot]
) -> None:
    make_initiative(session, _team(session, workspace.team), None, "Crane rail")
    before = snapshot()
    with pytest.raises(ConflictError) as renamed:
        update_initiative(
            session,
            initiative_id=workspace.initiative,
            initiative_in=InitiativeUpdate(version=1, title="crane rail"),
        )
    with pytest.raises(ConflictError) as moved:
        update_initiative(
            session,
            initiative_id=workspace.dependant,
            initiative_in=InitiativeUpdate(version=1, period_id=None),
        )
    assert (renamed.value.field, moved.value.field) == ("title", "title")
    assert renamed.value.message == f"“crane rail” {IN_SPRINT}"
    assert moved.value.message == (
        "“Crane rail” already exists in the backlog of team Harbour; choose another title."
    )
    assert snapshot() == before


@pytest.mark.usefixtures("unchecked_titles")
def test_the_api_answers_the_race_with_the_same_409(
    client: TestClient, workspace: Workspace, snapshot: Callable[[], Snapshot]
) -> None:
    before = snapshot()
    created = client.post(
        "/api/v1/initiatives",
        json={
            "team_id": workspace.team,
            "period_id": workspace.period,
            "title": " crane RAIL ",
            "effort": 2,
            "value": 5,
        },
    )
    renamed = client.patch(
        f"/api/v1/initiatives/{workspace.initiative}", json={"version": 1, "title": "Crane rail"}
    )
    for response, title in ((created, "crane RAIL"), (renamed, "Crane rail")):
        assert response.status_code == 409, response.text
        assert error_fields(response) == ["title"]
        assert error_text(response) == f"“{title}” {IN_SPRINT}"
    assert snapshot() == before


@pytest.mark.usefixtures("unchecked_titles")
def test_a_paste_is_refused_whole_by_the_database(
    session: Session, workspace: Workspace, snapshot: Callable[[], Snapshot]
) -> None:
    parsed = parse_paste(
        "Tide gauge\t2\t10\nBuoy\t1\t5\n", team_id=workspace.team, period_id=workspace.period
    )
    assert parsed.ok
    make_initiative(session, _team(session, workspace.team), _sprint(session, workspace), "BUOY")
    before = snapshot()
    with pytest.raises(ConflictError) as refused:
        commit_paste(session, parsed)
    assert refused.value.field == "title"
    assert refused.value.message == f"“Buoy” {IN_SPRINT}"
    assert snapshot() == before


def _sprint(session: Session, workspace: Workspace) -> Period:
    period = session.get(Period, workspace.period)
    assert period is not None
    return period


def test_a_plan_import_is_refused_whole_by_the_database(
    client: TestClient,
    session: Session,
    workspace: Workspace,
    snapshot: Callable[[], Snapshot],
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    saved = client.post(
        "/api/v1/plans",
        json={"name": "Baseline", "team_id": workspace.team, "period_id": workspace.period},
    )
    assert saved.status_code == 201, saved.text
    exported = client.get(f"/api/v1/plans/{saved.json()['id']}/export.csv").text
    lighthouse = _team(session, workspace.other_team)
    make_initiative(session, lighthouse, _sprint(session, workspace), "crane rail")
    monkeypatch.setattr(plan_store, "_refuse_title_clashes", _no_check)
    monkeypatch.setattr(initiative_store, "_refuse_title_clashes", _no_check)
    before = snapshot()
    response = client.post(
        f"/api/v1/teams/{workspace.other_team}/plan-imports",
        json={"period_id": workspace.period, "csv": exported},
    )
    assert response.status_code == 409, response.text
    assert error_fields(response) == ["title"]
    assert error_text(response) == (
        "“Crane rail” already exists in team Lighthouse for Sprint 1; choose another title."
    )
    assert snapshot() == before


@pytest.mark.usefixtures("unchecked_titles")
def test_the_add_form_shows_the_database_refusal_beside_the_title(
    form_client: TestClient, session: Session, workspace: Workspace
) -> None:
    before = read_titles(session)
    url = f"/teams/{workspace.team}/initiatives"
    typed = {
        "csrf_token": form_client.csrf,  # type: ignore[attr-defined]
        "title": "quay WALL ",
        "period_id": str(workspace.period),
        "effort.likely": "2",
        "value": "41",
    }
    response = form_client.post(url, data=typed)
    assert response.status_code == 422
    form = Form(parse(response.text), url)
    assert form.error("title") == f"“quay WALL” {IN_SPRINT}"
    assert form.value("title") == "quay WALL "
    assert form.value("value") == "41"
    assert read_titles(session) == before


def read_titles(session: Session) -> list[str]:
    return sorted(record.row.title for record in initiative_store.list_initiatives(session))


# --- deletes ----------------------------------------------------------------------------------


def test_deleting_an_initiative_needed_since_the_check_is_refused(
    session: Session,
    workspace: Workspace,
    snapshot: Callable[[], Snapshot],
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    monkeypatch.setattr(initiative_store, "_refuse_needed", _no_check)
    before = snapshot()
    with pytest.raises(ConflictError) as refused:
        delete_initiative(session, initiative_id=workspace.initiative)
    assert refused.value.field == "initiative_id"
    assert refused.value.message == (
        "“Quay wall” is needed by “Crane rail”; remove it from their needs first."
    )
    assert snapshot() == before


def test_initiatives_that_need_each_other_still_go_together(
    session: Session, workspace: Workspace, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setattr(initiative_store, "_refuse_needed", _no_check)
    initiative_store.delete_initiatives(
        session, initiative_ids=[workspace.initiative, workspace.dependant]
    )
    assert read_titles(session) == []


def _lighthouse_beacon(session: Session, workspace: Workspace, **fields: object) -> None:
    """Lighthouse's "Beacon", stored by the other writer of the race."""
    create_initiative(
        session,
        initiative_in=InitiativeCreate(
            team_id=workspace.other_team,
            period_id=workspace.period,
            title="Beacon",
            effort=EffortIn(likely=1),
            value=3,
            **fields,  # type: ignore[arg-type]
        ),
    )


@pytest.mark.parametrize(
    ("relies", "held"),
    [
        ("needs", "“Quay wall” is needed by “Beacon” (team Lighthouse)"),
        ("effort", "“Beacon” (team Lighthouse) carries effort for team “Harbour”"),
    ],
)
def test_deleting_a_team_another_team_came_to_rely_on_is_refused(
    session: Session,
    workspace: Workspace,
    snapshot: Callable[[], Snapshot],
    monkeypatch: pytest.MonkeyPatch,
    relies: str,
    held: str,
) -> None:
    if relies == "needs":
        _lighthouse_beacon(session, workspace, needs=[workspace.initiative])
    else:
        effort = TeamEffortIn(team_id=workspace.team, likely=1)
        _lighthouse_beacon(session, workspace, other_efforts=[effort])
    monkeypatch.setattr(team_store, "_refuse_team_delete", _no_check)
    before = snapshot()
    with pytest.raises(ConflictError) as refused:
        delete_team(session, team_id=workspace.team, with_initiatives=True)
    assert refused.value.field == "team_id"
    assert refused.value.message == (
        f"Team “Harbour” cannot be deleted: {held}. Change those initiatives first: remove the "
        "need, or the team's effort, on their edit pages."
    )
    assert snapshot() == before


def test_deleting_a_team_given_an_initiative_meanwhile_is_refused(
    session: Session,
    workspace: Workspace,
    snapshot: Callable[[], Snapshot],
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    monkeypatch.setattr(team_store, "_refuse_team_delete", _no_check)
    before = snapshot()
    with pytest.raises(ConflictError) as refused:
        delete_team(session, team_id=workspace.team)
    assert refused.value.field == "team_id"
    assert refused.value.message == (
        "Team “Harbour” still has 2 initiatives; delete them first or ask to delete them with "
        "the team."
    )
    assert snapshot() == before


def test_a_team_nothing_else_relies_on_still_goes_with_its_initiatives(
    session: Session, workspace: Workspace, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setattr(team_store, "_refuse_team_delete", _no_check)
    delete_team(session, team_id=workspace.team, with_initiatives=True)
    assert session.get(Team, workspace.team) is None
    assert read_titles(session) == []


def test_the_api_refuses_a_team_delete_lost_to_a_race_with_409(
    client: TestClient,
    session: Session,
    workspace: Workspace,
    snapshot: Callable[[], Snapshot],
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    _lighthouse_beacon(session, workspace, needs=[workspace.initiative])
    monkeypatch.setattr(team_store, "_refuse_team_delete", _no_check)
    before = snapshot()
    response = client.delete(f"/api/v1/teams/{workspace.team}?with_initiatives=true")
    assert response.status_code == 409, response.text
    assert error_fields(response) == ["team_id"]
    assert "is needed by “Beacon” (team Lighthouse)" in error_text(response)
    assert snapshot() == before


@pytest.mark.parametrize("use", ["initiative", "availability", "scenario", "saved plan"])
def test_deleting_a_period_that_got_a_use_meanwhile_is_refused(
    session: Session,
    workspace: Workspace,
    snapshot: Callable[[], Snapshot],
    monkeypatch: pytest.MonkeyPatch,
    use: str,
) -> None:
    period = make_period(session, "Sprint 2")
    period_id = period.id or 0
    if use == "initiative":
        make_initiative(session, _team(session, workspace.team), period, "Tide gauge")
        expected = "Period “Sprint 2” still has 1 initiative (Harbour 1)."
    elif use == "availability":
        team_store.set_availability(
            session,
            availability_in=AvailabilityCreate(
                member_id=workspace.member, period_id=period_id, days_off=1
            ),
        )
        expected = "Period “Sprint 2” still has 1 availability entry."
    elif use == "scenario":
        plan_store.create_scenario(
            session,
            team_id=workspace.team,
            period_id=period_id,
            name="Fewer days",
            changes=ScenarioChanges(capacity_days=3).to_json(),
        )
        expected = "Period “Sprint 2” still has 1 scenario."
    else:
        session.add(SavedPlan(name="Kept", period_id=period_id, inputs_digest="0" * 64))
        session.commit()
        expected = "Period “Sprint 2” still has 1 saved plan."
    monkeypatch.setattr(period_store, "_refuse_period_delete", _no_check)
    before = snapshot()
    with pytest.raises(ConflictError) as refused:
        delete_period(session, period_id=period_id)
    assert refused.value.field == "period_id"
    assert refused.value.message.startswith(expected)
    assert refused.value.message == period_store.period_delete_refusal(session, period).message
    assert snapshot() == before


# --- the race itself: another session commits between the check and the write ----------------


def test_a_title_committed_between_the_check_and_the_insert_is_refused(
    app: FastAPI,
    session: Session,
    workspace: Workspace,
    snapshot: Callable[[], Snapshot],
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    checked = initiative_store._refuse_title_clashes

    def check_then_lose_the_race(*args: Any, **kwargs: Any) -> None:
        checked(*args, **kwargs)  # passes: "Tide gauge" is free
        monkeypatch.setattr(initiative_store, "_refuse_title_clashes", checked)
        with Session(app.state.engine) as other:  # the winner, checked as usual
            create_initiative(other, initiative_in=_new(workspace, "TIDE gauge"))

    monkeypatch.setattr(initiative_store, "_refuse_title_clashes", check_then_lose_the_race)
    with pytest.raises(ConflictError) as refused:
        create_initiative(session, initiative_in=_new(workspace, "Tide gauge"))
    assert (refused.value.field, refused.value.message) == ("title", f"“Tide gauge” {IN_SPRINT}")
    # What the winner stored, and nothing of the loser (no row, no audit entry).
    assert read_titles(session) == ["Crane rail", "Quay wall", "TIDE gauge"]
    audit = [row for row in snapshot()["audit_entry"] if "Tide gauge" in str(row)]
    assert audit == []


def test_a_need_committed_between_the_check_and_the_delete_is_refused(
    app: FastAPI,
    session: Session,
    workspace: Workspace,
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    checked = team_store._refuse_team_delete

    def check_then_lose_the_race(*args: Any, **kwargs: Any) -> None:
        checked(*args, **kwargs)  # passes: nothing outside Harbour relies on it yet
        with Session(app.state.engine) as other:
            _lighthouse_beacon(other, workspace, needs=[workspace.initiative])

    monkeypatch.setattr(team_store, "_refuse_team_delete", check_then_lose_the_race)
    with pytest.raises(ConflictError) as refused:
        delete_team(session, team_id=workspace.team, with_initiatives=True)
    assert refused.value.message.startswith(
        "Team “Harbour” cannot be deleted: “Quay wall” is needed by “Beacon” (team Lighthouse)."
    )
    assert session.get(Team, workspace.team) is not None
    assert read_titles(session) == ["Beacon", "Crane rail", "Quay wall"]


def test_an_initiative_added_between_the_check_and_the_delete_keeps_the_team(
    app: FastAPI,
    session: Session,
    workspace: Workspace,
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    checked = team_store._refuse_team_delete

    def check_then_lose_the_race(*args: Any, **kwargs: Any) -> None:
        checked(*args, **kwargs)  # passes: both initiatives are to go with the team
        with Session(app.state.engine) as other:
            create_initiative(other, initiative_in=_new(workspace, "Tide gauge"))

    monkeypatch.setattr(team_store, "_refuse_team_delete", check_then_lose_the_race)
    with pytest.raises(ConflictError) as refused:
        delete_team(session, team_id=workspace.team, with_initiatives=True)
    assert refused.value.field == "team_id"
    assert refused.value.message == (
        "Team “Harbour” was changed while it was being deleted: “Tide gauge” was added to it. "
        "Nothing was deleted; look at the team again and delete it again if it should still go."
    )
    assert read_titles(session) == ["Crane rail", "Quay wall", "Tide gauge"]
    assert session.get(Team, workspace.team) is not None
