"""Accounts and roles: who may do what, sign-in, sessions, limits, CSRF on cookie sign-ins."""

from __future__ import annotations

import re

import pytest
from fastapi import FastAPI
from fastapi.testclient import TestClient
from sqlmodel import Session, func, select

from server import demo
from server.access import SESSION_COOKIE, required_role
from server.config import Settings
from server.models import LoginFailure, Team, UserAccount
from server.store.users import MAX_FAILURES_PER_ACCOUNT
from tests.conftest import ACCOUNT_PASSWORD, bearer, csrf_token
from tests.pages.html_tree import parse_html


@pytest.fixture
def demo_loaded(session: Session) -> None:
    demo.load(session)


def as_role(app: FastAPI, role: str) -> TestClient:
    return TestClient(app, headers=bearer(role))


# (method, path, body) -> the least role. Each row is tried with every role.
ACTIONS = [
    ("GET", "/", None, "viewer"),
    ("GET", "/teams/1", None, "viewer"),
    ("GET", "/teams/1/plan?period_id=1", None, "viewer"),
    ("GET", "/api/v1/teams", None, "viewer"),
    ("GET", "/api/v1/initiatives?team_id=1", None, "viewer"),
    ("GET", "/api/v1/audit", None, "viewer"),
    ("GET", "/audit", None, "viewer"),
    ("GET", "/api/v1/plans", None, "viewer"),
    ("POST", "/api/v1/teams", {"name": "Newcomers"}, "editor"),
    ("PATCH", "/api/v1/teams/1", {"name": "Journey Planning"}, "editor"),
    ("POST", "/api/v1/select", {"capacity": 5, "items": []}, "editor"),
    ("POST", "/api/v1/plans", {"name": "Saved", "team_id": 1, "period_id": 1}, "editor"),
    ("GET", "/api/v1/plans/1/publications", None, "editor"),
    ("POST", "/api/v1/plans/1/publications", None, "editor"),
    ("GET", "/users", None, "admin"),
]
RANK = {"viewer": 1, "editor": 2, "admin": 3}


def _call(client: TestClient, method: str, path: str, body: object) -> int:
    return client.request(method, path, json=body).status_code


@pytest.mark.usefixtures("demo_loaded")
@pytest.mark.parametrize(("method", "path", "body", "least"), ACTIONS)
@pytest.mark.parametrize("role", ["viewer", "editor", "admin"])
def test_role_matrix(
    app: FastAPI, session: Session, role: str, method: str, path: str, body: object, least: str
) -> None:
    if "/plans/1/" in path:
        # A plan to ask about must exist first.
        as_role(app, "editor").post(
            "/api/v1/plans", json={"name": "First", "team_id": 1, "period_id": 1}
        ).raise_for_status()
    with as_role(app, role) as client:
        status = _call(client, method, path, body)
    if RANK[role] >= RANK[least]:
        assert status < 400, (role, method, path, status)
    else:
        assert status == 403, (role, method, path, status)


@pytest.mark.parametrize(
    ("path", "expected"),
    [("/api/v1/teams", 401), ("/openapi.json", 401)],
)
def test_anonymous_api_requests_are_refused(
    anonymous_client: TestClient, path: str, expected: int
) -> None:
    response = anonymous_client.get(path)
    assert response.status_code == expected
    assert response.headers["www-authenticate"] == "Bearer"


@pytest.mark.parametrize(
    ("authorization", "challenge", "said"),
    [
        ("Bearer nope", 'Bearer error="invalid_token"', "not known, or has expired"),
        ("Basic YWRtaW46YWRtaW4=", "Bearer", "only a bearer token is understood"),
    ],
)
def test_a_token_that_is_sent_but_refused_is_told_apart_from_none(
    anonymous_client: TestClient, authorization: str, challenge: str, said: str
) -> None:
    # RFC 6750, section 3.1: an invalid token answers 401 with error="invalid_token".
    response = anonymous_client.get("/api/v1/teams", headers={"Authorization": authorization})
    assert response.status_code == 401
    assert response.headers["www-authenticate"] == challenge
    detail = response.json()["detail"]
    assert said in detail["message"]
    assert "Sign in first" not in detail["message"]
    assert detail["field"] == "Authorization"


def test_anonymous_pages_go_to_sign_in(anonymous_client: TestClient) -> None:
    response = anonymous_client.get("/teams/1?period_id=2", follow_redirects=False)
    assert response.status_code == 303
    assert response.headers["location"] == "/login?next=%2Fteams%2F1%3Fperiod_id%3D2"
    assert anonymous_client.get("/health").status_code == 200
    assert anonymous_client.get("/static/loadline.css").status_code == 200


def test_public_paths_and_rules() -> None:
    assert required_role("GET", "/p/abc") is None
    assert required_role("GET", "/login") is None
    assert required_role("GET", "/teams/1") == "viewer"
    assert required_role("POST", "/teams/1/plan/initiatives") == "editor"
    assert required_role("POST", "/plans/3/publish") == "editor"
    assert required_role("GET", "/plans/3/publications") == "editor"
    assert required_role("POST", "/users/2") == "admin"


