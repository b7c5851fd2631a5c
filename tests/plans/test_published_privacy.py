"""A published link shows availability as team totals: no member, no per-member days, no saver.

The plan is saved from a scenario that changes one member's days off, so every place a member
could show (the capacity table, the scenario's changed inputs) is exercised.
"""

from __future__ import annotations

import re

from fastapi.testclient import TestClient
from sqlmodel import Session

from server.planning.published_view import published_view_of
from server.planning.snapshots import view_of
from server.store import plans as store
from tests.factories import make_member, set_days_off
from tests.plans.conftest import Workspace, collect, publish

# Kenji: 1.5 days off live, 6.5 in the scenario. Team: Ola 0 + Ines 2 + Kenji -> 3.5 live, 8.5.
KENJI_LIVE, KENJI_SCENARIO = 1.5, 6.5


def _text(html: str) -> str:
    """The page as read: tags dropped, whitespace folded."""
    return re.sub(r"\s+", " ", re.sub(r"<[^>]+>", " ", html))


def _scenario_plan(session: Session, workspace: Workspace, client: TestClient) -> dict:
    kenji = make_member(session, workspace.team, "Kenji")
    set_days_off(session, kenji, workspace.period, KENJI_LIVE)
    response = client.post(
        "/api/v1/plans",
        json={
            "name": "More days off",
            "team_id": workspace.team_id,
            "period_id": workspace.period_id,
            "changes": {"days_off": {str(kenji.id): KENJI_SCENARIO}},
        },
    )
    assert response.status_code == 201, response.text
    return response.json()


def test_published_scenario_plan_shows_team_totals_and_no_member(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    plan = _scenario_plan(session, workspace, form_client)
    # The signed-in saved-plan page keeps the detail managers need.
    saved = _text(form_client.get(f"/plans/{plan['id']}").text)
    assert "Kenji: days off: 6.5 days (live: 1.5 days)" in saved
    assert "Ines" in saved
    assert "Ola" in saved

    link = publish(form_client, plan["id"])
    response = TestClient(form_client.app).get(link["url"])  # no account, no cookie
    assert response.status_code == 200
    text = _text(response.text)
    for name in ("Kenji", "Ines", "Ola"):
        assert name not in text
    for days in (KENJI_LIVE, KENJI_SCENARIO, 2):  # each member's own days off, live or not
        assert not re.search(rf"(?<![\d.]){days:g} days", text)
    assert "Share on team" not in text
    assert "Member" not in text
    assert plan["created_by"] == "admin"  # the saver's account name is not shown
    assert "admin" not in text
    assert "saved " + plan["created_at"][:10] in text
    # The team's figures and the scenario's change, in team terms.
    assert "Working days in the period 10" in text
    # The table adds up (it read "10 / days off 8.5 / available 21.5"): 3 people x 10 days.
    assert "× 3 full-time people (the members' shares added up) 30" in text
    assert "− days off, whole team, at the same shares 8.5" in text
    assert "Available person-days 21.5" in text
    assert "Days off for the team: 8.5 days in total, 5 days more (live: 3.5 days)" in text
    assert "× focus factor 0.7" in text
    assert "− reserve 15 %" in text
    # No download or other address behind the link that could carry the members instead.
    assert collect(response.text).urls == [
        ("link", "href", "/static/favicon.svg"),
        ("link", "href", "/static/loadline.css"),
    ]
    for suffix in ("/export.csv", "/export.json", "/export.md", ".csv", ".json"):
        assert TestClient(form_client.app).get(link["url"] + suffix).status_code == 404


def test_a_snapshot_saved_before_the_live_total_was_kept_names_no_member_either(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    plan = _scenario_plan(session, workspace, form_client)
    db_plan = store.get_plan(session, plan_id=plan["id"])
    older = {k: v for k, v in db_plan.result.items() if k != "live_days_off"}
    shown = published_view_of(view_of(db_plan.inputs, older))
    assert shown.changes == ["Days off for the team: 8.5 days in total (changed by the scenario)"]
    assert shown.capacity.days_off == 8.5
