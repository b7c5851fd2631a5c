"""Errors of htmx requests answer with a fragment for where they land; post-only addresses
never answer a bare 405 to a GET."""

from __future__ import annotations

from fastapi.testclient import TestClient
from sqlmodel import Session

from server.store.initiatives import delete_initiatives
from tests.pages.html_tree import parse_html
from tests.pages.test_plan_pages import HX, build, edit_url, post_form, row_fields


def _row_post_headers(initiative_id: int) -> dict[str, str]:
    # What htmx sends for a row's boosted form: its id, and the plan it is set to replace.
    return HX | {"HX-Trigger": f"edit-{initiative_id}", "HX-Target": "plan"}


def test_saving_a_deleted_row_replaces_the_row_with_a_message(
    form_client: TestClient, session: Session
) -> None:
    setup = build(session)
    initiative_id = setup.ids["Audit log"]
    fields = row_fields(session, initiative_id, effort="7")
    delete_initiatives(session, initiative_ids=[initiative_id], actor="Bea")
    response = post_form(
        form_client, edit_url(setup, "Audit log"), fields, **_row_post_headers(initiative_id)
    )
    assert response.status_code == 404
    assert response.headers["HX-Retarget"] == f"#row-{initiative_id}"
    assert response.headers["HX-Reswap"] == "outerHTML"
    assert response.headers["HX-Push-Url"] == "false"
    text = response.text
    assert "<html" not in text
    assert "<header" not in text
    assert "<footer" not in text
    root = parse_html(text)
    row = root.by_id(f"row-{initiative_id}")
    assert row.tag == "tr"
    message = row.find("p")
    assert message is not None
    assert message.get("role") == "alert"
    assert "“Audit log” was deleted by someone else; see" in " ".join(message.text().split())
    link = message.find("a")
    assert link is not None
    assert link.text().strip() == "Changes"
    assert link.get("href") == f"/audit?team_id={setup.team.id}"


def test_an_error_aimed_at_the_plan_goes_to_its_alert_slot(
    form_client: TestClient, session: Session
) -> None:
    setup = build(session)
    response = post_form(
        form_client,
        f"/teams/{setup.team.id}/plan/initiatives/{10**30}",
        {"effort": "1"},
        **(HX | {"HX-Target": "plan"}),
    )
    assert response.status_code in (404, 422)
    assert response.headers["HX-Retarget"] == "#plan-alerts"
    assert response.headers["HX-Push-Url"] == "false"
    assert "<html" not in response.text
    plan = parse_html(form_client.get(setup.url, headers=HX).text)
    assert plan.by_id("plan-alerts") is not None


def test_a_plain_post_of_a_deleted_row_still_gets_the_page(
    form_client: TestClient, session: Session
) -> None:
    setup = build(session)
    initiative_id = setup.ids["Audit log"]
    fields = row_fields(session, initiative_id)
    delete_initiatives(session, initiative_ids=[initiative_id])
    response = post_form(form_client, edit_url(setup, "Audit log"), fields)
    assert response.status_code == 404
    assert "<html" in response.text
    root = parse_html(response.text)
    said = root.find("p", cls="form-error")
    assert said is not None
    assert "“Audit log” was deleted" in said.text()
    links = {a.get("href") for a in root.find_all("a")}
    assert f"/audit?team_id={setup.team.id}" in links
    assert root.by_id("back-link").get("href") == f"/teams/{setup.team.id}/plan"


def test_a_get_of_a_post_only_address_goes_to_the_page_above(
    form_client: TestClient, session: Session
) -> None:
    setup = build(session)
    initiative_id = setup.ids["Audit log"]
    for url in (
        edit_url(setup, "Audit log"),
        f"/teams/{setup.team.id}/plan/initiatives",
        f"/teams/{setup.team.id}/plan/undo",
    ):
        response = form_client.get(url, follow_redirects=False)
        assert response.status_code == 303, (url, response.status_code)
        assert response.headers["location"] == f"/teams/{setup.team.id}/plan"
    followed = form_client.get(edit_url(setup, "Audit log"))
    assert followed.status_code == 200
    assert f"row-{initiative_id}" in followed.text
    api = form_client.get(f"/api/v1/teams/{setup.team.id}/plan/initiatives")
    assert api.status_code in (404, 405)


def test_the_explanation_of_a_deleted_row_says_so_where_it_opens(
    form_client: TestClient, session: Session
) -> None:
    setup = build(session)
    initiative_id = setup.ids["Audit log"]
    delete_initiatives(session, initiative_ids=[initiative_id])
    url = f"{edit_url(setup, 'Audit log')}/explain?period_id={setup.period.id}"
    response = form_client.get(url, headers=HX)  # fetched into the row's explanation slot
    assert response.status_code == 404
    assert "HX-Retarget" not in response.headers
    root = parse_html(response.text)
    said = root.find("p", cls="form-error")
    assert said is not None
    assert "“Audit log” was deleted by someone else; see" in said.text()
    assert "<header" not in response.text
