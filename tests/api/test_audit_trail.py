"""The audit trail of teams, members, availability, capacity settings and periods."""

from __future__ import annotations

from typing import Any

from fastapi import FastAPI
from fastapi.testclient import TestClient
from sqlmodel import Session, select

from server import demo
from server.models import AuditEntry
from tests.conftest import bearer
from tests.pages.html_tree import parse_html


def _trail(client: TestClient, **params: Any) -> list[dict[str, Any]]:
    """Entries oldest first, as they happened."""
    response = client.get("/api/v1/audit", params=params)
    assert response.status_code == 200
    return list(reversed(response.json()))


def _made(client: TestClient, url: str, body: dict[str, Any]) -> dict[str, Any]:
    response = client.post(url, json=body)
    assert response.status_code == 201, response.text
    return response.json()


def _ok(response: Any) -> None:
    assert response.status_code in (200, 204), response.text


def _period(client: TestClient, name: str = "Sprint 1") -> dict[str, Any]:
    return _made(
        client,
        "/api/v1/periods",
        {"name": name, "kind": "sprint", "start_date": "2027-03-01", "end_date": "2027-03-12"},
    )


def test_team_changes_are_recorded_with_who_and_the_values(client: TestClient) -> None:
    team = _made(client, "/api/v1/teams", {"name": "Harbour"})
    _ok(client.patch(f"/api/v1/teams/{team['id']}", json={"name": "Harbour Ops"}))
    _ok(client.patch(f"/api/v1/teams/{team['id']}", json={"default_spread": 0.25}))
    _ok(client.patch(f"/api/v1/teams/{team['id']}", json={"default_spread": 0.25}))  # no change
    both = {"name": "Harbour Works", "default_spread": 0.1}
    _ok(client.patch(f"/api/v1/teams/{team['id']}", json=both))
    _ok(client.delete(f"/api/v1/teams/{team['id']}"))

    created, renamed, spread, renamed_and_spread, deleted = _trail(client, entity="team")
    # A rename with another change names both: the summary alone hid the spread before.
    assert renamed_and_spread["summary"] == (
        "Renamed team “Harbour Ops” to “Harbour Works” and changed its default spread"
    )
    assert {e["actor"] for e in (created, renamed, spread, deleted)} == {"admin"}
    assert {e["team_id"] for e in (created, renamed, spread, deleted)} == {team["id"]}
    assert (created["action"], created["summary"]) == ("team.create", "Added team “Harbour”")
    assert created["after"] == {"name": "Harbour", "default_spread": 0.0}
    assert renamed["summary"] == "Renamed team “Harbour” to “Harbour Ops”"
    assert (renamed["before"], renamed["after"]) == ({"name": "Harbour"}, {"name": "Harbour Ops"})
    assert spread["summary"] == "Changed default spread of team “Harbour Ops”"
    assert (spread["before"], spread["after"]) == (
        {"default_spread": 0.0},
        {"default_spread": 0.25},
    )
    assert (deleted["action"], deleted["summary"]) == (
        "team.delete",
        "Deleted team “Harbour Works”",
    )
    assert deleted["before"]["name"] == "Harbour Works"


def test_member_changes_are_recorded(client: TestClient) -> None:
    team = _made(client, "/api/v1/teams", {"name": "Harbour"})
    member = _made(client, "/api/v1/members", {"team_id": team["id"], "name": "Ola"})
    _ok(client.patch(f"/api/v1/members/{member['id']}", json={"name": "Ola N."}))
    _ok(client.patch(f"/api/v1/members/{member['id']}", json={"allocation": 0.5}))
    _ok(client.delete(f"/api/v1/members/{member['id']}"))

    added, renamed, share, removed = _trail(client, entity="member")
    assert {e["actor"] for e in (added, renamed, share, removed)} == {"admin"}
    assert {e["team_id"] for e in (added, renamed, share, removed)} == {team["id"]}
    assert added["summary"] == "Added member “Ola” to team “Harbour” (share 100 %)"
    assert renamed["summary"] == "Member “Ola” of team “Harbour”: renamed to “Ola N.”"
    assert (renamed["before"], renamed["after"]) == ({"name": "Ola"}, {"name": "Ola N."})
    assert share["summary"] == "Member “Ola N.” of team “Harbour”: share 100 % → share 50 %"
    assert (share["before"], share["after"]) == ({"allocation": 1.0}, {"allocation": 0.5})
    assert (removed["action"], removed["summary"]) == (
        "member.delete",
        "Removed member “Ola N.” from team “Harbour”",
    )


