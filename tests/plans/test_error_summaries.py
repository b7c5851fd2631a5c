"""Refused scenario, save, import and comparison forms open on an error summary that links
to each field (no script needed), keep what was typed, and store nothing."""

from __future__ import annotations

from fastapi.testclient import TestClient
from sqlmodel import Session

from tests.factories import make_member, make_team
from tests.pages.html_tree import parse_html
from tests.pages.test_refused_forms import summary_links
from tests.plans.conftest import Workspace, counts, post_scenario_form, save_live


def _post(client: TestClient, url: str, data: dict[str, str]):
    return client.post(url, data={"csrf_token": client.csrf, **data})  # type: ignore[attr-defined]


def _heading(text: str) -> str:
    return parse_html(text).by_id("error-summary-h").text()


def _new_scenario(client: TestClient, ws: Workspace, **fields: str) -> int:
    made = post_scenario_form(client, ws.team_id, ws.period_id, **fields)
    assert made.status_code == 303, made.text[:300]
    return int(made.headers["location"].rsplit("/", 1)[1])


def test_a_refused_new_scenario_links_each_problem_to_its_field(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    member = workspace.members[0]
    initiative = workspace.id_of("Depot dashboard")
    before = counts(session)
    typed = {
        "period_id": str(workspace.period_id),
        "name": "",
        "capacity_days": "-3",
        f"days_off.{member.id}": "999",
        f"forced.{initiative}": "sideways",
    }
    response = _post(form_client, f"/teams/{workspace.team_id}/scenarios", typed)
    assert response.status_code == 422
    links = summary_links(response.text)
    assert {
        "#f-name",
        "#f-capacity_days",
        f"#f-days-off-{member.id}",
        f"#f-forced-{initiative}",
    } <= set(links), links
    assert links[f"#f-days-off-{member.id}"].startswith(f"{member.name}: days off: ")
    assert links[f"#f-forced-{initiative}"].startswith("Depot dashboard: ")
    assert _heading(response.text).startswith("Not saved: 4 problems")
    assert 'value="-3"' in response.text
    assert 'value="999"' in response.text
    assert counts(session) == before


def test_a_refused_scenario_change_and_delete_open_on_a_summary(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    scenario_id = _new_scenario(form_client, workspace, name="Lean")
    before = counts(session)
    changed = _post(form_client, f"/scenarios/{scenario_id}", {"name": "Lean", "focus_factor": "2"})
    assert changed.status_code == 422
    assert "#f-focus_factor" in summary_links(changed.text)
    assert 'value="2"' in changed.text
    deleted = _post(form_client, f"/scenarios/{scenario_id}/delete", {})
    assert deleted.status_code == 422
    assert _heading(deleted.text).startswith("Not deleted: 1 problem")
    assert "Yes, delete scenario Lean" in parse_html(deleted.text).by_id("error-summary").text()
    assert counts(session) == before
    shown = form_client.get(f"/scenarios/{scenario_id}")
    assert parse_html(shown.text).find(id="error-summary") is None


def test_a_refused_save_opens_on_the_summary_of_the_save_form(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    scenario_id = _new_scenario(form_client, workspace, name="Lean")
    before = counts(session)
    base = {"team_id": str(workspace.team_id), "period_id": str(workspace.period_id)}
    for extra in ({}, {"scenario_id": str(scenario_id)}):
        response = _post(form_client, "/plans", base | extra | {"name": "  "})
        assert response.status_code == 422, response.text[:300]
        links = summary_links(response.text)
        assert set(links) == {"#save-f-name"}, links
        summary = parse_html(response.text).by_id("error-summary")
        assert summary.parent is not None
        assert summary.parent.tag == "form"
    assert counts(session) == before


def test_refused_comparisons_open_on_a_summary_saying_nothing_was_compared(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    first = save_live(form_client, workspace)["id"]
    listing = form_client.get(f"/compare?plans={first}&team_id={workspace.team_id}")
    assert listing.status_code == 422
    assert _heading(listing.text).startswith("Not compared: 1 problem")
    assert set(summary_links(listing.text)) == {f"#cmp-{first}"}
    _new_scenario(form_client, workspace, name="Lean")
    url = f"/teams/{workspace.team_id}/scenarios/compare?period_id={workspace.period_id}"
    picked = form_client.get(f"{url}&pick=live")
    assert picked.status_code == 422
    assert _heading(picked.text).startswith("Not compared: 1 problem")
    assert set(summary_links(picked.text)) == {"#pick-live"}


def test_a_refused_import_opens_on_a_summary_linking_to_the_file(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    empty = make_team(session, "Empty")
    make_member(session, empty, "Someone")
    before = counts(session)
    response = _post(
        form_client,
        f"/teams/{empty.id}/plan-import",
        {"period_id": str(workspace.period_id), "csv": "not,a,plan\n1,2,3\n"},
    )
    assert response.status_code == 422
    assert _heading(response.text).startswith("Not imported: ")
    assert "#f-file" in summary_links(response.text)
    assert counts(session) == before
