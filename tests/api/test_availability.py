"""Availability through the JSON API: days off (never reasons) per member and period."""

from __future__ import annotations

from collections.abc import Callable

import pytest
from fastapi.testclient import TestClient

from tests.api.conftest import Snapshot, Workspace
from tests.api.support import error_fields, error_text


def test_availability_round_trip(client: TestClient, workspace: Workspace) -> None:
    kari = client.post(
        "/api/v1/members", json={"team_id": workspace.team, "name": "Kari", "allocation": 0.5}
    ).json()
    created = client.post(
        "/api/v1/availability",
        json={"member_id": kari["id"], "period_id": workspace.period, "days_off": 1.5},
    )
    assert created.status_code == 201
    row = created.json()
    assert row == {
        "id": row["id"],
        "member_id": kari["id"],
        "period_id": workspace.period,
        "days_off": 1.5,
        "allocation": None,
        "etag": created.headers["etag"],
    }
    assert client.get(f"/api/v1/availability/{row['id']}").json() == row

    # A share for this period only, then cleared again with null.
    changed = client.patch(f"/api/v1/availability/{row['id']}", json={"allocation": 0.2})
    assert changed.json() == row | {"allocation": 0.2, "etag": changed.headers["etag"]}
    changed = client.patch(f"/api/v1/availability/{row['id']}", json={"days_off": 3})
    assert changed.json() == row | {
        "allocation": 0.2,
        "days_off": 3,
        "etag": changed.headers["etag"],
    }
    cleared = client.patch(f"/api/v1/availability/{row['id']}", json={"allocation": None})
    assert cleared.json() == row | {"days_off": 3, "etag": cleared.headers["etag"]}

    listed = client.get(
        f"/api/v1/availability?team_id={workspace.team}&period_id={workspace.period}"
    ).json()
    assert {(r["member_id"], r["days_off"]) for r in listed} == {
        (workspace.member, 2),
        (kari["id"], 3),
    }
    assert client.get(f"/api/v1/availability?team_id={workspace.other_team}").json() == []

    assert client.delete(f"/api/v1/availability/{row['id']}").status_code == 204
    assert client.get(f"/api/v1/availability/{row['id']}").status_code == 404


def test_setting_availability_again_replaces_the_row(
    client: TestClient, workspace: Workspace
) -> None:
    again = client.post(
        "/api/v1/availability",
        json={"member_id": workspace.member, "period_id": workspace.period, "days_off": 4},
    )
    assert again.status_code == 201
    assert again.json()["id"] == workspace.availability
    rows = client.get(f"/api/v1/availability?period_id={workspace.period}").json()
    assert [(r["member_id"], r["days_off"]) for r in rows] == [(workspace.member, 4)]


def test_all_working_days_off_is_allowed(client: TestClient, workspace: Workspace) -> None:
    response = client.patch(f"/api/v1/availability/{workspace.availability}", json={"days_off": 10})
    assert response.status_code == 200


def test_days_off_over_the_working_days_is_refused(
    client: TestClient, workspace: Workspace, snapshot: Callable[[], Snapshot]
) -> None:
    before = snapshot()
    response = client.post(
        "/api/v1/availability",
        json={"member_id": workspace.member, "period_id": workspace.period, "days_off": 10.5},
    )
    assert response.status_code == 422
    assert error_fields(response) == ["days_off"]
    assert "10 working days" in error_text(response)
    assert snapshot() == before


@pytest.mark.parametrize("method", ["GET", "PATCH", "DELETE"])
def test_unknown_availability_is_404(client: TestClient, method: str) -> None:
    body = {"days_off": 1} if method == "PATCH" else None
    assert client.request(method, "/api/v1/availability/4711", json=body).status_code == 404


@pytest.mark.parametrize(
    ("member", "period", "field"), [(4711, 0, "member_id"), (0, 4711, "period_id")]
)
def test_availability_of_unknown_member_or_period_is_404(
    client: TestClient, workspace: Workspace, member: int, period: int, field: str
) -> None:
    body = {
        "member_id": member or workspace.member,
        "period_id": period or workspace.period,
        "days_off": 1,
    }
    response = client.post("/api/v1/availability", json=body)
    assert response.status_code == 404
    assert error_fields(response) == [field]


def test_a_reason_for_absence_cannot_be_stored(
    client: TestClient, workspace: Workspace, snapshot: Callable[[], Snapshot]
) -> None:
    before = snapshot()
    response = client.patch(
        f"/api/v1/availability/{workspace.availability}", json={"days_off": 3, "reason": "ill"}
    )
    assert response.status_code == 422
    assert error_fields(response) == ["reason"]
    assert snapshot() == before