def test_availability_is_recorded_as_days_and_share_only(client: TestClient) -> None:
    team = _made(client, "/api/v1/teams", {"name": "Harbour"})
    member = _made(client, "/api/v1/members", {"team_id": team["id"], "name": "Ola"})
    period = _period(client)
    body = {"member_id": member["id"], "period_id": period["id"], "days_off": 2}
    row = _made(client, "/api/v1/availability", body)
    _made(client, "/api/v1/availability", body | {"days_off": 3})  # replaces the row
    _ok(client.patch(f"/api/v1/availability/{row['id']}", json={"allocation": 0.8}))
    _ok(client.delete(f"/api/v1/availability/{row['id']}"))

    first, replaced, shared, cleared = _trail(client, entity="availability")
    assert {e["actor"] for e in (first, replaced, shared, cleared)} == {"admin"}
    assert {e["team_id"] for e in (first, replaced, shared, cleared)} == {team["id"]}
    assert {e["entity_id"] for e in (first, replaced, shared, cleared)} == {row["id"]}
    where = "“Ola” (team “Harbour”) in “Sprint 1”"
    assert first["summary"] == f"Set availability of {where}: 2 days off, the member's usual share"
    assert (first["before"], first["after"]) == (None, {"days_off": 2.0, "allocation": None})
    assert replaced["before"] == {"days_off": 2.0, "allocation": None}
    assert replaced["after"] == {"days_off": 3.0, "allocation": None}
    assert shared["summary"] == (
        f"Changed availability of {where}: 3 days off, the member's usual share → "
        "3 days off, share 80 %"
    )
    assert cleared["summary"] == f"Cleared availability of {where}"
    assert (cleared["before"], cleared["after"]) == ({"days_off": 3.0, "allocation": 0.8}, None)
    # Nothing but days and the share is ever kept.
    for entry in (first, replaced, shared, cleared):
        for values in (entry["before"], entry["after"]):
            assert set(values or {}) <= {"days_off", "allocation"}


def test_capacity_settings_are_recorded_from_the_defaults(client: TestClient) -> None:
    team = _made(client, "/api/v1/teams", {"name": "Harbour"})
    period = _period(client)
    url = f"/api/v1/teams/{team['id']}/periods/{period['id']}/capacity"
    _ok(client.put(url, json={"focus_factor": 0.8, "reserve_pct": 10}))
    _ok(client.put(url, json={"focus_factor": 0.8, "reserve_pct": 10}))  # no change
    (entry,) = _trail(client, entity="capacity_settings")
    assert (entry["action"], entry["actor"], entry["team_id"]) == (
        "capacity.update",
        "admin",
        team["id"],
    )
    assert entry["summary"] == (
        "Changed capacity settings of team “Harbour” in “Sprint 1”: "
        "focus factor 0.7, reserve 15 % → focus factor 0.8, reserve 10 %"
    )
    assert entry["before"] == {"focus_factor": 0.7, "reserve_pct": 15.0}
    assert entry["after"] == {"focus_factor": 0.8, "reserve_pct": 10.0}


