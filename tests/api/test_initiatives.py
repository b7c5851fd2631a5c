"""Initiatives through the JSON API: efforts, cross-team lines, needs, either-or, versions."""

from __future__ import annotations

import re
from collections.abc import Callable
from typing import Any

import pytest
from fastapi import FastAPI
from fastapi.testclient import TestClient
from sqlmodel import Session

from server.errors import ConflictError, StaleVersionError
from server.schemas import EffortIn, InitiativeCreate, InitiativeUpdate
from server.store.initiatives import (
    create_initiatives,
    delete_initiatives,
    get_initiative,
    update_initiative,
)
from server.text_rules import VISIBLE_TEXT
from tests.api.conftest import Snapshot, Workspace
from tests.api.support import error_fields, error_text


def _create(client: TestClient, **fields: Any) -> dict[str, Any]:
    response = client.post("/api/v1/initiatives", json=fields)
    assert response.status_code == 201, response.text
    return response.json()


def test_initiative_round_trip(client: TestClient, workspace: Workspace) -> None:
    created = _create(
        client,
        team_id=workspace.team,
        period_id=workspace.period,
        title="Harbour crane upgrade",
        notes="Replace the control cabin.",
        effort={"low": 3, "likely": 5, "high": 9},
        other_efforts=[{"team_id": workspace.other_team, "likely": 2, "low": 1, "high": 4}],
        value=40,
        confidence=0.8,
        state="pinned",
        either_or="Crane work",
        needs=[workspace.initiative],
    )
    assert created["effort"] == {"team_id": workspace.team, "low": 3, "likely": 5, "high": 9}
    assert created["other_efforts"] == [
        {"team_id": workspace.other_team, "low": 1, "likely": 2, "high": 4}
    ]
    assert created["needs"] == [workspace.initiative]
    assert (created["value"], created["confidence"], created["state"]) == (40, 0.8, "pinned")
    assert created["either_or"] == "Crane work"
    assert created["version"] == 1
    assert client.get(f"/api/v1/initiatives/{created['id']}").json() == created

    patched = client.patch(
        f"/api/v1/initiatives/{created['id']}",
        json={
            "version": 1,
            "title": "Crane upgrade",
            "effort": 6,
            "other_efforts": [],
            "either_or": None,
            "period_id": None,
            "needs": [],
            "state": "candidate",
        },
    )
    assert patched.status_code == 200
    after = patched.json()
    assert after["version"] == 2
    assert after["title"] == "Crane upgrade"
    assert after["effort"] == {"team_id": workspace.team, "low": None, "likely": 6, "high": None}
    assert after["other_efforts"] == []
    assert (after["either_or"], after["period_id"], after["needs"]) == (None, None, [])
    assert after["notes"] == "Replace the control cabin."  # untouched fields stay
    assert after["confidence"] == 0.8

    in_period = client.get(
        f"/api/v1/initiatives?team_id={workspace.team}&period_id={workspace.period}"
    ).json()
    assert [i["title"] for i in in_period] == ["Quay wall", "Crane rail"]
    backlog = client.get(f"/api/v1/initiatives?team_id={workspace.team}&backlog=true").json()
    assert [i["id"] for i in backlog] == [created["id"]]
    assert len(client.get("/api/v1/initiatives").json()) == 3

    assert client.delete(f"/api/v1/initiatives/{created['id']}").status_code == 204
    assert client.get(f"/api/v1/initiatives/{created['id']}").status_code == 404


def test_what_a_read_shows_can_be_written_back(
    client: TestClient, workspace: Workspace, snapshot: Callable[[], Snapshot]
) -> None:
    """A read shows the own effort with its team_id; writing that back was refused as an
    unknown field, so a read-change-write client had to strip it first."""
    url = f"/api/v1/initiatives/{workspace.initiative}"
    read = client.get(url).json()
    effort = read["effort"] | {"likely": read["effort"]["likely"] + 1}
    written = client.patch(url, json={"version": read["version"], "effort": effort})
    assert written.status_code == 200, written.text
    assert written.json()["effort"] == effort

    now = written.json()
    before = snapshot()
    foreign = now["effort"] | {"team_id": workspace.other_team}
    refused = client.patch(url, json={"version": now["version"], "effort": foreign})
    assert refused.status_code == 422
    assert error_fields(refused) == ["effort.team_id"]
    assert f"give team {workspace.other_team}'s effort in other_efforts" in error_text(refused)
    assert snapshot() == before

    created = client.post(
        "/api/v1/initiatives",
        json={
            "team_id": workspace.team,
            "title": "Bollard paint",
            "effort": {"likely": 1, "team_id": workspace.other_team},
            "value": 2,
        },
    )
    assert created.status_code == 422
    assert error_fields(created) == ["effort.team_id"]
    assert snapshot() == before


