"""Periods through the JSON API: dates, non-working days, working-day counts, duplicates."""

from __future__ import annotations

from collections.abc import Callable

import pytest
from fastapi.testclient import TestClient

from tests.api.conftest import Snapshot, Workspace
from tests.api.support import error_fields, error_text

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
    assert moved.json() == period | {
        "end_date": "2027-04-02",
        "working_days": 13,
        "etag": moved.headers["etag"],
    }
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


def test_shortening_a_period_below_someones_days_off_is_refused(
    client: TestClient, workspace: Workspace, snapshot: Callable[[], Snapshot]
) -> None:
    # Ola has 2 days off in Sprint 1 (Mon 1 to Fri 12 March 2027, 10 working days).
    url = f"/api/v1/periods/{workspace.period}"
    before = snapshot()
    response = client.patch(url, json={"end_date": "2027-03-01"})  # 1 working day
    assert response.status_code == 422
    assert error_fields(response) == ["end_date"]
    assert "Sprint 1 has 1 working day, fewer than the days off of Ola (2)" in error_text(response)
    assert snapshot() == before
    weekends = client.patch(url, json={"weekmask": "1000000"})  # Mondays only: 2 days
    assert weekends.status_code == 200
    assert error_fields(client.patch(url, json={"weekmask": "0000001"})) == ["weekmask"]


@pytest.mark.parametrize(
    ("change", "field"),
    [
        ({"start_date": "2027-03-20", "end_date": "2027-03-21"}, "end_date"),  # Sat and Sun
        (
            {
                "end_date": "2027-03-19",
                "non_working_dates": [f"2027-03-{day}" for day in range(15, 20)],
            },
            "non_working_dates",
        ),
        ({"end_date": "2027-03-20", "weekmask": "0000001"}, "end_date"),  # Mon to Sat, Sundays
    ],
    ids=["weekend", "all days off", "mask misses the span"],
)
def test_a_period_without_a_working_day_is_refused(
    client: TestClient,
    workspace: Workspace,
    snapshot: Callable[[], Snapshot],
    change: dict[str, object],
    field: str,
) -> None:
    # A period with no working day gives no capacity to plan with, whichever input emptied it.
    before = snapshot()
    created = client.post("/api/v1/periods", json=SPRINT_2 | change)
    assert created.status_code == 422, created.text
    assert error_fields(created) == [field]
    assert "at least one working day" in error_text(created) or "needs at least one" in (
        error_text(created)
    )
    assert snapshot() == before
    url = f"/api/v1/periods/{workspace.period}"
    moved = client.patch(url, json={"start_date": "2027-03-06", "end_date": "2027-03-07"})
    assert moved.status_code == 422
    assert error_fields(moved) == ["end_date"]
    assert snapshot() == before


def _audit_actions(client: TestClient) -> list[str]:
    return [e["action"] for e in client.get("/api/v1/audit").json()]


def test_deleting_a_period_in_use_is_refused_and_changes_nothing(
    client: TestClient, workspace: Workspace, snapshot: Callable[[], Snapshot]
) -> None:
    # Lighthouse has work in the period too: the refusal names each team's count.
    client.post(
        "/api/v1/initiatives",
        json={
            "team_id": workspace.other_team,
            "period_id": workspace.period,
            "title": "Beacon",
            "effort": 1,
            "value": 2,
        },
    )
    before = snapshot()
    response = client.delete(f"/api/v1/periods/{workspace.period}")
    assert response.status_code == 409
    assert error_fields(response) == ["period_id"]
    message = error_text(response)
    assert "“Sprint 1” still has 3 initiatives (Harbour 2, Lighthouse 1)" in message
    assert "1 availability entry" in message
    assert "move the initiatives to another period or to the backlog" in message
    assert snapshot() == before
    initiative = client.get(f"/api/v1/initiatives/{workspace.initiative}").json()
    assert initiative["period_id"] == workspace.period
    assert "period.delete" not in _audit_actions(client)


def _use_scenario(client: TestClient, team: int, period: int) -> None:
    body = {"name": "Short", "team_id": team, "period_id": period}
    assert client.post("/api/v1/scenarios", json=body).status_code == 201


def _use_saved_plan(client: TestClient, team: int, period: int) -> None:
    body = {"name": "Baseline", "team_id": team, "period_id": period}
    assert client.post("/api/v1/plans", json=body).status_code == 201


def _use_availability(client: TestClient, member: int, period: int) -> None:
    body = {"member_id": member, "period_id": period, "days_off": 1}
    assert client.post("/api/v1/availability", json=body).status_code == 201


@pytest.mark.parametrize(
    ("use", "words"),
    [
        (
            lambda c, ws, p: _use_availability(c, ws.member, p),
            ["1 availability entry", "delete the availability entries first"],
        ),
        (
            lambda c, ws, p: _use_scenario(c, ws.team, p),
            ["1 scenario", "delete the scenarios first"],
        ),
        (
            lambda c, ws, p: _use_saved_plan(c, ws.team, p),
            ["1 saved plan", "delete the saved plans"],
        ),
    ],
    ids=["availability", "scenario", "saved plan"],
)
def test_each_use_of_a_period_alone_refuses_its_deletion(
    client: TestClient,
    workspace: Workspace,
    snapshot: Callable[[], Snapshot],
    use: Callable[[TestClient, Workspace, int], None],
    words: list[str],
) -> None:
    period = client.post("/api/v1/periods", json=SPRINT_2).json()
    use(client, workspace, period["id"])
    before = snapshot()
    response = client.delete(f"/api/v1/periods/{period['id']}")
    assert response.status_code == 409
    assert error_fields(response) == ["period_id"]
    message = error_text(response)
    assert "initiative" not in message  # only what is there is named
    for word in words:
        assert word in message
    assert snapshot() == before


def test_a_period_emptied_of_its_uses_can_be_deleted_and_is_audited(
    client: TestClient, workspace: Workspace
) -> None:
    for initiative in (workspace.initiative, workspace.dependant):
        moved = client.patch(
            f"/api/v1/initiatives/{initiative}", json={"version": 1, "period_id": None}
        )
        assert moved.status_code == 200, moved.text
    assert client.delete(f"/api/v1/availability/{workspace.availability}").status_code == 204

    assert client.delete(f"/api/v1/periods/{workspace.period}").status_code == 204
    assert client.get(f"/api/v1/periods/{workspace.period}").status_code == 404
    backlog = client.get(f"/api/v1/initiatives?team_id={workspace.team}&backlog=true").json()
    assert {i["id"] for i in backlog} == {workspace.initiative, workspace.dependant}
    # The capacity settings went with the period; the audit entry keeps what they were.
    # Newest first: the deletion, after the period's creation.
    entry, created = client.get("/api/v1/audit", params={"entity": "period"}).json()
    assert created["action"] == "period.create"
    assert (entry["action"], entry["entity_id"]) == ("period.delete", workspace.period)
    assert entry["summary"] == "Deleted period “Sprint 1”"
    assert entry["before"]["name"] == "Sprint 1"
    assert entry["before"]["capacity_settings"] == [
        {"team_id": workspace.team, "focus_factor": 0.7, "reserve_pct": 15.0}
    ]