def _sign_in(client: TestClient, username: str, password: str, next_path: str = "/") -> object:
    token = csrf_token(client, "/login")
    return client.post(
        "/login",
        data={"username": username, "password": password, "next": next_path, "csrf_token": token},
        follow_redirects=False,
    )


def test_sign_in_sets_a_safe_cookie_and_signs_out(anonymous_client: TestClient) -> None:
    response = _sign_in(anonymous_client, "editor", ACCOUNT_PASSWORD, "/teams")
    assert response.status_code == 303  # type: ignore[attr-defined]
    assert response.headers["location"] == "/teams"  # type: ignore[attr-defined]
    cookie = response.headers["set-cookie"]  # type: ignore[attr-defined]
    assert cookie.startswith(f"{SESSION_COOKIE}=")
    assert "HttpOnly" in cookie
    assert "samesite=lax" in cookie.lower()
    assert "Secure" not in cookie  # plain http here; https adds Secure
    assert anonymous_client.get("/", follow_redirects=False).status_code == 200
    token = csrf_token(anonymous_client)
    anonymous_client.post("/logout", data={"csrf_token": token}, follow_redirects=False)
    assert anonymous_client.get("/", follow_redirects=False).status_code == 303


def test_sign_in_never_redirects_off_site(anonymous_client: TestClient) -> None:
    for target in ("//evil.example/", "https://evil.example/", "javascript:alert(1)"):
        response = _sign_in(anonymous_client, "viewer", ACCOUNT_PASSWORD, target)
        assert response.headers["location"] == "/"  # type: ignore[attr-defined]


def test_wrong_password_is_counted_and_limited(
    anonymous_client: TestClient, session: Session
) -> None:
    for _ in range(MAX_FAILURES_PER_ACCOUNT):
        response = _sign_in(anonymous_client, "editor", "not the password")
        assert response.status_code == 422  # type: ignore[attr-defined]
        assert "Wrong user name or password" in response.text  # type: ignore[attr-defined]
    # Even the right password is refused while the account is being guessed at.
    limited = _sign_in(anonymous_client, "editor", ACCOUNT_PASSWORD)
    assert limited.status_code == 429  # type: ignore[attr-defined]
    failures = session.exec(select(func.count()).select_from(LoginFailure)).one()
    assert failures == MAX_FAILURES_PER_ACCOUNT
    # Another account from the same address is not locked by these few failures.
    assert _sign_in(anonymous_client, "viewer", ACCOUNT_PASSWORD).status_code == 303  # type: ignore[attr-defined]


def test_unknown_user_gets_the_same_message(anonymous_client: TestClient) -> None:
    response = _sign_in(anonymous_client, "nobody-here", "whatever-password")
    assert response.status_code == 422  # type: ignore[attr-defined]
    assert "Wrong user name or password" in response.text  # type: ignore[attr-defined]


def test_cookie_signed_api_writes_need_the_page_token(
    anonymous_client: TestClient, session: Session
) -> None:
    _sign_in(anonymous_client, "editor", ACCOUNT_PASSWORD)
    refused = anonymous_client.post("/api/v1/teams", json={"name": "Cross-site"})
    assert refused.status_code == 403
    token = csrf_token(anonymous_client)
    accepted = anonymous_client.post(
        "/api/v1/teams", json={"name": "Same-site"}, headers={"X-CSRF-Token": token}
    )
    assert accepted.status_code == 201
    names = set(session.exec(select(Team.name)).all())
    assert "Same-site" in names
    assert "Cross-site" not in names


def test_forms_without_token_are_refused_even_when_signed_in(
    client: TestClient, session: Session
) -> None:
    before = session.exec(select(func.count()).select_from(Team)).one()
    assert client.post("/teams", data={"name": "No token"}).status_code == 403
    assert session.exec(select(func.count()).select_from(Team)).one() == before


def test_first_run_page_only_on_loopback_and_only_once(
    settings: Settings, session: Session
) -> None:
    from server.app import create_app

    for user in session.exec(select(UserAccount)).all():
        session.delete(user)
    session.commit()
    app = create_app(settings)
    remote = TestClient(app, client=("203.0.113.9", 5000))
    assert remote.get("/setup").status_code == 404
    assert remote.get("/", follow_redirects=False).headers["location"].startswith("/login")
    local = TestClient(app, client=("127.0.0.1", 5000))
    assert local.get("/", follow_redirects=False).headers["location"] == "/setup"
    token = re.search(r'name="csrf_token" value="([0-9a-f]+)"', local.get("/setup").text)
    assert token
    form = {"username": "first", "password": "long-enough-pass", "csrf_token": token.group(1)}
    bad = local.post("/setup", data={**form, "password_again": "different-pass"})
    assert bad.status_code == 422
    summary = parse_html(bad.text).by_id("error-summary")  # the refusal takes the focus
    assert "autofocus" in summary.attrs
    assert "Not created: 1 problem" in summary.text()
    assert {a.get("href") for a in summary.find_all("a")} == {"#f-password_again"}
    assert session.exec(select(func.count()).select_from(UserAccount)).one() == 0
    made = local.post(
        "/setup", data={**form, "password_again": "long-enough-pass"}, follow_redirects=False
    )
    assert made.status_code == 303
    assert local.get("/setup").status_code == 404  # gone once an account exists
    session.expire_all()
    admin = session.exec(select(UserAccount)).one()
    assert admin.role == "admin"
    assert admin.password_hash.startswith("$argon2id$")
    app.state.engine.dispose()


