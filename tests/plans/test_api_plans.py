"""The JSON API of saved plans, scenarios, comparisons, links, exports and imports: every action
round trip, its documentation in /openapi.json, and refused input that changes nothing."""

from __future__ import annotations

import pytest
from fastapi.testclient import TestClient
from sqlmodel import Session, col, select

from server.models import AuditEntry
from tests.factories import make_period, make_team
from tests.plans.conftest import Workspace, counts, edit, error_fields, error_text, save_live


def test_every_action_round_trips_through_the_api(
    session: Session, workspace: Workspace, client: TestClient
) -> None:
    base = {"team_id": workspace.team_id, "period_id": workspace.period_id}
    # Save the live plan, read it back, list it.
    saved = save_live(client, workspace, "Baseline", created_by="Amara")
    # The signed-in account is who saved it; a name in the body cannot stand in for it.
    assert saved["created_by"] == "admin"
    assert saved["url"] == f"/plans/{saved['id']}"
    read = client.get(f"/api/v1/plans/{saved['id']}").json()
    assert read == saved
    listed = client.get("/api/v1/plans", params={"team_id": workspace.team_id}).json()
    assert [p["id"] for p in listed] == [saved["id"]]
    assert client.get("/api/v1/plans", params={"team_id": 999}).json() == []

    # What changed since: nothing, then the one edit.
    assert client.get(f"/api/v1/plans/{saved['id']}/changes").json()["moved_on"] is False
    edit(session, workspace.id_of("Stop alerts"), value=8.0)
    drift = client.get(f"/api/v1/plans/{saved['id']}/changes").json()
    assert drift["moved_on"] is True
    assert [(c["subject"], c["field"], c["before"], c["after"]) for c in drift["changes"]] == [
        ("Stop alerts", "value", 7.0, 8.0)
    ]

    # Scenario: create (solved), list, read, change, save as plan, delete.
    made = client.post(
        "/api/v1/scenarios",
        json={**base, "name": "Short sprint", "changes": {"capacity_days": 6}},
    )
    assert made.status_code == 201, made.text
    scenario = made.json()
    assert scenario["changes"]["capacity_days"] == 6
    assert scenario["scenario_plan"]["capacity"] == 6
    assert scenario["live"]["value"] >= scenario["scenario_plan"]["value"]
    assert [c["field"] for c in scenario["changed_inputs"]] == ["capacity_days"]
    assert client.get("/api/v1/scenarios", params=base).json()[0]["id"] == scenario["id"]
    assert client.get(f"/api/v1/scenarios/{scenario['id']}").json() == scenario
    patched = client.patch(
        f"/api/v1/scenarios/{scenario['id']}",
        json={"name": "Shorter sprint", "changes": {"capacity_days": 4, "confidence": 0.8}},
    )
    assert patched.status_code == 200, patched.text
    assert patched.json()["name"] == "Shorter sprint"
    assert patched.json()["scenario_plan"]["capacity"] == 4
    as_plan = client.post(f"/api/v1/scenarios/{scenario['id']}/plans", json={"name": "Frozen"})
    assert as_plan.status_code == 201, as_plan.text
    frozen = as_plan.json()
    assert frozen["name"] == "Frozen"
    assert frozen["scenario_name"] == "Shorter sprint"
    assert frozen["scenario_changes"] == {"capacity_days": 4.0, "confidence": 0.8}
    assert any(c.startswith("Capacity: 4 days") for c in frozen["result"]["changed_inputs"])
    assert client.delete(f"/api/v1/scenarios/{scenario['id']}").status_code == 204
    assert client.get(f"/api/v1/scenarios/{scenario['id']}").status_code == 404
    assert client.get(f"/api/v1/plans/{frozen['id']}").status_code == 200  # plans stay

    # Compare, and its exports.
    ids = f"{saved['id']},{frozen['id']}"
    comparison = client.get(f"/api/v1/compare?plans={ids}").json()
    assert comparison["plan_ids"] == [saved["id"], frozen["id"]]
    for fmt, media in (("csv", "text/csv"), ("json", "application/json"), ("md", "text/markdown")):
        response = client.get(f"/api/v1/compare/export.{fmt}?plans={ids}")
        assert response.status_code == 200
        assert response.headers["content-type"].startswith(media)
        plan_export = client.get(f"/api/v1/plans/{saved['id']}/export.{fmt}")
        assert plan_export.status_code == 200
        assert plan_export.headers["content-type"].startswith(media)
    assert client.get(f"/api/v1/compare/export.json?plans={ids}").json() == comparison

    # Publish, list, view, revoke.
    link = client.post(f"/api/v1/plans/{saved['id']}/publications").json()
    assert link["active"] is True
    links = client.get(f"/api/v1/plans/{saved['id']}/publications").json()
    assert [p["token"] for p in links] == [link["token"]]
    assert client.get(link["url"]).status_code == 200
    revoked = client.post(f"/api/v1/publications/{link['id']}/revoke").json()
    assert revoked["active"] is False
    assert revoked["revoked_at"] is not None
    assert client.get(link["url"]).status_code == 410

    # Import the exported CSV into another team.
    other = make_team(session, "Lighthouse")
    period = make_period(session, "Sprint 9")
    imported = client.post(
        f"/api/v1/teams/{other.id}/plan-imports",
        json={
            "period_id": period.id,
            "csv": client.get(f"/api/v1/plans/{saved['id']}/export.csv").text,
            "scenario_name": "From Harbour",
        },
    )
    assert imported.status_code == 201, imported.text
    assert imported.json()["scenario"]["name"] == "From Harbour"
    assert imported.json()["scenario"]["team_id"] == other.id

    session.expire_all()
    actions = [e.action for e in session.exec(select(AuditEntry).order_by(col(AuditEntry.id)))]
    for action in ("plan.save", "scenario.create", "plan.publish", "plan.revoke"):
        assert action in actions


