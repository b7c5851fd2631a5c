"""A write whose team, member or period another writer deletes between the write's look-up
and its insert is refused as if asked afterwards: 404 naming what is gone, not a clash
message that is not true, and nothing of it stored."""

from __future__ import annotations

from collections.abc import Callable

import pytest
from fastapi import FastAPI
from sqlmodel import Session, select

from server.errors import NotFoundError
from server.models import AuditEntry
from server.schemas import (
    AvailabilityCreate,
    CapacitySettingsIn,
    EffortIn,
    InitiativeCreate,
    MemberCreate,
)
from server.store import initiatives as initiative_store
from server.store import periods as period_store
from server.store import plans as plan_store
from server.store import teams as team_store
from tests.api.conftest import Workspace
from tests.api.races import then_another_writer


def _delete_lighthouse(workspace: Workspace) -> Callable[[Session], None]:
    return lambda other: team_store.delete_team(other, team_id=workspace.other_team)


def _entries(session: Session) -> list[str]:
    session.rollback()
    return [e.action for e in session.exec(select(AuditEntry).order_by(AuditEntry.id))]


def _refused(session: Session, write: Callable[[], object], field: str) -> str:
    before = _entries(session)
    with pytest.raises(NotFoundError) as refused:
        write()
    assert refused.value.field == field
    after = _entries(session)
    # Only the other writer's deletion was recorded; nothing of the refused write.
    assert after[: len(before)] == before
    assert all(action.endswith(".delete") for action in after[len(before) :]), after
    return refused.value.message


def test_a_member_added_to_a_team_deleted_meanwhile_is_404_not_a_name_clash(
    app: FastAPI, session: Session, workspace: Workspace, monkeypatch: pytest.MonkeyPatch
) -> None:
    then_another_writer(
        monkeypatch, team_store, "_check_member_name_free", app, _delete_lighthouse(workspace)
    )
    member_in = MemberCreate(team_id=workspace.other_team, name="Noor")
    message = _refused(
        session, lambda: team_store.create_member(session, member_in=member_in), "team_id"
    )
    assert message == f"No team with id {workspace.other_team}."


def test_days_off_of_a_member_removed_meanwhile_are_404(
    app: FastAPI, session: Session, workspace: Workspace, monkeypatch: pytest.MonkeyPatch
) -> None:
    def remove_ola(other: Session) -> None:
        team_store.delete_member(other, member_id=workspace.member)

    then_another_writer(monkeypatch, team_store, "_check_days_off", app, remove_ola)
    row = AvailabilityCreate(member_id=workspace.member, period_id=workspace.period, days_off=3)
    message = _refused(
        session, lambda: team_store.set_availability(session, availability_in=row), "member_id"
    )
    assert message == f"No member with id {workspace.member}."


def test_capacity_settings_of_a_team_deleted_meanwhile_are_404(
    app: FastAPI, session: Session, workspace: Workspace, monkeypatch: pytest.MonkeyPatch
) -> None:
    then_another_writer(
        monkeypatch, period_store, "get_capacity_settings", app, _delete_lighthouse(workspace)
    )
    message = _refused(
        session,
        lambda: period_store.set_capacity_settings(
            session,
            team_id=workspace.other_team,
            period_id=workspace.period,
            settings_in=CapacitySettingsIn(focus_factor=0.6, reserve_pct=10),
        ),
        "team_id",
    )
    assert message == f"No team with id {workspace.other_team}."


def test_a_scenario_of_a_team_deleted_meanwhile_is_404(
    app: FastAPI, session: Session, workspace: Workspace, monkeypatch: pytest.MonkeyPatch
) -> None:
    then_another_writer(monkeypatch, plan_store, "get_period", app, _delete_lighthouse(workspace))
    message = _refused(
        session,
        lambda: plan_store.create_scenario(
            session,
            team_id=workspace.other_team,
            period_id=workspace.period,
            name="Lean",
            changes={},
        ),
        "team_id",
    )
    assert message == f"No team with id {workspace.other_team}."


def test_an_initiative_of_a_team_deleted_meanwhile_is_404(
    app: FastAPI, session: Session, workspace: Workspace, monkeypatch: pytest.MonkeyPatch
) -> None:
    then_another_writer(
        monkeypatch, initiative_store, "_refuse_title_clashes", app, _delete_lighthouse(workspace)
    )
    initiative_in = InitiativeCreate(
        team_id=workspace.other_team,
        period_id=workspace.period,
        title="Beacon",
        effort=EffortIn(likely=1),
        value=3,
    )
    message = _refused(
        session,
        lambda: initiative_store.create_initiative(session, initiative_in=initiative_in),
        "team_id",
    )
    assert message == f"No team with id {workspace.other_team}."
