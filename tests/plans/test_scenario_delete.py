"""Deleting a scenario: a tick the server checks (refused without it, nothing deleted), a
message on the list after the delete, and an audit entry that says what it changed."""

from __future__ import annotations

from fastapi.testclient import TestClient
from sqlmodel import Session, col, select

from server.models import AuditEntry, Scenario
from server.planning.scenarios import ScenarioChanges
from server.store import plans as store
from tests.pages.parsed_page import Form, parse
from tests.plans.conftest import Workspace, counts


def _scenario(session: Session, ws: Workspace, name: str = "Lean quarter") -> int:
    changes = ScenarioChanges(
        capacity_days=9,
        confidence=0.8,
        days_off={ws.members[0].id or 0: 3},
        forced_in=[ws.id_of("Fare capping")],
        forced_out=[ws.id_of("Stop alerts")],
    )
    db_scenario = store.create_scenario(
        session, team_id=ws.team_id, period_id=ws.period_id, name=name, changes=changes.to_json()
    )
    return db_scenario.id or 0


def test_a_delete_without_the_tick_is_refused_beside_the_box(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    scenario_id = _scenario(session, workspace)
    url = f"/scenarios/{scenario_id}/delete"
    page = parse(form_client.get(f"/scenarios/{scenario_id}").text)
    box = Form(page, url).control("confirm")
    assert box.attrs.get("type") == "checkbox"
    assert "required" in box.attrs
    before = counts(session)

    refused = form_client.post(
        url,
        data={"csrf_token": form_client.csrf},  # type: ignore[attr-defined]
        follow_redirects=False,
    )

    assert refused.status_code == 422
    assert counts(session) == before
    assert session.get(Scenario, scenario_id) is not None
    shown = Form(parse(refused.text), url)
    assert shown.errors() == ["Tick “Yes, delete scenario Lean quarter” to delete it."]


def test_a_ticked_delete_says_so_on_the_list_and_records_what_it_changed(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    scenario_id = _scenario(session, workspace)
    deleted = form_client.post(
        f"/scenarios/{scenario_id}/delete",
        data={"csrf_token": form_client.csrf, "confirm": "yes"},  # type: ignore[attr-defined]
        follow_redirects=False,
    )
    assert deleted.status_code == 303
    session.expire_all()
    assert session.get(Scenario, scenario_id) is None
    listing = parse(form_client.get(deleted.headers["location"]).text)
    assert listing.find(id="notice").text() == "Deleted scenario “Lean quarter”."
    # The same address later, with another scenario's id or a live one, says nothing.
    live_id = _scenario(session, workspace, "Still here")
    base = f"/teams/{workspace.team_id}/scenarios?period_id={workspace.period_id}"
    for other in (live_id, 999):
        assert parse(form_client.get(f"{base}&deleted={other}").text).find_all(id="notice") == []

    entry = session.exec(
        select(AuditEntry)
        .where(AuditEntry.action == "scenario.delete")
        .order_by(col(AuditEntry.id).desc())
    ).first()
    assert entry is not None
    assert entry.summary == (
        "Deleted scenario “Lean quarter”, which changed: confidence level P80; capacity 9 "
        "days; Ola: 3 days off; “Fare capping” forced in; “Stop alerts” forced out"
    )
    assert entry.before is not None
    assert entry.before["changes"]["capacity_days"] == 9
    audit_page = form_client.get("/audit").text
    assert "Ola: 3 days off" in audit_page


def test_a_scenario_of_no_changes_is_recorded_as_the_live_plan(
    session: Session, workspace: Workspace
) -> None:
    db_scenario = store.create_scenario(
        session,
        team_id=workspace.team_id,
        period_id=workspace.period_id,
        name="nothing",
        changes={},
    )
    store.delete_scenario(session, scenario_id=db_scenario.id or 0)
    entry = session.exec(select(AuditEntry).where(AuditEntry.action == "scenario.delete")).one()
    assert (
        entry.summary == "Deleted scenario “nothing”, which changed: nothing (it was the live plan)"
    )