def test_period_changes_are_recorded(app: FastAPI) -> None:
    with TestClient(app, headers=bearer("editor")) as editor:
        period = _period(editor)
        _ok(editor.patch(f"/api/v1/periods/{period['id']}", json={"name": "Sprint 1b"}))
        _ok(editor.patch(f"/api/v1/periods/{period['id']}", json={"end_date": "2027-03-11"}))
        _ok(editor.delete(f"/api/v1/periods/{period['id']}"))
        created, renamed, shortened, deleted = _trail(editor, entity="period")
    assert {e["actor"] for e in (created, renamed, shortened, deleted)} == {"editor"}
    assert created["summary"] == "Added sprint “Sprint 1” (2027-03-01 to 2027-03-12)"
    assert created["after"]["end_date"] == "2027-03-12"
    assert renamed["summary"] == "Changed name of period “Sprint 1”"
    assert (renamed["before"], renamed["after"]) == ({"name": "Sprint 1"}, {"name": "Sprint 1b"})
    assert shortened["summary"] == "Changed end date of period “Sprint 1b”"
    assert shortened["before"] == {"end_date": "2027-03-12"}
    assert shortened["after"] == {"end_date": "2027-03-11"}
    assert deleted["action"] == "period.delete"


def test_refused_writes_leave_no_entry(client: TestClient) -> None:
    team = _made(client, "/api/v1/teams", {"name": "Harbour"})
    _made(client, "/api/v1/members", {"team_id": team["id"], "name": "Ola"})
    period = _period(client)
    before = len(_trail(client))
    assert client.post("/api/v1/teams", json={"name": "harbour"}).status_code == 409
    duplicate = {"team_id": team["id"], "name": "ola"}
    assert client.post("/api/v1/members", json=duplicate).status_code == 409
    assert client.post("/api/v1/periods", json={"name": "sprint 1"}).status_code == 422
    too_many = {"member_id": 1, "period_id": period["id"], "days_off": 11}
    refused = client.post("/api/v1/availability", json=too_many)
    assert refused.status_code == 422
    assert "more than the 10 working days" in refused.text
    assert len(_trail(client)) == before


def test_the_changes_page_shows_them_and_filters_by_team(client: TestClient) -> None:
    harbour = _made(client, "/api/v1/teams", {"name": "Harbour"})
    _made(client, "/api/v1/teams", {"name": "Lighthouse"})
    member = _made(client, "/api/v1/members", {"team_id": harbour["id"], "name": "Ola"})
    _ok(client.patch(f"/api/v1/members/{member['id']}", json={"allocation": 0.5}))
    period = _period(client)
    body = {"member_id": member["id"], "period_id": period["id"], "days_off": 2}
    _made(client, "/api/v1/availability", body)

    everything = parse_html(client.get("/audit").text).text()
    assert "Added team “Lighthouse”" in everything
    assert "Member “Ola” of team “Harbour”: share 100 % → share 50 %" in everything
    root = parse_html(client.get("/audit", params={"team_id": harbour["id"]}).text)
    shown = root.text()
    assert "Added team “Harbour”" in shown
    assert "Added member “Ola” to team “Harbour”" in shown
    assert "Added team “Lighthouse”" not in shown
    # Before and after of the share change are in their columns.
    cells = [row.text() for row in root.find_all("tr")]
    (share_row,) = [c for c in cells if "share 100 % → share 50 %" in c]
    assert "share: 100 % share: 50 %" in share_row  # shares as the pages type them
    (days_row,) = [c for c in cells if "Set availability of “Ola”" in c]
    assert "days off: 2 days " in days_row  # field names in words, numbers without float noise
    assert "share: the member's usual share" in days_row


def test_the_demo_records_its_workspace_as_the_demo(app: FastAPI, session: Session) -> None:
    assert demo.load_if_empty(app.state.engine) is True
    entries = list(session.exec(select(AuditEntry)))
    assert {entry.actor for entry in entries} == {"demo"}
    actions = {entry.action for entry in entries}
    assert {"period.create", "team.create", "member.create", "availability.set"} <= actions
    # The demo's focus factor and reserve are the defaults: storing them changes nothing.
    assert "capacity.update" not in actions
    members = sum(len(people) for people in demo.TEAMS.values())
    assert sum(entry.action == "member.create" for entry in entries) == members
