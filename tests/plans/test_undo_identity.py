"""Undoing a deletion brings back the same initiative: same id, so its effort lines, needs and
marks, scenarios that force it, saved plans and comparisons all find it again."""

from __future__ import annotations

import csv
import io

from fastapi.testclient import TestClient
from sqlmodel import Session, col, select

from server.models import AuditEntry, EffortLine, Initiative, Need
from server.planning.compare import compare
from server.store import plans as plan_store
from server.store.initiatives import get_initiative
from tests.factories import make_team
from tests.pages.html_tree import parse_html
from tests.pages.test_plan_pages import HX, post_form
from tests.plans.conftest import Workspace, add_initiative, edit, save_live

TITLE = "Offline timetable"


def _delete(client: TestClient, initiative_id: int) -> None:
    response = client.delete(f"/api/v1/initiatives/{initiative_id}")
    assert response.status_code in (200, 204), response.text


def _undo(client: TestClient, ws: Workspace) -> str:
    response = post_form(
        client, f"/teams/{ws.team_id}/plan/undo", {"period_id": str(ws.period_id)}, **HX
    )
    assert response.status_code == 200, response.text
    return parse_html(response.text).by_id("notice").text()


def _rows(session: Session, initiative_id: int) -> tuple[list[tuple], list[tuple]]:
    session.expire_all()
    lines = session.exec(
        select(EffortLine.team_id, EffortLine.low, EffortLine.likely, EffortLine.high)
        .where(EffortLine.initiative_id == initiative_id)
        .order_by(col(EffortLine.team_id))
    )
    needs = session.exec(
        select(Need.initiative_id, Need.needed_id)
        .where((Need.initiative_id == initiative_id) | (Need.needed_id == initiative_id))
        .order_by(col(Need.id))
    )
    return list(lines), list(needs)


