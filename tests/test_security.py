"""Request guards: security headers, body size limit, CSRF, and escaping of user text."""

from __future__ import annotations

import dataclasses
from collections.abc import Iterator

import pytest
from fastapi.testclient import TestClient
from sqlmodel import Session, select

from server.app import create_app
from server.config import Settings
from server.models import Initiative, Team
from server.security import BROWSER_COOKIE
from tests.conftest import bearer, csrf_token

SCRIPT = "<script>alert(1)</script>"
IMAGE = '<img src=x onerror="alert(2)">'
SMALL_LIMIT = 4096


def _csp(header: str) -> dict[str, list[str]]:
    directives: dict[str, list[str]] = {}
    for part in header.split(";"):
        words = part.split()
        if words:
            directives[words[0]] = words[1:]
    return directives


@pytest.mark.parametrize("path", ["/", "/api/v1/teams", "/static/loadline.css", "/teams/999"])
def test_security_headers_on_every_kind_of_response(client: TestClient, path: str) -> None:
    response = client.get(path)
    csp = _csp(response.headers["content-security-policy"])
    assert "'unsafe-inline'" not in csp["script-src"]
    assert "'unsafe-eval'" not in csp["script-src"]
    assert csp["frame-ancestors"] == ["'none'"]
    assert response.headers["x-content-type-options"] == "nosniff"
    assert response.headers["referrer-policy"] in {
        "same-origin",
        "no-referrer",
        "strict-origin-when-cross-origin",
    }


def test_security_headers_on_a_refused_form(client: TestClient) -> None:
    response = client.post("/teams", data={"name": "No token"})
    assert response.status_code == 403
    assert "frame-ancestors 'none'" in response.headers["content-security-policy"]


def test_browser_cookie_is_http_only_and_same_site(client: TestClient) -> None:
    cookie = client.get("/").headers["set-cookie"]
    assert cookie.startswith(f"{BROWSER_COOKIE}=")
    assert "HttpOnly" in cookie
    assert "SameSite=Lax" in cookie


# --- body size -----------------------------------------------------------------------------


@pytest.fixture
def small_client(settings: Settings) -> Iterator[TestClient]:
    application = create_app(dataclasses.replace(settings, max_body_bytes=SMALL_LIMIT))
    with TestClient(application, headers=bearer("admin")) as test_client:
        yield test_client
    application.state.engine.dispose()


def _team_names(client: TestClient) -> list[str]:
    return [team["name"] for team in client.get("/api/v1/teams").json()]


def test_oversize_json_body_gets_413_and_stores_nothing(small_client: TestClient) -> None:
    body = {"name": "Big", "padding": "x" * (SMALL_LIMIT + 1)}
    response = small_client.post("/api/v1/teams", json=body)
    assert response.status_code == 413
    assert _team_names(small_client) == []


def test_oversize_form_gets_413_before_anything_else(small_client: TestClient) -> None:
    token = csrf_token(small_client)
    data = {"name": "Big", "notes": "x" * (SMALL_LIMIT + 1), "csrf_token": token}
    response = small_client.post("/teams", data=data)
    assert response.status_code == 413
    assert _team_names(small_client) == []


