"""Teams through the JSON API: round trip, duplicates, and deleting a team that has work."""

from __future__ import annotations

from collections.abc import Callable

import pytest
from fastapi.testclient import TestClient

from tests.api.conftest import Snapshot, Workspace
from tests.api.support import error_fields, error_text


def test_team_round_trip(client: TestClient) -> None:
    created = client.post("/api/v1/teams", json={"name": "  Harbour  ", "default_spread": 0.2})
    assert created.status_code == 201
    team = created.json()
    assert team["name"] == "Harbour"  # surrounding spaces are not part of the name
    assert team["default_spread"] == 0.2

    assert client.get(f"/api/v1/teams/{team['id']}").json() == team

    updated = client.patch(f"/api/v1/teams/{team['id']}", json={"name": "Harbour Works"})
    assert updated.status_code == 200
    assert updated.json() == team | {"name": "Harbour Works", "etag": updated.headers["etag"]}
    assert client.get(f"/api/v1/teams/{team['id']}").json()["name"] == "Harbour Works"

    client.post("/api/v1/teams", json={"name": "anchor"})
    client.post("/api/v1/teams", json={"name": "Beacon"})
    names = [t["name"] for t in client.get("/api/v1/teams").json()]
    assert names == ["anchor", "Beacon", "Harbour Works"]  # alphabetical, ignoring case

    assert client.delete(f"/api/v1/teams/{team['id']}").status_code == 204
    assert client.get(f"/api/v1/teams/{team['id']}").status_code == 404
    assert [t["name"] for t in client.get("/api/v1/teams").json()] == ["anchor", "Beacon"]


@pytest.mark.parametrize("method", ["GET", "PATCH", "DELETE"])
def test_unknown_team_is_404(client: TestClient, method: str) -> None:
    body = {"name": "Nobody"} if method == "PATCH" else None
    response = client.request(method, "/api/v1/teams/4711", json=body)
    assert response.status_code == 404
    assert "4711" in error_text(response)


@pytest.mark.parametrize("clash", ["Harbour", "harbour", "HARBOUR", " Harbour "])
def test_duplicate_team_name_is_409_ignoring_case(
    client: TestClient, clash: str, snapshot: Callable[[], Snapshot]
) -> None:
    client.post("/api/v1/teams", json={"name": "Harbour"})
    before = snapshot()
    response = client.post("/api/v1/teams", json={"name": clash})
    assert response.status_code == 409
    assert error_fields(response) == ["name"]
    assert "Harbour" in error_text(response)
    assert snapshot() == before


def test_renaming_onto_another_team_is_409(client: TestClient) -> None:
    client.post("/api/v1/teams", json={"name": "Harbour"})
    beacon = client.post("/api/v1/teams", json={"name": "Beacon"}).json()
    response = client.patch(f"/api/v1/teams/{beacon['id']}", json={"name": "HARBOUR"})
    assert response.status_code == 409
    assert client.get(f"/api/v1/teams/{beacon['id']}").json()["name"] == "Beacon"
    # A team may change the case of its own name.
    assert client.patch(f"/api/v1/teams/{beacon['id']}", json={"name": "BEACON"}).status_code == 200


def test_deleting_a_team_with_initiatives_is_refused(
    client: TestClient, workspace: Workspace, snapshot: Callable[[], Snapshot]
) -> None:
    before = snapshot()
    response = client.delete(f"/api/v1/teams/{workspace.team}")
    assert response.status_code == 409
    assert "2 initiative" in error_text(response)
    assert snapshot() == before


def test_deleting_a_team_with_its_initiatives_when_asked(
    client: TestClient, workspace: Workspace
) -> None:
    response = client.delete(f"/api/v1/teams/{workspace.team}?with_initiatives=true")
    assert response.status_code == 204
    assert client.get(f"/api/v1/teams/{workspace.team}").status_code == 404
    assert client.get(f"/api/v1/initiatives/{workspace.initiative}").status_code == 404
    assert client.get(f"/api/v1/initiatives/{workspace.dependant}").status_code == 404
    assert client.get(f"/api/v1/members/{workspace.member}").status_code == 404
    assert client.get(f"/api/v1/availability/{workspace.availability}").status_code == 404


def test_a_team_another_team_depends_on_is_kept(
    client: TestClient, workspace: Workspace, snapshot: Callable[[], Snapshot]
) -> None:
    # Lighthouse's own initiative needs Harbour's and carries effort for Harbour: deleting
    # Harbour would take that need and that effort from an initiative nobody asked to change.
    other = client.post(
        "/api/v1/initiatives",
        json={
            "team_id": workspace.other_team,
            "title": "Beacon on the quay",
            "effort": 4,
            "other_efforts": [{"team_id": workspace.team, "likely": 1}],
            "value": 6,
            "needs": [workspace.initiative],
        },
    ).json()
    before = snapshot()

    response = client.delete(f"/api/v1/teams/{workspace.team}?with_initiatives=true")
    assert response.status_code == 409
    message = error_text(response)
    assert "is needed by “Beacon on the quay” (team Lighthouse)" in message
    assert "“Beacon on the quay” (team Lighthouse) carries effort for team “Harbour”" in message
    assert snapshot() == before

    # Without the need, the effort line alone still holds the team.
    unneeded = client.patch(
        f"/api/v1/initiatives/{other['id']}", json={"needs": [], "version": other["version"]}
    ).json()
    response = client.delete(f"/api/v1/teams/{workspace.team}?with_initiatives=true")
    assert response.status_code == 409
    assert "is needed by" not in error_text(response)
    assert "carries effort for team “Harbour”" in error_text(response)

    client.patch(
        f"/api/v1/initiatives/{other['id']}",
        json={"other_efforts": [], "version": unneeded["version"]},
    )
    response = client.delete(f"/api/v1/teams/{workspace.team}?with_initiatives=true")
    assert response.status_code == 204
    survivor = client.get(f"/api/v1/initiatives/{other['id']}").json()
    assert (survivor["needs"], survivor["other_efforts"]) == ([], [])
    assert survivor["effort"]["likely"] == 4


def test_deleting_a_team_without_initiatives_takes_its_members(
    client: TestClient, workspace: Workspace
) -> None:
    member = client.post(
        "/api/v1/members", json={"team_id": workspace.other_team, "name": "Sol"}
    ).json()
    assert client.delete(f"/api/v1/teams/{workspace.other_team}").status_code == 204
    assert client.get(f"/api/v1/members/{member['id']}").status_code == 404
    assert client.get(f"/api/v1/teams/{workspace.team}").status_code == 200


def test_with_initiatives_must_be_a_yes_or_no(client: TestClient, workspace: Workspace) -> None:
    response = client.delete(f"/api/v1/teams/{workspace.team}?with_initiatives=perhaps")
    assert response.status_code == 422
    assert error_fields(response) == ["with_initiatives"]
