"""Saving freezes the plan its page showed: a save from a page drawn before a change to the
scenario, or to the live data under it, is refused (409, nothing saved, the plan name kept and
the new figures on the page again), and the page shown again saves."""

from __future__ import annotations

from fastapi.testclient import TestClient
from sqlmodel import Session

from server.planning.scenarios import ScenarioChanges
from server.store import plans as store
from tests.pages.parsed_page import Form, parse
from tests.plans.conftest import Workspace, counts, edit


def _scenario(session: Session, ws: Workspace, capacity_days: float) -> int:
    db_scenario = store.create_scenario(
        session,
        team_id=ws.team_id,
        period_id=ws.period_id,
        name="More capacity",
        changes=ScenarioChanges(capacity_days=capacity_days).to_json(),
    )
    return db_scenario.id or 0


def _save_fields(page_text: str, name: str, csrf: str) -> dict[str, str]:
    """The save form's fields as the page drew them, with a plan name typed in."""
    form = Form(parse(page_text), "/plans")
    fields = {
        str(e.attrs["name"]): str(e.attrs.get("value", ""))
        for e in form.element.iter()
        if e.tag == "input" and e.attrs.get("type") == "hidden"
    }
    return fields | {"csrf_token": csrf, "name": name}


def test_a_scenario_changed_in_another_tab_is_not_saved_as_the_plan_on_screen(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    csrf = form_client.csrf  # type: ignore[attr-defined]
    scenario_id = _scenario(session, workspace, 20)
    shown = form_client.get(f"/scenarios/{scenario_id}")
    fields = _save_fields(shown.text, "Frozen at 20", csrf)
    assert fields["based_on"]
    assert fields["shown_digest"]
    # Another tab (here the API) cuts the scenario's capacity.
    cut = form_client.patch(
        f"/api/v1/scenarios/{scenario_id}", json={"changes": {"capacity_days": 6}}
    )
    assert cut.status_code == 200, cut.text
    before = counts(session)

    refused = form_client.post("/plans", data=fields, follow_redirects=False)

    assert refused.status_code == 409
    assert counts(session) == before  # no plan, no audit entry
    page = parse(refused.text)
    save = Form(page, "/plans")
    assert save.value("name") == "Frozen at 20"
    message = " ".join(save.errors())
    assert "Scenario “More capacity” was changed since this page was shown" in message
    assert "Capacity: 6 days" in message
    assert "Nothing was saved" in message
    # The page shows the new figures, and its form now carries them: saving again saves them.
    assert "Capacity: 6 days" in page.find(id="changed-h").parent.text()  # type: ignore[union-attr]
    again = form_client.post(
        "/plans", data=_save_fields(refused.text, "Frozen at 6", csrf), follow_redirects=False
    )
    assert again.status_code == 303, again.text
    saved = form_client.get(f"/api/v1{again.headers['location']}").json()
    assert saved["capacity"] == 6


def test_live_data_changed_under_a_scenario_is_not_saved_unseen(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    csrf = form_client.csrf  # type: ignore[attr-defined]
    scenario_id = _scenario(session, workspace, 20)
    fields = _save_fields(form_client.get(f"/scenarios/{scenario_id}").text, "Wide", csrf)
    edit(session, workspace.id_of("Fare capping"), value=1.0)
    before = counts(session)

    refused = form_client.post("/plans", data=fields, follow_redirects=False)

    assert refused.status_code == 409
    assert counts(session) == before
    save = Form(parse(refused.text), "/plans")
    assert save.value("name") == "Wide"
    assert "The live data of scenario “More capacity” changed" in " ".join(save.errors())


def test_the_live_plan_changed_since_its_save_page_was_drawn_is_not_saved(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    csrf = form_client.csrf  # type: ignore[attr-defined]
    url = f"/plans/new?team_id={workspace.team_id}&period_id={workspace.period_id}"
    shown = form_client.get(url)
    assert "The live plan now: value" in shown.text
    fields = _save_fields(shown.text, "Before the edit", csrf)
    assert fields["shown_digest"]
    edit(session, workspace.id_of("Stop alerts"), value=70.0)
    before = counts(session)

    refused = form_client.post("/plans", data=fields, follow_redirects=False)

    assert refused.status_code == 409
    assert counts(session) == before
    page = parse(refused.text)
    save = Form(page, "/plans")
    assert save.value("name") == "Before the edit"
    message = " ".join(save.errors())
    assert "The live data of the live plan changed since this page was shown" in message
    assert "Nothing was saved" in message
    live_link = page.find(id="live-figures")
    assert live_link is not None
    assert "Look at the live plan" in live_link.text()
    again = form_client.post(
        "/plans", data=_save_fields(refused.text, "After the edit", csrf), follow_redirects=False
    )
    assert again.status_code == 303, again.text


def test_a_scenario_over_what_live_data_removed_saves_from_its_page(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    """Found in use: such a scenario was refused at every save from its page ("changed since
    this page was shown"): the page planned its stale days off, the save did not."""
    csrf = form_client.csrf  # type: ignore[attr-defined]
    leaver = workspace.members[0].id
    victim = workspace.id_of("Stop alerts")
    db_scenario = store.create_scenario(
        session,
        team_id=workspace.team_id,
        period_id=workspace.period_id,
        name="Before the move",
        changes=ScenarioChanges(days_off={leaver: 3}, forced_in=[victim]).to_json(),
    )
    assert form_client.delete(f"/api/v1/initiatives/{victim}").status_code == 204
    assert form_client.delete(f"/api/v1/members/{leaver}").status_code == 204
    shown = form_client.get(f"/scenarios/{db_scenario.id}")
    assert "no longer on the team" in shown.text  # the page still says what no longer applies
    saved = form_client.post(
        "/plans", data=_save_fields(shown.text, "As it stands", csrf), follow_redirects=False
    )
    assert saved.status_code == 303, saved.text