def test_oversize_streamed_body_without_length_gets_413(small_client: TestClient) -> None:
    def chunks() -> Iterator[bytes]:
        yield b'{"name": "Streamed", "padding": "'
        for _ in range(SMALL_LIMIT // 512 + 2):
            yield b"x" * 512
        yield b'"}'

    response = small_client.post(
        "/api/v1/teams", content=chunks(), headers={"content-type": "application/json"}
    )
    assert response.status_code == 413
    assert _team_names(small_client) == []


def test_a_body_under_the_limit_is_accepted(small_client: TestClient) -> None:
    response = small_client.post("/api/v1/teams", json={"name": "Small"})
    assert response.status_code == 201
    assert _team_names(small_client) == ["Small"]


# --- cross-site request forgery ------------------------------------------------------------


def test_a_token_from_another_browser_is_refused(client: TestClient, settings: Settings) -> None:
    other_app = create_app(settings)
    with TestClient(other_app) as other_browser:
        foreign_token = csrf_token(other_browser)
    other_app.state.engine.dispose()
    csrf_token(client)  # this browser gets its own cookie
    response = client.post("/teams", data={"name": "Forged", "csrf_token": foreign_token})
    assert response.status_code == 403
    assert _team_names(client) == []


def test_a_token_without_the_browser_cookie_is_refused(client: TestClient) -> None:
    token = csrf_token(client)
    client.cookies.clear()
    response = client.post("/teams", data={"name": "Cookieless", "csrf_token": token})
    assert response.status_code == 403
    assert _team_names(client) == []


def test_the_token_in_a_header_is_accepted_for_htmx(client: TestClient) -> None:
    token = csrf_token(client)
    response = client.post(
        "/teams",
        data={"name": "Via header"},
        headers={"x-csrf-token": token},
        follow_redirects=False,
    )
    assert response.status_code == 303
    assert _team_names(client) == ["Via header"]


def test_the_api_refuses_a_body_a_cross_site_form_could_send(client: TestClient) -> None:
    # A cross-site page can post text/plain or form bodies without a preflight; the API must
    # not treat them as JSON, so no token is needed there. They are refused as what they are
    # (415), not as a JSON object without fields (found in use: 422 "Enter an object").
    for content_type in ("text/plain", "application/x-www-form-urlencoded", "multipart/form-data"):
        response = client.post(
            "/api/v1/teams", content='{"name": "Forged"}', headers={"content-type": content_type}
        )
        assert response.status_code == 415, content_type
        assert "Content-Type: application/json" in response.text
    assert _team_names(client) == []
    # JSON with its charset, or a JSON-based type, is read as JSON.
    for content_type in ("application/json; charset=utf-8", "application/merge-patch+json"):
        made = client.post(
            "/api/v1/teams",
            content=f'{{"name": "Team {content_type[12:16]}"}}',
            headers={"content-type": content_type},
        )
        assert made.status_code == 201, (content_type, made.text)


# --- escaping ------------------------------------------------------------------------------


def test_user_text_is_escaped_on_every_page(client: TestClient, session: Session) -> None:
    team = client.post("/api/v1/teams", json={"name": SCRIPT}).json()
    period = client.post(
        "/api/v1/periods",
        json={
            "name": IMAGE,
            "kind": "sprint",
            "start_date": "2027-03-01",
            "end_date": "2027-03-12",
        },
    ).json()
    client.post("/api/v1/members", json={"team_id": team["id"], "name": IMAGE})
    initiative = client.post(
        "/api/v1/initiatives",
        json={
            "team_id": team["id"],
            "period_id": period["id"],
            "title": SCRIPT,
            "notes": IMAGE,
            "effort": 2,
            "value": 5,
            "either_or": SCRIPT,
        },
    ).json()
    assert session.exec(select(Team)).one().name == SCRIPT  # stored as typed
    assert session.exec(select(Initiative)).one().notes == IMAGE

    pages = [
        "/",
        f"/teams/{team['id']}",
        f"/teams/{team['id']}/initiatives?period={period['id']}",
        f"/initiatives/{initiative['id']}/edit",
    ]
    for page in pages:
        html = client.get(page).text
        assert SCRIPT not in html, page
        assert IMAGE not in html, page
        assert "&lt;script&gt;alert(1)&lt;/script&gt;" in html, page


def test_a_refused_form_echoes_its_values_escaped(form_client: TestClient) -> None:
    form_client.post("/api/v1/teams", json={"name": SCRIPT})
    # A duplicate name: the form comes back with the value kept, escaped inside the attribute.
    response = form_client.post("/teams", data={"name": SCRIPT, "csrf_token": form_client.csrf})
    assert response.status_code == 422
    assert SCRIPT not in response.text
    assert 'value="&lt;script&gt;alert(1)&lt;/script&gt;"' in response.text