def test_the_api_is_documented_with_response_models(client: TestClient) -> None:
    spec = client.get("/openapi.json").json()
    paths = spec["paths"]
    expected = {
        ("/api/v1/plans", "post"): "SavedPlanPublic",
        ("/api/v1/plans/{plan_id}", "get"): "SavedPlanPublic",
        ("/api/v1/plans/{plan_id}/changes", "get"): "DriftPublic",
        ("/api/v1/plans/{plan_id}/publications", "post"): "PublicationPublic",
        ("/api/v1/publications/{publication_id}/revoke", "post"): "PublicationPublic",
        ("/api/v1/compare", "get"): "Comparison",
        ("/api/v1/scenarios", "post"): "ScenarioSolvedPublic",
        ("/api/v1/scenarios/{scenario_id}", "get"): "ScenarioSolvedPublic",
        ("/api/v1/scenarios/{scenario_id}", "patch"): "ScenarioSolvedPublic",
        ("/api/v1/scenarios/{scenario_id}/plans", "post"): "SavedPlanPublic",
        ("/api/v1/teams/{team_id}/plan-imports", "post"): "ImportPublic",
    }
    for (path, method), model in expected.items():
        operation = paths[path][method]
        success = next(code for code in operation["responses"] if code.startswith("2"))
        schema = operation["responses"][success]["content"]["application/json"]["schema"]
        assert schema["$ref"].endswith(f"/{model}"), (path, schema)
        assert operation["tags"] == ["plans"]
    export = paths["/api/v1/plans/{plan_id}/export.{fmt}"]["get"]["responses"]["200"]["content"]
    assert {"text/csv", "application/json", "text/markdown"} <= set(export)
    assert "/api/v1/plans/{plan_id}/publications" in paths
    assert "/api/v1/compare/export.{fmt}" in paths
    assert "/p/{token}" not in paths  # the published page is not part of the API
    assert "PlanInputs" in spec["components"]["schemas"]
    assert "PlanResult" in spec["components"]["schemas"]


@pytest.mark.parametrize(
    ("method", "path"),
    [
        ("get", "/api/v1/plans/999"),
        ("get", "/api/v1/plans/999/changes"),
        ("get", "/api/v1/plans/999/export.csv"),
        ("get", "/api/v1/plans/999/publications"),
        ("post", "/api/v1/plans/999/publications"),
        ("post", "/api/v1/publications/999/revoke"),
        ("get", "/api/v1/scenarios/999"),
        ("delete", "/api/v1/scenarios/999"),
        ("get", "/plans/999"),
        ("get", "/plans/999/changes"),
        ("get", "/scenarios/999"),
        ("get", "/p/" + "A" * 43),
    ],
)
def test_unknown_ids_answer_404(
    session: Session, workspace: Workspace, client: TestClient, method: str, path: str
) -> None:
    before = counts(session)
    response = getattr(client, method)(path)
    assert response.status_code == 404, response.text
    assert counts(session) == before


@pytest.mark.parametrize(
    ("body", "status", "field"),
    [
        ({"name": ""}, 422, "name"),
        ({"name": "x" * 201}, 422, "name"),
        ({"team_id": 999}, 404, "team_id"),
        ({"period_id": 999}, 404, "period_id"),
        ({"changes": {"focus_factor": 2}}, 422, "focus_factor"),
        ({"changes": {"confidence": "P80"}}, 422, "confidence"),
        ({"changes": {"forced_in": [999]}}, 422, "forced_in"),
        ({"created_by": "x" * 81}, 422, "created_by"),
        ({"extra": 1}, 422, "extra"),
    ],
)
def test_saving_a_plan_refuses_bad_input_and_stores_nothing(
    session: Session,
    workspace: Workspace,
    client: TestClient,
    body: dict[str, object],
    status: int,
    field: str,
) -> None:
    before = counts(session)
    response = client.post(
        "/api/v1/plans",
        json={
            "name": "Plan",
            "team_id": workspace.team_id,
            "period_id": workspace.period_id,
            **body,
        },
    )
    assert response.status_code == status, response.text
    fields = error_fields(response)
    assert any(field in f for f in fields), fields
    assert counts(session) == before