def test_a_bare_number_is_a_single_estimate(client: TestClient, workspace: Workspace) -> None:
    created = _create(client, team_id=workspace.team, title="Bollards", effort=2.5, value=3)
    assert created["effort"] == {
        "team_id": workspace.team,
        "low": None,
        "likely": 2.5,
        "high": None,
    }
    assert created["period_id"] is None  # no period: the backlog
    assert (created["state"], created["confidence"], created["either_or"]) == (
        "candidate",
        None,
        None,
    )


def test_cross_team_work_is_listed_for_the_team_it_involves(
    client: TestClient, workspace: Workspace
) -> None:
    shared = _create(
        client,
        team_id=workspace.team,
        period_id=workspace.period,
        title="Shared signal mast",
        effort=3,
        other_efforts=[{"team_id": workspace.other_team, "likely": 5}],
        value=20,
    )
    owned = client.get(f"/api/v1/initiatives?team_id={workspace.other_team}").json()
    assert owned == []
    involving = client.get(
        f"/api/v1/initiatives?team_id={workspace.other_team}&scope=involving"
    ).json()
    assert [i["id"] for i in involving] == [shared["id"]]
    assert involving[0]["other_efforts"][0]["likely"] == 5


def test_either_or_set_is_shared_by_name(client: TestClient, workspace: Workspace) -> None:
    build = _create(
        client, team_id=workspace.team, title="Build", effort=8, value=9, either_or="Gate"
    )
    buy = _create(client, team_id=workspace.team, title="Buy", effort=2, value=6, either_or="Gate")
    listed = client.get(f"/api/v1/initiatives?team_id={workspace.team}&backlog=true").json()
    assert {i["id"]: i["either_or"] for i in listed} == {build["id"]: "Gate", buy["id"]: "Gate"}
    # A blank set name means no set.
    none = _create(client, team_id=workspace.team, title="Solo", effort=1, value=1, either_or=" ")
    assert none["either_or"] is None


def test_a_set_name_typed_another_way_joins_the_stored_set(
    client: TestClient, workspace: Workspace
) -> None:
    """Either-or sets match by name ignoring case and spaces, as titles do; before, "search "
    made a second set and both alternatives could be chosen."""
    team = workspace.team
    build = _create(client, team_id=team, title="Build", effort=8, value=9, either_or="Gate")
    buy = _create(client, team_id=team, title="Buy", effort=2, value=6, either_or="gate ")
    assert buy["either_or"] == "Gate"
    lease = _create(
        client, team_id=team, title="Lease", effort=2, value=6, either_or="Provider  switch"
    )
    swap = _create(
        client, team_id=team, title="Swap", effort=2, value=6, either_or="provider switch"
    )
    assert (lease["either_or"], swap["either_or"]) == ("Provider  switch", "Provider  switch")
    rent = _create(client, team_id=team, title="Rent", effort=1, value=2, either_or="Other")
    moved = client.patch(
        f"/api/v1/initiatives/{rent['id']}", json={"either_or": "GATE", "version": rent["version"]}
    ).json()
    assert moved["either_or"] == "Gate"
    # A set's only member may change its name's case: no other spelling to keep.
    lone = _create(client, team_id=team, title="Lone", effort=1, value=1, either_or="Solo")
    recased = client.patch(
        f"/api/v1/initiatives/{lone['id']}", json={"either_or": "SOLO", "version": lone["version"]}
    ).json()
    assert recased["either_or"] == "SOLO"
    assert build["either_or"] == "Gate"


def test_names_typed_differently_in_one_batch_make_one_set(
    session: Session, workspace: Workspace
) -> None:
    rows = [
        InitiativeCreate(
            team_id=workspace.team, title=title, effort=EffortIn(likely=1), value=1, either_or=name
        )
        for title, name in (("Kiosk", "Fares"), ("App", "FARES"), ("Web", " fares"))
    ]
    created = create_initiatives(session, initiatives_in=rows)
    session.commit()
    assert [record.row.either_or for record in created] == ["Fares", "Fares", "Fares"]


@pytest.mark.parametrize("method", ["GET", "PATCH", "DELETE"])
def test_unknown_initiative_is_404(client: TestClient, method: str) -> None:
    body = {"version": 1, "title": "x"} if method == "PATCH" else None
    assert client.request(method, "/api/v1/initiatives/4711", json=body).status_code == 404


