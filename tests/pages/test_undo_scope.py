"""What the plan page of a period offers to undo: that team's last change there, by a person."""

from __future__ import annotations

import datetime as dt
from typing import Any

from fastapi import FastAPI
from fastapi.testclient import TestClient
from sqlmodel import Session, col, select

from server import demo
from server.models import AuditEntry, Initiative, Period, Team
from server.planning.undo import last_change
from server.schemas import InitiativeUpdate
from server.store.initiatives import get_initiative, update_initiative
from tests.factories import make_initiative, make_period, make_team
from tests.pages.html_tree import parse_html
from tests.pages.test_plan_pages import HX, post_form


def _periods(session: Session) -> tuple[Period, Period]:
    """A quarter and a sprint inside it."""
    quarter = make_period(session, "Q1", dt.date(2027, 1, 4), dt.date(2027, 3, 26), "quarter")
    return quarter, make_period(session, "Sprint 1")


def _plan_url(team_id: int | None, period_id: int | None) -> str:
    return f"/teams/{team_id}/plan?period_id={period_id}"


def _offered(client: TestClient, team_id: int | None, period_id: int | None) -> str | None:
    """The undo hint on the plan page, or None when no undo is offered."""
    root = parse_html(client.get(_plan_url(team_id, period_id)).text)
    hint = root.find(id="undo-what")
    assert (hint is None) == (root.find(id="undo-button") is None)
    return hint.text() if hint is not None else None


def _add(client: TestClient, team: Team, period: Period, title: str) -> dict[str, Any]:
    response = client.post(
        "/api/v1/initiatives",
        json={
            "team_id": team.id,
            "period_id": period.id,
            "title": title,
            "effort": {"likely": 3},
            "value": 10,
        },
    )
    assert response.status_code == 201, response.text
    return response.json()


def _patch(client: TestClient, initiative: dict[str, Any], **changes: object) -> dict[str, Any]:
    response = client.patch(
        f"/api/v1/initiatives/{initiative['id']}",
        json={"version": initiative["version"], **changes},
    )
    assert response.status_code == 200, response.text
    return response.json()


def test_a_change_in_another_period_is_not_offered(
    form_client: TestClient, session: Session
) -> None:
    team = make_team(session)
    quarter, sprint = _periods(session)
    gauge = _add(form_client, team, quarter, "Tide gauge")
    _patch(form_client, gauge, value=25)

    assert _offered(form_client, team.id, sprint.id) is None
    refused = post_form(
        form_client, f"/teams/{team.id}/plan/undo", {"period_id": str(sprint.id)}, **HX
    )
    assert refused.status_code == 404
    assert "no change of this team in this period left to undo" in refused.text
    session.expire_all()
    assert session.get(Initiative, gauge["id"]).value == 25  # type: ignore[union-attr]

    offered = _offered(form_client, team.id, quarter.id)
    assert offered == "Changed value of “Tide gauge” (your change)"
    undone = post_form(
        form_client, f"/teams/{team.id}/plan/undo", {"period_id": str(quarter.id)}, **HX
    )
    assert undone.status_code == 200
    session.expire_all()
    assert session.get(Initiative, gauge["id"]).value == 10  # type: ignore[union-attr]


def test_a_move_is_offered_in_both_periods_and_earlier_changes_follow_the_initiative(
    form_client: TestClient, session: Session
) -> None:
    team = make_team(session)
    quarter, sprint = _periods(session)
    gauge = _add(form_client, team, quarter, "Tide gauge")
    gauge = _patch(form_client, gauge, title="Tide gauge v2")
    _patch(form_client, gauge, period_id=sprint.id)

    moved = "Changed period of “Tide gauge v2” (your change)"
    assert _offered(form_client, team.id, quarter.id) == moved
    assert _offered(form_client, team.id, sprint.id) == moved
    post_form(form_client, f"/teams/{team.id}/plan/undo", {"period_id": str(sprint.id)})
    # Back in Q1: the rename was made there, so only Q1 offers it, though the walk back
    # passed a move to Sprint 2 on the way.
    assert _offered(form_client, team.id, sprint.id) is None
    offered = _offered(form_client, team.id, quarter.id)
    assert offered == "Changed title of “Tide gauge v2” (your change)"


def test_changes_without_a_person_are_not_offered(
    form_client: TestClient, session: Session
) -> None:
    team = make_team(session)
    period = make_period(session)
    make_initiative(session, team, period, "Written from the command line")
    assert last_change(session, team_id=team.id or 0, period_id=period.id) is None
    assert _offered(form_client, team.id, period.id) is None


def test_a_fresh_demo_offers_no_undo_and_a_person_s_change_is_offered_alone(
    app: FastAPI, form_client: TestClient, session: Session
) -> None:
    assert demo.load_if_empty(app.state.engine) is True
    entries = list(session.exec(select(AuditEntry)))
    assert entries
    assert {entry.actor for entry in entries} == {"demo"}
    teams = list(session.exec(select(Team)))
    periods = list(session.exec(select(Period)))
    for team in teams:
        for period in periods:
            assert last_change(session, team_id=team.id or 0, period_id=period.id) is None
    quarter = session.exec(select(Period).where(Period.name == demo.QUARTER)).one()
    team = session.exec(select(Team).where(Team.name == "Depot Systems")).one()
    assert _offered(form_client, team.id, quarter.id) is None

    tyres = session.exec(select(Initiative).where(Initiative.title == "Tyre wear tracking")).one()
    _patch(form_client, {"id": tyres.id, "version": tyres.version}, value=31)
    offered = _offered(form_client, team.id, quarter.id)
    assert offered == "Changed value of “Tyre wear tracking” (your change)"
    post_form(form_client, f"/teams/{team.id}/plan/undo", {"period_id": str(quarter.id)})
    # The demo's own creation of the initiatives is never offered.
    assert _offered(form_client, team.id, quarter.id) is None
    assert session.exec(select(Initiative).where(col(Initiative.team_id) == team.id)).first()


def test_a_paste_is_offered_in_its_period_only(form_client: TestClient, session: Session) -> None:
    team = make_team(session)
    quarter, sprint = _periods(session)
    added = post_form(
        form_client,
        f"/teams/{team.id}/plan/paste",
        {"period_id": str(sprint.id), "text": "Tide gauge\t2\t10\nPilot boat\t3\t12"},
    )
    assert added.status_code == 303, added.text[:300]
    assert _offered(form_client, team.id, quarter.id) is None
    assert _offered(form_client, team.id, sprint.id) == "Pasted 2 initiatives (your change)"
    undone = post_form(
        form_client, f"/teams/{team.id}/plan/undo", {"period_id": str(sprint.id)}, **HX
    )
    assert "Removed the 2 pasted initiatives again" in undone.text
    assert list(session.exec(select(Initiative))) == []


def test_a_colleagues_change_is_offered_with_their_name(
    form_client: TestClient, session: Session
) -> None:
    team = make_team(session)
    quarter, _ = _periods(session)
    gauge = _add(form_client, team, quarter, "Tide gauge")
    current = get_initiative(session, initiative_id=gauge["id"])
    update_initiative(
        session,
        initiative_id=gauge["id"],
        initiative_in=InitiativeUpdate(version=current.row.version, value=40),
        actor="Ines",
    )
    assert _offered(form_client, team.id, quarter.id) == "Changed value of “Tide gauge” (by Ines)"
