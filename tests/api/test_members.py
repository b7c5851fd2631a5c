"""Members through the JSON API."""

from __future__ import annotations

from collections.abc import Callable

import pytest
from fastapi.testclient import TestClient

from tests.api.conftest import Snapshot, Workspace
from tests.api.support import error_fields


def test_member_round_trip(client: TestClient, workspace: Workspace) -> None:
    created = client.post(
        "/api/v1/members", json={"team_id": workspace.team, "name": "Kari", "allocation": 0.5}
    )
    assert created.status_code == 201
    member = created.json()
    assert member == {
        "id": member["id"],
        "team_id": workspace.team,
        "name": "Kari",
        "allocation": 0.5,
        "etag": created.headers["etag"],
    }
    assert client.get(f"/api/v1/members/{member['id']}").json() == member

    updated = client.patch(f"/api/v1/members/{member['id']}", json={"allocation": 0.8})
    assert updated.json() == member | {"allocation": 0.8, "etag": updated.headers["etag"]}
    renamed = client.patch(f"/api/v1/members/{member['id']}", json={"name": "Kari N."})
    assert renamed.json() == member | {
        "allocation": 0.8,
        "name": "Kari N.",
        "etag": renamed.headers["etag"],
    }

    client.post("/api/v1/members", json={"team_id": workspace.other_team, "name": "Sol"})
    mine = client.get(f"/api/v1/members?team_id={workspace.team}").json()
    assert [m["name"] for m in mine] == ["Kari N.", "Ola"]
    assert len(client.get("/api/v1/members").json()) == 3

    assert client.delete(f"/api/v1/members/{member['id']}").status_code == 204
    assert client.get(f"/api/v1/members/{member['id']}").status_code == 404


def test_new_member_defaults_to_full_time(client: TestClient, workspace: Workspace) -> None:
    member = client.post("/api/v1/members", json={"team_id": workspace.team, "name": "Eli"}).json()
    assert member["allocation"] == 1.0


@pytest.mark.parametrize("method", ["GET", "PATCH", "DELETE"])
def test_unknown_member_is_404(client: TestClient, method: str) -> None:
    body = {"name": "Nobody"} if method == "PATCH" else None
    assert client.request(method, "/api/v1/members/4711", json=body).status_code == 404


def test_member_of_an_unknown_team_is_404(
    client: TestClient, snapshot: Callable[[], Snapshot]
) -> None:
    before = snapshot()
    response = client.post("/api/v1/members", json={"team_id": 4711, "name": "Eli"})
    assert response.status_code == 404
    assert error_fields(response) == ["team_id"]
    assert snapshot() == before


def test_duplicate_member_name_in_a_team_is_409(
    client: TestClient, workspace: Workspace, snapshot: Callable[[], Snapshot]
) -> None:
    before = snapshot()
    response = client.post("/api/v1/members", json={"team_id": workspace.team, "name": "OLA"})
    assert response.status_code == 409
    assert error_fields(response) == ["name"]
    assert snapshot() == before
    # The same name on another team is someone else.
    other = client.post("/api/v1/members", json={"team_id": workspace.other_team, "name": "Ola"})
    assert other.status_code == 201


def test_deleting_a_member_removes_their_availability(
    client: TestClient, workspace: Workspace
) -> None:
    assert client.delete(f"/api/v1/members/{workspace.member}").status_code == 204
    assert client.get(f"/api/v1/availability/{workspace.availability}").status_code == 404
    assert client.get(f"/api/v1/availability?team_id={workspace.team}").json() == []