def test_a_refused_scenario_change_leaves_it_as_it_was(
    session: Session, workspace: Workspace, client: TestClient
) -> None:
    made = client.post(
        "/api/v1/scenarios",
        json={
            "name": "Keep",
            "team_id": workspace.team_id,
            "period_id": workspace.period_id,
            "changes": {"reserve_pct": 5},
        },
    ).json()
    before = counts(session)
    refused = client.patch(
        f"/api/v1/scenarios/{made['id']}", json={"changes": {"reserve_pct": 100}}
    )
    assert refused.status_code == 422
    assert "reserve_pct" in error_fields(refused)[0]
    outsider = client.patch(
        f"/api/v1/scenarios/{made['id']}", json={"changes": {"days_off": {"999": 1}}}
    )
    assert outsider.status_code == 422
    assert error_fields(outsider) == ["days_off"]
    assert counts(session) == before
    assert client.get(f"/api/v1/scenarios/{made['id']}").json()["changes"]["reserve_pct"] == 5


def test_page_save_form_keeps_the_name_and_says_why(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    page = form_client.get(
        f"/plans/new?team_id={workspace.team_id}&period_id={workspace.period_id}"
    )
    assert page.status_code == 200
    assert 'action="/plans"' in page.text
    before = counts(session)
    refused = form_client.post(
        "/plans",
        data={
            "csrf_token": form_client.csrf,  # type: ignore[attr-defined]
            "team_id": str(workspace.team_id),
            "period_id": str(workspace.period_id),
            "name": "   ",
        },
    )
    assert refused.status_code == 422
    assert "Enter some text." in refused.text
    assert counts(session) == before
    no_token = form_client.post(
        "/plans",
        data={
            "team_id": str(workspace.team_id),
            "period_id": str(workspace.period_id),
            "name": "x",
        },
    )
    assert no_token.status_code == 403
    assert counts(session) == before
    listing = form_client.get(f"/plans?team_id={workspace.team_id}")
    assert listing.status_code == 200
    assert "No saved plans yet" in listing.text


@pytest.mark.parametrize(
    ("method", "path", "body"),
    [
        ("get", "/api/v1/plans/99999999999999999999999", None),
        ("get", "/api/v1/plans/2147483648/changes", None),
        ("delete", "/api/v1/scenarios/99999999999999999999999", None),
        ("get", "/api/v1/scenarios?period_id=16429685623288553472", None),
        ("get", "/api/v1/compare?plans=1,99999999999999999999999", None),
        ("get", "/plans/99999999999999999999999", None),
        ("post", "/api/v1/plans", {"name": "x", "team_id": 2**40, "period_id": 1}),
        (
            "post",
            "/api/v1/scenarios",
            {"name": "x", "team_id": 1, "period_id": 1, "changes": {"forced_in": [2**40]}},
        ),
    ],
)
def test_ids_too_large_for_any_row_are_refused_not_crashed(
    session: Session,
    workspace: Workspace,
    client: TestClient,
    method: str,
    path: str,
    body: dict[str, object] | None,
) -> None:
    before = counts(session)
    kwargs = {"json": body} if body is not None else {}
    response = getattr(client, method)(path, **kwargs)
    assert response.status_code == 422, response.text
    assert counts(session) == before


def test_a_team_without_capacity_is_told_what_to_change_not_the_selectors_words(
    session: Session, client: TestClient
) -> None:
    """No members, so no capacity: saving or trying a scenario says so in the page's words."""
    team, period = make_team(session, "Empty berth"), make_period(session)
    base = {"team_id": team.id, "period_id": period.id}
    before = counts(session)
    saved = client.post("/api/v1/plans", json={**base, "name": "Plan"})
    assert saved.status_code == 422, saved.text
    assert error_fields(saved) == ["capacity"]
    message = error_text(saved)
    assert "no capacity in this period yet" in message
    assert "greater than zero" not in message
    # A scenario may still be kept (members may be added later); it says why it has no plan.
    scenario = client.post("/api/v1/scenarios", json={**base, "name": "Try", "changes": {}})
    assert scenario.status_code == 201, scenario.text
    for problem in ("live_problem", "scenario_problem"):
        assert "no capacity in this period yet" in scenario.json()[problem]
    assert counts(session)["SavedPlan"] == before["SavedPlan"]
