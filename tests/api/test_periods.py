"""Periods through the JSON API: dates, non-working days, working-day counts, duplicates."""

from __future__ import annotations

from collections.abc import Callable

import pytest
from fastapi.testclient import TestClient

from tests.api.conftest import Snapshot, Workspace
from tests.api.support import error_fields

SPRINT_2 = {
    "name": "Sprint 2",
    "kind": "sprint",
    "start_date": "2027-03-15",  # a Monday
    "end_date": "2027-03-26",  # the Friday of the next week: 10 weekdays
}


def test_period_round_trip(client: TestClient) -> None:
    # The non-working dates arrive unsorted and with a repeat; they are stored sorted, once.
    body = SPRINT_2 | {"non_working_dates": ["2027-03-19", "2027-03-16", "2027-03-19"]}
    created = client.post("/api/v1/periods", json=body)
    assert created.status_code == 201
    period = created.json()
    assert period["non_working_dates"] == ["2027-03-16", "2027-03-19"]
    assert period["weekmask"] == "1111100"
    assert period["working_days"] == 8  # 10 weekdays minus the two non-working dates
    assert client.get(f"/api/v1/periods/{period['id']}").json() == period

    # Moving the end one week on adds five weekdays; the working days follow.
    moved = client.patch(f"/api/v1/periods/{period['id']}", json={"end_date": "2027-04-02"})
    assert moved.status_code == 200
    assert moved.json() == period | {"end_date": "2027-04-02", "working_days": 13}
    # A four-day week: Monday to Thursday over the three weeks is 12, minus the Tuesday
    # non-working date 16 March (19 March is a Friday, already off) gives 11.
    four_days = client.patch(f"/api/v1/periods/{period['id']}", json={"weekmask": "1111000"})
    assert four_days.json()["working_days"] == 11

    client.post("/api/v1/periods", json=SPRINT_2 | {"name": "Earlier", "start_date": "2027-03-01"})
    names = [p["name"] for p in client.get("/api/v1/periods").json()]
    assert names == ["Earlier", "Sprint 2"]  # by start date

    assert client.delete(f"/api/v1/periods/{period['id']}").status_code == 204
    assert client.get(f"/api/v1/periods/{period['id']}").status_code == 404


def test_a_quarter_counts_its_working_days(client: TestClient) -> None:
    # 4 January to 2 April 2027 is 13 full weeks (65 weekdays, counted on a calendar);
    # two Monday holidays leave 63.
    quarter = client.post(
        "/api/v1/periods",
        json={
            "name": "Q1 2027",
            "kind": "quarter",
            "start_date": "2027-01-04",
            "end_date": "2027-04-02",
            "non_working_dates": ["2027-02-15", "2027-03-29"],
        },
    ).json()
    assert quarter["working_days"] == 63


@pytest.mark.parametrize("method", ["GET", "PATCH", "DELETE"])
def test_unknown_period_is_404(client: TestClient, method: str) -> None:
    body = {"name": "Nowhere"} if method == "PATCH" else None
    assert client.request(method, "/api/v1/periods/4711", json=body).status_code == 404


@pytest.mark.parametrize("clash", ["Sprint 1", "sprint 1", "SPRINT 1"])
def test_duplicate_period_name_is_409(
    client: TestClient, workspace: Workspace, clash: str, snapshot: Callable[[], Snapshot]
) -> None:
    before = snapshot()
    response = client.post("/api/v1/periods", json=SPRINT_2 | {"name": clash})
    assert response.status_code == 409
    assert error_fields(response) == ["name"]
    assert snapshot() == before


def test_renaming_a_period_onto_another_is_409(client: TestClient, workspace: Workspace) -> None:
    other = client.post("/api/v1/periods", json=SPRINT_2).json()
    response = client.patch(f"/api/v1/periods/{other['id']}", json={"name": "sprint 1"})
    assert response.status_code == 409
    assert client.get(f"/api/v1/periods/{other['id']}").json()["name"] == "Sprint 2"


def test_moving_dates_away_from_a_non_working_date_is_422(
    client: TestClient, snapshot: Callable[[], Snapshot]
) -> None:
    period = client.post(
        "/api/v1/periods", json=SPRINT_2 | {"non_working_dates": ["2027-03-25"]}
    ).json()
    before = snapshot()
    response = client.patch(f"/api/v1/periods/{period['id']}", json={"end_date": "2027-03-19"})
    assert response.status_code == 422
    assert error_fields(response) == ["non_working_dates"]
    assert snapshot() == before


def test_deleting_a_period_moves_its_initiatives_to_the_backlog(
    client: TestClient, workspace: Workspace
) -> None:
    assert client.delete(f"/api/v1/periods/{workspace.period}").status_code == 204
    initiative = client.get(f"/api/v1/initiatives/{workspace.initiative}").json()
    assert initiative["period_id"] is None
    backlog = client.get(f"/api/v1/initiatives?team_id={workspace.team}&backlog=true").json()
    assert {i["id"] for i in backlog} == {workspace.initiative, workspace.dependant}
    # Availability in the period goes with it; the member stays.
    assert client.get(f"/api/v1/availability/{workspace.availability}").status_code == 404
    assert client.get(f"/api/v1/members/{workspace.member}").status_code == 200
