"""Team capacity through the JSON API: the breakdown, and focus factor and reserve per period."""

from __future__ import annotations

from collections.abc import Callable

import pytest
from fastapi.testclient import TestClient

from tests.api.conftest import Snapshot, Workspace
from tests.api.support import error_fields


def _url(workspace: Workspace, team: int | None = None, period: int | None = None) -> str:
    return f"/api/v1/teams/{team or workspace.team}/periods/{period or workspace.period}/capacity"


@pytest.fixture
def kari(client: TestClient, workspace: Workspace) -> int:
    """A half-time member with no availability row: fully in."""
    member = client.post(
        "/api/v1/members", json={"team_id": workspace.team, "name": "Kari", "allocation": 0.5}
    )
    return int(member.json()["id"])


def test_capacity_breakdown_worked_by_hand(
    client: TestClient, workspace: Workspace, kari: int
) -> None:
    # 10 working days. Ola: full time, 2 days off -> 8. Kari: half time, none off -> 5.
    # (8 + 5) x 0.7 = 9.1; reserve 15 % = 1.365; capacity 7.735.
    capacity = client.get(_url(workspace)).json()
    assert capacity["working_days"] == 10
    members = {m["member_id"]: m for m in capacity["members"]}
    assert members[workspace.member] == {
        "member_id": workspace.member,
        "name": "Ola",
        "working_days": 10,
        "days_off": 2,
        "available_days": 8,
        "allocation": 1.0,
        "contributed_days": 8,
    }
    assert members[kari]["contributed_days"] == pytest.approx(5)
    assert capacity["gross_days"] == pytest.approx(13)
    assert (capacity["focus_factor"], capacity["reserve_pct"]) == (0.7, 15)
    assert capacity["focused_days"] == pytest.approx(9.1)
    assert capacity["reserve_days"] == pytest.approx(1.365)
    assert capacity["capacity_days"] == pytest.approx(7.735)


def test_setting_focus_and_reserve(client: TestClient, workspace: Workspace, kari: int) -> None:
    # (8 + 5) x 0.8 = 10.4; reserve 10 % = 1.04; capacity 9.36.
    response = client.put(_url(workspace), json={"focus_factor": 0.8, "reserve_pct": 10})
    assert response.status_code == 200
    assert response.json()["capacity_days"] == pytest.approx(9.36)
    assert client.get(_url(workspace)).json() == response.json()
    # Setting it again changes the same settings; 13 x 1.0 x (1 - 0.2) = 10.4.
    again = client.put(_url(workspace), json={"focus_factor": 1, "reserve_pct": 20}).json()
    assert again["capacity_days"] == pytest.approx(10.4)


@pytest.mark.parametrize(
    ("body", "missing"),
    [({"focus_factor": 0.75}, ["reserve_pct"]), ({}, ["focus_factor", "reserve_pct"])],
)
def test_a_setting_left_out_is_refused_not_reset(
    client: TestClient, workspace: Workspace, body: dict[str, float], missing: list[str]
) -> None:
    """Found in use: a PUT of the focus factor alone put the reserve back to 15 %."""
    client.put(_url(workspace), json={"focus_factor": 0.75, "reserve_pct": 10})
    before = client.get(_url(workspace)).json()
    response = client.put(_url(workspace), json=body)
    assert response.status_code == 422, response.text
    assert sorted(error_fields(response)) == missing
    assert client.get(_url(workspace)).json() == before


def test_settings_belong_to_one_period(client: TestClient, workspace: Workspace) -> None:
    other = client.post(
        "/api/v1/periods",
        json={
            "name": "Sprint 2",
            "kind": "sprint",
            "start_date": "2027-03-15",
            "end_date": "2027-03-26",
            "non_working_dates": ["2027-03-19"],
        },
    ).json()
    client.put(_url(workspace), json={"focus_factor": 0.5, "reserve_pct": 0})
    second = client.get(_url(workspace, period=other["id"])).json()
    # Defaults in the other period; Ola has no days off there: 9 working days x 1.0 = 9;
    # x 0.7 = 6.3; reserve 15 % = 0.945; capacity 5.355.
    assert (second["focus_factor"], second["reserve_pct"]) == (0.7, 15)
    assert second["working_days"] == 9
    assert second["capacity_days"] == pytest.approx(5.355)


def test_a_period_share_overrides_the_member_share(
    client: TestClient, workspace: Workspace, kari: int
) -> None:
    # Kari works full time on the team this period: (8 + 10) x 0.7 x 0.85 = 10.71.
    client.post(
        "/api/v1/availability",
        json={"member_id": kari, "period_id": workspace.period, "days_off": 0, "allocation": 1},
    )
    assert client.get(_url(workspace)).json()["capacity_days"] == pytest.approx(10.71)


def test_a_team_without_members_has_no_capacity(client: TestClient, workspace: Workspace) -> None:
    capacity = client.get(_url(workspace, team=workspace.other_team)).json()
    assert capacity["members"] == []
    assert capacity["capacity_days"] == 0


@pytest.mark.parametrize(
    ("team", "period", "field"), [(4711, 0, "team_id"), (0, 4711, "period_id")]
)
@pytest.mark.parametrize("method", ["GET", "PUT"])
def test_capacity_of_unknown_team_or_period_is_404(
    client: TestClient,
    workspace: Workspace,
    snapshot: Callable[[], Snapshot],
    team: int,
    period: int,
    field: str,
    method: str,
) -> None:
    before = snapshot()
    body = {"focus_factor": 0.8, "reserve_pct": 10} if method == "PUT" else None
    response = client.request(method, _url(workspace, team or None, period or None), json=body)
    assert response.status_code == 404
    assert error_fields(response) == [field]
    assert snapshot() == before