def test_a_stale_version_is_409_with_the_current_values(
    client: TestClient, workspace: Workspace, snapshot: Callable[[], Snapshot]
) -> None:
    url = f"/api/v1/initiatives/{workspace.initiative}"
    first = client.patch(url, json={"version": 1, "title": "Quay wall, north"})
    assert first.status_code == 200
    before = snapshot()

    second = client.patch(url, json={"version": 1, "title": "Quay wall, south", "value": 99})
    assert second.status_code == 409
    detail = second.json()["detail"]
    assert detail["field"] == "version"
    assert detail["current"]["title"] == "Quay wall, north"
    assert detail["current"]["version"] == 2
    assert detail["current"] == client.get(url).json()
    assert "changed by someone else" in detail["message"]
    assert snapshot() == before

    ahead = client.patch(url, json={"version": 7, "title": "Quay wall, east"})
    assert ahead.status_code == 409
    assert "there is no version 7 yet" in ahead.json()["detail"]["message"]
    assert snapshot() == before


def test_a_change_that_raced_past_the_check_is_still_refused(
    app: FastAPI, workspace: Workspace
) -> None:
    # Two writers read version 1; the second one's check passes on its stale copy, and the
    # versioned UPDATE ... WHERE version = 1 is what refuses it.
    with Session(app.state.engine, expire_on_commit=False) as slow:
        stale = get_initiative(slow, initiative_id=workspace.initiative)
        assert stale.row.version == 1
        with Session(app.state.engine, expire_on_commit=False) as fast:
            update_initiative(
                fast,
                initiative_id=workspace.initiative,
                initiative_in=InitiativeUpdate(version=1, title="Fast"),
            )
        with pytest.raises(StaleVersionError) as refused:
            update_initiative(
                slow,
                initiative_id=workspace.initiative,
                initiative_in=InitiativeUpdate(version=1, title="Slow"),
            )
        assert "while you saved" in refused.value.message  # the UPDATE refused it, not the check
        assert refused.value.current["title"] == "Fast"
    with Session(app.state.engine) as check:
        assert get_initiative(check, initiative_id=workspace.initiative).row.title == "Fast"


def test_a_needs_cycle_is_refused_naming_needs(
    client: TestClient, workspace: Workspace, snapshot: Callable[[], Snapshot]
) -> None:
    # "Crane rail" needs "Quay wall"; making "Quay wall" need "Crane rail" closes a cycle.
    before = snapshot()
    response = client.patch(
        f"/api/v1/initiatives/{workspace.initiative}",
        json={"version": 1, "needs": [workspace.dependant]},
    )
    assert response.status_code == 422
    assert error_fields(response) == ["needs"]
    assert "Quay wall" in error_text(response)
    assert "Crane rail" in error_text(response)
    assert snapshot() == before


def test_a_longer_needs_cycle_is_refused(
    client: TestClient, workspace: Workspace, snapshot: Callable[[], Snapshot]
) -> None:
    # Crane rail -> Quay wall; Signals -> Crane rail; now Quay wall -> Signals would loop.
    signals = _create(
        client,
        team_id=workspace.team,
        title="Signals",
        effort=1,
        value=2,
        needs=[workspace.dependant],
    )
    before = snapshot()
    response = client.patch(
        f"/api/v1/initiatives/{workspace.initiative}",
        json={"version": 1, "needs": [signals["id"]]},
    )
    assert response.status_code == 422
    assert error_fields(response) == ["needs"]
    assert "Signals" in error_text(response)
    assert snapshot() == before
    # Needs that do not loop back are fine: Signals may also need Quay wall directly.
    fine = client.patch(
        f"/api/v1/initiatives/{signals['id']}",
        json={"version": 1, "needs": [workspace.dependant, workspace.initiative]},
    )
    assert fine.status_code == 200
    assert fine.json()["needs"] == sorted([workspace.dependant, workspace.initiative])


def test_deleting_a_needed_initiative_is_refused_naming_who_needs_it(
    client: TestClient, workspace: Workspace, snapshot: Callable[[], Snapshot]
) -> None:
    # Lighthouse's initiative needs Quay wall too; it is named with its team.
    _create(
        client,
        team_id=workspace.other_team,
        title="Beacon on the quay",
        effort=1,
        value=2,
        needs=[workspace.initiative],
    )
    before = snapshot()
    response = client.delete(f"/api/v1/initiatives/{workspace.initiative}")
    assert response.status_code == 409
    assert error_fields(response) == ["initiative_id"]
    assert error_text(response) == (
        "“Quay wall” is needed by “Crane rail” and “Beacon on the quay” (team Lighthouse); "
        "remove it from their needs first."
    )
    assert snapshot() == before  # the needs, versions and audit trail are as they were
    dependant = client.get(f"/api/v1/initiatives/{workspace.dependant}").json()
    assert (dependant["needs"], dependant["version"]) == ([workspace.initiative], 1)