def test_proxy_sign_in_only_from_trusted_addresses(database_url: str) -> None:
    from server.app import create_app
    from tests.conftest import TEST_SECRET

    settings = Settings.from_env(
        {},
        database_url=database_url,
        secret_key=TEST_SECRET,
        proxy_user_header="X-Remote-User",
        trusted_proxies="10.0.0.5",
    )
    app = create_app(settings)
    trusted = TestClient(app, client=("10.0.0.5", 4000), headers={"X-Remote-User": "viewer"})
    assert trusted.get("/api/v1/teams").status_code == 200
    assert trusted.post("/api/v1/teams", json={"name": "Nope"}).status_code == 403  # a viewer
    other = TestClient(app, client=("10.0.0.6", 4000), headers={"X-Remote-User": "admin"})
    assert other.get("/api/v1/teams").status_code == 401
    unknown = TestClient(app, client=("10.0.0.5", 4000), headers={"X-Remote-User": "stranger"})
    assert unknown.get("/api/v1/teams").status_code == 401
    app.state.engine.dispose()


def test_disabled_accounts_lose_access(app: FastAPI, session: Session) -> None:
    viewer = session.exec(select(UserAccount).where(UserAccount.username == "viewer")).one()
    with as_role(app, "admin") as admin:
        token = csrf_token(admin, "/users")
        admin.post(
            f"/users/{viewer.id}", data={"role": "viewer", "disabled": "on", "csrf_token": token}
        )
    with as_role(app, "viewer") as client:
        assert client.get("/api/v1/teams").status_code == 401


def test_last_admin_cannot_be_demoted(app: FastAPI, session: Session) -> None:
    admin_row = session.exec(select(UserAccount).where(UserAccount.username == "admin")).one()
    with as_role(app, "admin") as admin:
        token = csrf_token(admin, "/users")
        response = admin.post(
            f"/users/{admin_row.id}", data={"role": "viewer", "csrf_token": token}
        )
    assert response.status_code == 409
    session.refresh(admin_row)
    assert admin_row.role == "admin"


def test_changes_name_their_author(app: FastAPI, session: Session) -> None:
    with as_role(app, "editor") as editor:
        editor.post("/api/v1/teams", json={"name": "Authored"}).raise_for_status()
        team_id = editor.get("/api/v1/teams").json()[0]["id"]
        period = editor.post(
            "/api/v1/periods",
            json={
                "name": "P",
                "kind": "sprint",
                "start_date": "2027-01-04",
                "end_date": "2027-01-15",
            },
        ).json()
        created = editor.post(
            "/api/v1/initiatives",
            json={
                "team_id": team_id,
                "period_id": period["id"],
                "title": "T",
                "effort": 2,
                "value": 3,
            },
        ).json()
        editor.patch(
            f"/api/v1/initiatives/{created['id']}", json={"version": created["version"], "value": 9}
        ).raise_for_status()
        trail = editor.get(f"/api/v1/audit?entity=initiative&entity_id={created['id']}").json()
    assert [entry["actor"] for entry in trail] == ["editor", "editor"]
    assert trail[0]["before"] == {"value": 3.0}
    assert trail[0]["after"] == {"value": 9.0}


@pytest.mark.usefixtures("demo_loaded")
def test_viewers_never_see_published_links(app: FastAPI) -> None:
    with as_role(app, "editor") as editor:
        plan = editor.post(
            "/api/v1/plans", json={"name": "Shown", "team_id": 1, "period_id": 1}
        ).json()
        token = editor.post(f"/api/v1/plans/{plan['id']}/publications").json()["token"]
        assert token in editor.get(f"/plans/{plan['id']}").text
    with as_role(app, "viewer") as viewer:
        page = viewer.get(f"/plans/{plan['id']}")
        assert page.status_code == 200
        assert token not in page.text
        assert "Publish a read-only link" not in page.text
        assert viewer.get(f"/api/v1/plans/{plan['id']}/publications").status_code == 403


def test_pages_show_who_is_signed_in(app: FastAPI) -> None:
    with as_role(app, "viewer") as viewer:
        page = viewer.get("/").text
    assert "viewer" in page
    assert 'href="/users"' not in page
    with as_role(app, "admin") as admin:
        assert 'href="/users"' in admin.get("/").text