def test_undoing_a_deletion_brings_back_the_same_initiative(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    lighthouse = make_team(session, "Lighthouse")
    offline = workspace.id_of(TITLE)
    route = workspace.id_of("Route search")
    edit(
        session,
        offline,
        state="pinned",
        either_or="Timetables",
        notes="bus and tram",
        needs=[route],
        other_efforts=[{"team_id": lighthouse.id, "likely": 2, "low": 1, "high": 4}],
    )
    before = get_initiative(session, initiative_id=offline)
    old, position, version = before.to_public(), before.row.position, before.row.version
    stored = _rows(session, offline)
    assert len(stored[0]) == 2
    assert stored[1] == [(offline, route)]
    listed = [r.id for r in session.exec(select(Initiative).order_by(col(Initiative.position)))]

    _delete(form_client, offline)
    assert _rows(session, offline) == ([], [])  # the database took its lines and needs along
    assert _undo(form_client, workspace) == "Brought back “Offline timetable”."

    session.expire_all()
    back = get_initiative(session, initiative_id=offline)  # the same id
    assert _rows(session, offline) == stored
    public = back.to_public()
    assert public.model_dump(exclude={"version", "updated_at", "created_at"}) == old.model_dump(
        exclude={"version", "updated_at", "created_at"}
    )
    assert back.row.position == position  # in its old place in the team's list
    assert back.row.version == version + 1  # open forms of the old row notice
    assert [r.id for r in session.exec(select(Initiative).order_by(col(Initiative.position)))] == (
        listed
    )
    assert session.exec(select(Initiative).where(Initiative.title == TITLE)).all() == [back.row]
    (restored,) = session.exec(
        select(AuditEntry).where(AuditEntry.action == "initiative.restore")
    ).all()
    assert restored.entity_id == offline

    # New initiatives still get fresh ids (PostgreSQL's sequence was not disturbed).
    newer = add_initiative(session, workspace.team, workspace.period, "Night buses", 1, 1)
    assert (newer.row.id or 0) > max(listed)


def test_a_scenario_forcing_a_deleted_initiative_forces_it_again_after_undo(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    offline = workspace.id_of(TITLE)
    created = form_client.post(
        "/api/v1/scenarios",
        json={
            "name": "Offline first",
            "team_id": workspace.team_id,
            "period_id": workspace.period_id,
            "changes": {"forced_in": [offline], "capacity_days": 3},
        },
    )
    assert created.status_code == 201, created.text
    scenario = created.json()["id"]
    _delete(form_client, offline)
    gone = form_client.get(f"/scenarios/{scenario}").text
    assert f"initiative {offline}: forced in" in gone
    _undo(form_client, workspace)
    page = form_client.get(f"/scenarios/{scenario}")
    assert page.status_code == 200
    assert "“Offline timetable”: forced in" in page.text
    assert "no longer in this team's plan" not in page.text
    saved = form_client.post(
        "/api/v1/plans",
        json={
            "name": "From the scenario",
            "team_id": workspace.team_id,
            "period_id": workspace.period_id,
            "changes": {"forced_in": [offline], "capacity_days": 3},
        },
    )
    assert saved.status_code == 201, saved.text
    assert str(offline) in saved.json()["result"]["chosen"]  # the forcing applies


def test_compare_lists_a_restored_initiative_once(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    first = save_live(form_client, workspace, "Before")
    _delete(form_client, workspace.id_of(TITLE))
    _undo(form_client, workspace)
    second = save_live(form_client, workspace, "After")
    ids = f"{second['id']},{first['id']}"

    comparison = compare(plan_store.get_plans(session, plan_ids=[second["id"], first["id"]]))
    titles = [row.title for row in comparison.initiatives]
    assert titles.count(TITLE) == 1
    assert len(titles) == len(workspace.initiatives)
    page = form_client.get(f"/compare?plans={ids}")
    assert page.status_code == 200
    assert page.text.count(f'<tr><th scope="row">{TITLE}') == 1
    assert "not a candidate" not in page.text
    exported = form_client.get(f"/compare/export.csv?plans={ids}")
    assert exported.status_code == 200
    rows = list(csv.reader(io.StringIO(exported.text)))
    assert sum(1 for row in rows if TITLE in row) == 1


def test_a_saved_plan_sees_no_change_after_a_deletion_is_undone(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    plan = save_live(form_client, workspace, "Before")
    _delete(form_client, workspace.id_of(TITLE))
    moved = form_client.get(f"/api/v1/plans/{plan['id']}/changes").json()
    assert moved["moved_on"] is True
    _undo(form_client, workspace)
    changes = form_client.get(f"/api/v1/plans/{plan['id']}/changes").json()
    assert changes["changes"] == []
    assert changes["moved_on"] is False
    page = form_client.get(f"/plans/{plan['id']}/changes").text
    assert "no longer among the candidates" not in page
    assert "was added" not in page


def test_an_id_handed_out_again_meanwhile_brings_the_initiative_back_under_a_new_one(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    newest = max(workspace.id_of(title) for title in workspace.initiatives)
    title = next(t for t in workspace.initiatives if workspace.id_of(t) == newest)
    _delete(form_client, newest)
    # Another team's new initiative: ids are never handed out again (PostgreSQL's sequences,
    # SQLite's AUTOINCREMENT tables since migration 0005), so the old id is free; were it
    # taken, the initiative would come back under a new one.
    lighthouse = make_team(session, "Lighthouse")
    lamp = add_initiative(session, lighthouse, workspace.period, "Lamp", 2, 10).row.id or 0
    assert _undo(form_client, workspace) == f"Brought back “{title}”."
    session.expire_all()
    (back,) = session.exec(select(Initiative).where(Initiative.title == title)).all()
    assert lamp != newest
    assert back.id == newest
    assert get_initiative(session, initiative_id=lamp).row.title == "Lamp"  # left alone
    assert len(get_initiative(session, initiative_id=back.id or 0).efforts) == 1