def test_an_initiative_needed_by_many_names_the_first_ten(
    client: TestClient, workspace: Workspace
) -> None:
    for number in range(11):  # with Crane rail, twelve initiatives need Quay wall
        _create(
            client,
            team_id=workspace.team,
            title=f"Bollard {number}",
            effort=1,
            value=1,
            needs=[workspace.initiative],
        )
    response = client.delete(f"/api/v1/initiatives/{workspace.initiative}")
    assert response.status_code == 409
    message = error_text(response)
    assert "“Crane rail”, “Bollard 0”, " in message
    assert "“Bollard 8” and 2 more; remove it" in message
    assert "Bollard 9" not in message


def test_once_nothing_needs_it_an_initiative_can_be_deleted(
    client: TestClient, workspace: Workspace
) -> None:
    # Deleting the dependant is fine (it needs, it is not needed); then its need is gone too.
    assert client.delete(f"/api/v1/initiatives/{workspace.dependant}").status_code == 204
    assert client.delete(f"/api/v1/initiatives/{workspace.initiative}").status_code == 204
    assert client.get(f"/api/v1/initiatives/{workspace.initiative}").status_code == 404
    deleted = client.get("/api/v1/audit", params={"entity": "initiative"}).json()
    assert [(e["action"], e["entity_id"]) for e in deleted[:2]] == [
        ("initiative.delete", workspace.initiative),
        ("initiative.delete", workspace.dependant),
    ]


def test_initiatives_deleted_together_may_need_each_other(
    session: Session, workspace: Workspace, snapshot: Callable[[], Snapshot]
) -> None:
    # Crane rail needs Quay wall: Quay wall alone is refused, both together are deleted.
    before = snapshot()
    with pytest.raises(ConflictError, match="“Quay wall” is needed by “Crane rail”"):
        delete_initiatives(session, initiative_ids=[workspace.initiative])
    assert snapshot() == before
    delete_initiatives(session, initiative_ids=[workspace.initiative, workspace.dependant])
    after = snapshot()
    assert after["initiative"] == after["initiative_need"] == []
    deleted = [row for row in after["audit_entry"] if "initiative.delete" in row]
    assert len(deleted) == 2


@pytest.mark.parametrize(
    "title",
    [
        "Fare\x00capping",  # NUL
        "Fare\tcapping",  # tab
        "Fare\ncapping",  # line break
        "\u200b\u200b",  # only zero-width spaces: looks empty
        "Fares \u202e gnippac",  # right-to-left override: reverses what follows on pages
        "Fares \u2067 isolate",  # right-to-left isolate
    ],
)
def test_titles_must_be_visible_text(
    client: TestClient, workspace: Workspace, snapshot: Callable[[], Snapshot], title: str
) -> None:
    before = snapshot()
    response = client.post(
        "/api/v1/initiatives",
        json={"team_id": workspace.team, "title": title, "effort": 1, "value": 1},
    )
    assert response.status_code == 422
    assert error_fields(response) == ["title"]
    assert "visible characters only" in error_text(response)
    assert snapshot() == before


def test_titles_in_any_script_are_kept() -> None:
    """Letters of any script, emoji and right-to-left text itself are ordinary text."""
    for title in ("Ünïcødé 🚌 — 中文", "تذاكر الحافلات", "Billets de bus (אוטובוס)"):
        assert re.fullmatch(VISIBLE_TEXT, title), title


def test_saving_an_initiative_unchanged_adds_no_audit_entry(
    client: TestClient, workspace: Workspace
) -> None:
    made = _create(client, team_id=workspace.team, title="Bollards", effort=2, value=3)
    before = len(client.get("/api/v1/audit?entity=initiative").json())
    same = client.patch(
        f"/api/v1/initiatives/{made['id']}", json={"version": made["version"], "value": 3}
    )
    assert same.status_code == 200
    entries = client.get("/api/v1/audit?entity=initiative").json()
    assert len(entries) == before  # no "Changed nothing of “Bollards”"
    assert not any(e["summary"].startswith("Changed nothing") for e in entries)
    # Nor a new version: a colleague holding the row can still save over it.
    assert same.json()["version"] == made["version"]
    assert same.json()["updated_at"] == made["updated_at"]
    theirs = client.patch(
        f"/api/v1/initiatives/{made['id']}", json={"version": made["version"], "value": 4}
    )
    assert theirs.status_code == 200, theirs.text
    assert theirs.json()["version"] == made["version"] + 1
