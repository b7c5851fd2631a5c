"""A refused request answered in the shape its sender reads.

A refusal happens when a request is sent that the role may not make (an old page, a role
changed meanwhile, a typed URL) or whose form token has expired: a page in the site layout for
a plain request, the message alone for htmx (loadline.js puts it beside the form that sent
it), JSON for the API. Nothing is stored.
"""

from __future__ import annotations

import pytest
from fastapi.testclient import TestClient
from sqlmodel import Session, select

from server.models import Initiative
from tests.conftest import csrf_token
from tests.pages.html_tree import parse_html
from tests.pages.test_plan_pages import Setup, build


@pytest.fixture
def setup(session: Session) -> Setup:
    return build(session)


def test_refused_form_post_is_a_page_with_a_way_back(
    viewer: TestClient, session: Session, setup: Setup
) -> None:
    initiative_id = setup.ids["Audit log"]
    token = csrf_token(viewer, setup.url)
    response = viewer.post(
        f"/teams/{setup.team.id}/plan/initiatives/{initiative_id}",
        data={"csrf_token": token, "effort": "1", "value": "99", "state": "pinned", "version": "1"},
        headers={"Referer": f"http://testserver{setup.url}"},
        follow_redirects=False,
    )
    assert response.status_code == 403
    assert response.headers["content-type"].startswith("text/html")
    root = parse_html(response.text)
    assert root.find("header", cls="masthead") is not None  # the site layout
    assert (
        "Your role (viewer) may not do this; it needs editor."
        in root.find("p", cls="form-error").text()
    )  # type: ignore[union-attr]
    assert root.by_id("back-link").get("href") == setup.url
    session.expire_all()
    stored = session.exec(select(Initiative).where(Initiative.id == initiative_id)).one()
    assert stored.value == 30.0
    assert stored.state == "candidate"


def test_refused_page_without_referer_links_home(viewer: TestClient) -> None:
    response = viewer.get("/users")
    assert response.status_code == 403
    root = parse_html(response.text)
    assert "it needs admin" in root.find("p", cls="form-error").text()  # type: ignore[union-attr]
    assert root.find(id="back-link") is None
    assert root.find("a", where=lambda n: n.get("href") == "/" and "Back" in n.text()) is not None


def test_back_link_never_points_off_site(viewer: TestClient) -> None:
    response = viewer.get("/users", headers={"Referer": "https://elsewhere.example/teams"})
    assert parse_html(response.text).find(id="back-link") is None


def test_refused_htmx_request_gets_the_message_alone(viewer: TestClient, setup: Setup) -> None:
    token = csrf_token(viewer, setup.url)
    response = viewer.post(
        f"/teams/{setup.team.id}/plan/initiatives",
        data={"title": "Sneaked in", "effort": "1", "value": "1"},
        headers={"HX-Request": "true", "X-CSRF-Token": token},
    )
    assert response.status_code == 403
    assert response.text.startswith("Your role (viewer) may not do this; it needs editor.")
    assert "<" not in response.text  # plain text, put in the page with textContent


def test_api_refusals_keep_their_json(viewer: TestClient) -> None:
    response = viewer.post("/api/v1/teams", json={"name": "Nope"})
    assert response.status_code == 403
    assert response.json() == {
        "detail": {"message": "Your role (viewer) may not do this; it needs editor."}
    }


def test_expired_form_token_is_a_page_too(editor: TestClient, setup: Setup) -> None:
    editor.get("/")  # a browser cookie, but the form carries a wrong token
    response = editor.post("/teams", data={"name": "Late", "csrf_token": "0" * 64})
    assert response.status_code == 403
    root = parse_html(response.text)
    assert root.find("header", cls="masthead") is not None
    assert "has expired" in root.find("p", cls="form-error").text()  # type: ignore[union-attr]
