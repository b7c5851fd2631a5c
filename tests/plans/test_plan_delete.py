"""Deleting a saved plan: asked for in use (a plan saved under a wrong name stayed for good,
and kept its period from being deleted). The plan and its links go, the audit trail keeps
what it was, and nothing is deleted without the box ticked."""

from __future__ import annotations

from collections.abc import Iterator

import pytest
from fastapi import FastAPI
from fastapi.testclient import TestClient
from sqlmodel import Session, col, select

from server.models import AuditEntry, Publication, SavedPlan
from tests.conftest import bearer
from tests.pages.html_tree import parse_html
from tests.plans.conftest import Workspace, counts, publish, save_live


def test_the_api_deletes_a_plan_and_its_links_and_the_audit_keeps_what_it_was(
    session: Session, workspace: Workspace, client: TestClient
) -> None:
    plan = save_live(client, workspace, "Sprint plan (wrong name)")
    kept = save_live(client, workspace, "Sprint plan")
    link = publish(client, plan["id"])
    assert client.get(link["url"]).status_code == 200
    deleted = client.delete(f"/api/v1/plans/{plan['id']}")
    assert deleted.status_code == 204, deleted.text
    assert client.get(f"/api/v1/plans/{plan['id']}").status_code == 404
    assert client.get(link["url"]).status_code == 404
    assert client.get(f"/api/v1/plans/{kept['id']}").status_code == 200
    session.expire_all()
    assert session.exec(select(Publication).where(Publication.plan_id == plan["id"])).all() == []
    entry = session.exec(
        select(AuditEntry).where(AuditEntry.action == "plan.delete").order_by(col(AuditEntry.id))
    ).one()
    assert entry.entity_id == plan["id"]
    assert entry.before["name"] == "Sprint plan (wrong name)"
    titles = {i["key"]: i["title"] for i in plan["inputs"]["initiatives"]}
    assert entry.before["chosen"] == [titles[k] for k in plan["result"]["chosen"]]
    # The Changes list shows what the plan was (found in use: its cells were empty).
    rows = parse_html(client.get("/audit").text).find_all("tr")
    row = " ".join(next(r for r in rows if "Deleted saved plan" in r.text()).text().split())
    assert "chosen" in row
    assert titles[plan["result"]["chosen"][0]] in row
    assert f"plan value: {plan['result']['value']:g}" in row
    assert entry.before["published_links"] == 1
    assert "Deleted saved plan “Sprint plan (wrong name)” and its 1 published link" in entry.summary
    assert client.delete(f"/api/v1/plans/{plan['id']}").status_code == 404
    # Comparing with it now names the missing plan.
    missing = client.get("/api/v1/compare", params={"plans": f"{kept['id']},{plan['id']}"})
    assert missing.status_code == 404
    assert str(plan["id"]) in missing.text


def test_a_period_whose_only_saved_plan_is_deleted_can_be_deleted(
    session: Session, workspace: Workspace, client: TestClient
) -> None:
    other = client.post(
        "/api/v1/periods",
        json={
            "name": "Spare sprint",
            "kind": "sprint",
            "start_date": "2027-05-03",
            "end_date": "2027-05-14",
        },
    ).json()
    plan = client.post(
        "/api/v1/plans",
        json={"name": "Spare", "team_id": workspace.team_id, "period_id": other["id"]},
    )
    assert plan.status_code == 201, plan.text  # the team's members have days there too
    refused = client.delete(f"/api/v1/periods/{other['id']}")
    assert refused.status_code == 409
    assert "delete the saved plans" in refused.text
    assert client.delete(f"/api/v1/plans/{plan.json()['id']}").status_code == 204
    assert client.delete(f"/api/v1/periods/{other['id']}").status_code == 204


def test_the_page_deletes_only_with_the_box_ticked_and_says_so_on_the_list(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    plan = save_live(form_client, workspace, "Sprint plan (wrong name)")
    publish(form_client, plan["id"])
    page = parse_html(form_client.get(f"/plans/{plan['id']}").text)
    label = next(lb for lb in page.find_all("label") if "Yes, delete" in lb.text())
    assert "its published links stop working" in label.text()
    token = form_client.csrf  # type: ignore[attr-defined]
    before = counts(session)
    unticked = form_client.post(
        f"/plans/{plan['id']}/delete", data={"csrf_token": token}, follow_redirects=False
    )
    assert unticked.status_code == 422
    shown = parse_html(unticked.text)
    assert "Tick “Yes, delete Sprint plan (wrong name)”" in shown.by_id("delete-error").text()
    assert counts(session) == before
    done = form_client.post(
        f"/plans/{plan['id']}/delete",
        data={"csrf_token": token, "confirm": "yes"},
        follow_redirects=False,
    )
    assert done.status_code == 303
    location = done.headers["location"]
    assert location.startswith(f"/plans?team_id={workspace.team_id}&deleted=")
    listing = parse_html(form_client.get(location).text)
    assert listing.by_id("deleted-notice").text() == (
        "Deleted saved plan “Sprint plan (wrong name)” and its 1 published link."
    )
    session.expire_all()
    assert session.get(SavedPlan, plan["id"]) is None
    # A made-up code says nothing.
    made_up = parse_html(form_client.get("/plans?deleted=1").text)
    assert made_up.find(id="deleted-notice") is None


@pytest.fixture
def viewer(app: FastAPI) -> Iterator[TestClient]:
    with TestClient(app, headers=bearer("viewer")) as signed_in:
        yield signed_in


def test_a_viewer_cannot_delete_a_plan(
    session: Session, workspace: Workspace, client: TestClient, viewer: TestClient
) -> None:
    plan = save_live(client, workspace)
    assert viewer.delete(f"/api/v1/plans/{plan['id']}").status_code == 403
    page = viewer.get(f"/plans/{plan['id']}").text
    assert f"/plans/{plan['id']}/delete" not in page
    session.expire_all()
    assert session.get(SavedPlan, plan["id"]) is not None
