"""What goes with a deleted team, member or period is listed in its audit entry and deleted
by the store; a row another writer adds between that listing and the commit makes the whole
deletion refused (the foreign keys are RESTRICT), never taken along unlisted."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import pytest
from fastapi import FastAPI
from sqlmodel import Session, func, select

from server.errors import ConflictError, NotFoundError
from server.models import (
    AuditEntry,
    Availability,
    CapacitySettings,
    EffortLine,
    Initiative,
    Member,
    Period,
    Scenario,
    Team,
)
from server.schemas import (
    AvailabilityCreate,
    CapacitySettingsIn,
    InitiativeUpdate,
    MemberCreate,
    TeamEffortIn,
)
from server.store import initiatives as initiative_store
from server.store import periods as period_store
from server.store import plans as plan_store
from server.store import teams as team_store
from tests.api.conftest import Workspace
from tests.api.races import then_another_writer
from tests.factories import make_period


def _count(session: Session, model: Any, **where: int) -> int:
    session.expire_all()
    query = select(func.count()).select_from(model)
    for column, value in where.items():
        query = query.where(getattr(model, column) == value)
    return int(session.exec(query).one())


def _entries(session: Session, action: str) -> list[AuditEntry]:
    session.expire_all()
    return list(session.exec(select(AuditEntry).where(AuditEntry.action == action)))


def test_a_team_goes_with_everything_it_had_listed_in_its_entry(
    session: Session, workspace: Workspace
) -> None:
    plan_store.create_scenario(
        session, team_id=workspace.team, period_id=workspace.period, name="Lean", changes={}
    )
    team_store.delete_team(session, team_id=workspace.team, with_initiatives=True)
    for model, column in (
        (Member, "team_id"),
        (CapacitySettings, "team_id"),
        (Scenario, "team_id"),
    ):
        assert _count(session, model, **{column: workspace.team}) == 0
    assert _count(session, Availability, member_id=workspace.member) == 0
    (entry,) = _entries(session, "team.delete")
    before = entry.before or {}
    assert before["members"] == [
        {
            "name": "Ola",
            "allocation": 1.0,
            "availability": [{"period_id": workspace.period, "days_off": 2.0, "allocation": None}],
        }
    ]
    assert before["capacity_settings"] == [
        {"period_id": workspace.period, "focus_factor": 0.7, "reserve_pct": 15.0}
    ]
    assert [s["name"] for s in before["scenarios"]] == ["Lean"]


@pytest.mark.parametrize("added", ["member", "scenario"])
def test_a_row_added_to_the_team_while_it_is_deleted_keeps_the_team(
    app: FastAPI,
    session: Session,
    workspace: Workspace,
    monkeypatch: pytest.MonkeyPatch,
    added: str,
) -> None:
    def add(other: Session) -> None:
        if added == "member":
            member_in = MemberCreate(team_id=workspace.team, name="Noor")
            team_store.create_member(other, member_in=member_in)
        else:
            plan_store.create_scenario(
                other, team_id=workspace.team, period_id=workspace.period, name="Lean", changes={}
            )

    then_another_writer(monkeypatch, team_store, "_belongings", app, add)
    with pytest.raises(ConflictError) as refused:
        team_store.delete_team(session, team_id=workspace.team, with_initiatives=True)
    said = "member Noor was added" if added == "member" else "scenario “Lean” was added"
    assert refused.value.message == (
        f"Team “Harbour” was changed while it was being deleted: {said} to it. Nothing was "
        "deleted; look at the team again and delete it again if it should still go."
    )
    assert session.get(Team, workspace.team) is not None
    assert _count(session, Member, team_id=workspace.team) == (2 if added == "member" else 1)
    assert _count(session, Scenario, team_id=workspace.team) == (1 if added == "scenario" else 0)
    assert _count(session, Availability, member_id=workspace.member) == 1
    assert _entries(session, "team.delete") == []


def test_days_off_recorded_while_the_member_is_removed_keep_the_member(
    app: FastAPI, session: Session, workspace: Workspace, monkeypatch: pytest.MonkeyPatch
) -> None:
    later = make_period(session, "Sprint 2")

    def record(other: Session) -> None:
        row = AvailabilityCreate(member_id=workspace.member, period_id=later.id or 0, days_off=1)
        team_store.set_availability(other, availability_in=row)

    then_another_writer(monkeypatch, team_store, "_days_off_rows", app, record)
    with pytest.raises(ConflictError) as refused:
        team_store.delete_member(session, member_id=workspace.member)
    assert refused.value.message.startswith("Ola's days off were recorded while they were")
    assert session.get(Member, workspace.member) is not None
    assert _count(session, Availability, member_id=workspace.member) == 2
    assert _entries(session, "member.delete") == []


def test_capacity_settings_stored_while_the_period_is_deleted_keep_the_period(
    app: FastAPI, session: Session, workspace: Workspace, monkeypatch: pytest.MonkeyPatch
) -> None:
    empty = make_period(session, "Sprint 9")
    empty_id = empty.id or 0

    def store(other: Session) -> None:
        period_store.set_capacity_settings(
            other,
            team_id=workspace.other_team,
            period_id=empty_id,
            settings_in=CapacitySettingsIn(focus_factor=0.6, reserve_pct=10),
        )

    then_another_writer(monkeypatch, period_store, "_settings_in", app, store)
    with pytest.raises(ConflictError) as refused:
        period_store.delete_period(session, period_id=empty_id)
    assert refused.value.field == "period_id"
    assert refused.value.message.startswith(
        "Period “Sprint 9” was changed while it was being deleted: a team's focus factor"
    )
    assert session.get(Period, empty_id) is not None
    assert _count(session, CapacitySettings, period_id=empty_id) == 1
    assert _entries(session, "period.delete") == []


def _give_lighthouse_effort(workspace: Workspace) -> Callable[[Session], object]:
    """Another writer's edit of "Crane rail": two days of Lighthouse's effort (version 2)."""
    update = InitiativeUpdate(
        version=1, other_efforts=[TeamEffortIn(team_id=workspace.other_team, likely=2)]
    )
    return lambda other: initiative_store.update_initiative(
        other, initiative_id=workspace.dependant, initiative_in=update
    )


def _lines_of(session: Session, initiative_id: int) -> int:
    return _count(session, EffortLine, initiative_id=initiative_id)


def test_an_initiative_changed_while_it_is_deleted_stays_with_the_change(
    app: FastAPI, session: Session, workspace: Workspace, monkeypatch: pytest.MonkeyPatch
) -> None:
    # Its entry would list the effort lines read before the change: the new line would go
    # unlisted, so the deletion is refused instead (it used to fail with a server error).
    then_another_writer(
        monkeypatch, initiative_store, "_refuse_needed", app, _give_lighthouse_effort(workspace)
    )
    with pytest.raises(ConflictError) as refused:
        initiative_store.delete_initiative(session, initiative_id=workspace.dependant)
    assert refused.value.field == "initiative_id"
    assert refused.value.message == (
        "Someone else changed “Crane rail” (now version 2) while it was being deleted. Nothing "
        "was deleted; look at it again and delete it again if it should still go."
    )
    assert session.get(Initiative, workspace.dependant) is not None
    assert _lines_of(session, workspace.dependant) == 2  # its own and Lighthouse's
    assert _entries(session, "initiative.delete") == []


def test_an_initiative_deleted_by_another_writer_meanwhile_is_404(
    app: FastAPI, session: Session, workspace: Workspace, monkeypatch: pytest.MonkeyPatch
) -> None:
    def delete(other: Session) -> None:
        initiative_store.delete_initiative(other, initiative_id=workspace.dependant)

    then_another_writer(monkeypatch, initiative_store, "_refuse_needed", app, delete)
    with pytest.raises(NotFoundError) as refused:
        initiative_store.delete_initiative(session, initiative_id=workspace.dependant)
    assert "Crane rail" in refused.value.message
    assert len(_entries(session, "initiative.delete")) == 1  # the other writer's only


def test_a_team_whose_initiative_changed_while_it_is_deleted_is_kept(
    app: FastAPI, session: Session, workspace: Workspace, monkeypatch: pytest.MonkeyPatch
) -> None:
    then_another_writer(
        monkeypatch, team_store, "_belongings", app, _give_lighthouse_effort(workspace)
    )
    with pytest.raises(ConflictError) as refused:
        team_store.delete_team(session, team_id=workspace.team, with_initiatives=True)
    assert "“Crane rail” (now version 2)" in refused.value.message
    assert session.get(Team, workspace.team) is not None
    assert _lines_of(session, workspace.dependant) == 2
    assert _entries(session, "team.delete") == []
