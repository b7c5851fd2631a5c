"""Published links: token strength, frozen read-only pages, revocation, and no way out."""

from __future__ import annotations

import base64
import string
from collections import Counter
from concurrent.futures import ThreadPoolExecutor
from urllib.parse import unquote

import anyio
import pytest
from fastapi import FastAPI
from fastapi.testclient import TestClient
from scipy import stats
from sqlmodel import Session, col, select

from server.models import AuditEntry, Publication
from server.store import plans as store
from tests.plans.conftest import Workspace, collect, counts, edit, publish, save_live
from tests.served import as_served, unreachable_after

URLSAFE = set(string.ascii_letters + string.digits + "-_")


def test_tokens_carry_256_random_bits_in_the_url_safe_alphabet() -> None:
    tokens = [store.new_token() for _ in range(5000)]
    assert len(set(tokens)) == len(tokens)
    for token in tokens[:200]:
        assert len(token) == 43
        assert set(token) <= URLSAFE
        raw = base64.urlsafe_b64decode(token + "=")
        assert len(raw) * 8 == 256  # at least the 128 bits asked for
    # Character frequencies over the first 42 characters (each carries 6 full random bits) are
    # uniform: chi-square goodness of fit (scipy.stats.chisquare); p below 1e-6 would mean a
    # biased generator, with a chance of a false alarm of one in a million.
    counted = Counter(ch for token in tokens for ch in token[:42])
    observed = [counted.get(ch, 0) for ch in sorted(URLSAFE)]
    assert stats.chisquare(observed).pvalue > 1e-6
    # Bits are balanced: two-sided binomial test on the count of one-bits.
    raw_bits = b"".join(base64.urlsafe_b64decode(t + "=") for t in tokens[:1000])
    ones = sum(bin(byte).count("1") for byte in raw_bits)
    assert stats.binomtest(ones, len(raw_bits) * 8, 0.5).pvalue > 1e-6


def test_published_page_is_frozen_read_only_and_leads_nowhere(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    plan = save_live(form_client, workspace, "Sprint plan for stakeholders")
    link = publish(form_client, plan["id"])
    assert link["url"] == f"/p/{link['token']}"
    assert len(link["token"]) >= 22  # 128 bits in URL-safe base64 at the least

    response = form_client.get(link["url"])
    assert response.status_code == 200
    assert response.headers["referrer-policy"] == "no-referrer"
    assert "noindex" in response.headers["x-robots-tag"]
    assert "form-action 'none'" in response.headers["content-security-policy"]
    page = collect(response.text)
    assert {"name": "robots", "content": "noindex, nofollow"} in page.metas
    assert not any(m.get("name") == "csrf-token" for m in page.metas)
    assert "form" not in page.tags
    assert "script" not in page.tags
    assert "input" not in page.tags
    assert "button" not in page.tags
    # The only URLs on the page are static files: no link into the app, no API, no other plan.
    assert page.urls == [
        ("link", "href", "/static/favicon.svg"),
        ("link", "href", "/static/loadline.css"),
    ]
    assert "Sprint plan for stakeholders" in response.text
    assert "Route search" in response.text
    assert "saved " in response.text

    # The same bytes for anyone, any number of times (no token, no clock in the page).
    other_browser = TestClient(form_client.app)
    again = other_browser.get(link["url"])
    assert again.content == response.content
    # Nothing is kept in a stakeholder's browser: the page has no form that needs a cookie.
    assert "set-cookie" not in again.headers
    assert not other_browser.cookies
    assert again.headers["etag"] == response.headers["etag"]
    not_modified = other_browser.get(link["url"], headers={"If-None-Match": again.headers["etag"]})
    assert not_modified.status_code == 304
    assert not_modified.content == b""
    # A proxy that compresses may weaken the tag (W/); a garbled header is just no match.
    weakened = other_browser.get(
        link["url"], headers={"If-None-Match": f"W/{again.headers['etag']}"}
    )
    assert weakened.status_code == 304
    garbled = other_browser.get(link["url"], headers={"If-None-Match": "not a tag"})
    assert garbled.status_code == 200
    assert garbled.content == response.content


def test_published_page_never_solves_or_reads_live_data(
    session: Session,
    workspace: Workspace,
    form_client: TestClient,
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    plan = save_live(form_client, workspace)
    link = publish(form_client, plan["id"])
    before = form_client.get(link["url"]).content

    def refuse(*_args: object, **_kwargs: object) -> None:
        raise AssertionError("the published page must not solve or read live data")

    for target in (
        "server.planning.plans.plan_for",
        "server.planning.plans.solve",
        "server.planning.snapshots.plan_for",
        "server.store.initiatives.list_initiatives",
        "server.planning.team_capacity.capacity_of",
    ):
        monkeypatch.setattr(target, refuse)
    assert form_client.get(link["url"]).content == before


def test_revoking_answers_410_at_once_and_is_audited(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    plan = save_live(form_client, workspace)
    first = publish(form_client, plan["id"])
    second = publish(form_client, plan["id"])
    assert first["token"] != second["token"]
    assert form_client.get(first["url"]).status_code == 200

    revoked = form_client.post(f"/api/v1/publications/{first['id']}/revoke")
    assert revoked.status_code == 200
    assert revoked.json()["active"] is False
    gone = form_client.get(first["url"])
    assert gone.status_code == 410
    assert "withdrawn" in gone.text
    assert "Route search" not in gone.text
    assert gone.headers["referrer-policy"] == "no-referrer"
    assert form_client.get(second["url"]).status_code == 200  # other links stay

    # The page's revoke button does the same, with the form token and the box ticked.
    page_revoke = form_client.post(
        f"/publications/{second['id']}/revoke",
        data={"csrf_token": form_client.csrf, "confirm": "yes"},  # type: ignore[attr-defined]
        follow_redirects=False,
    )
    assert page_revoke.status_code == 303
    assert form_client.get(second["url"]).status_code == 410
    # Revoking again changes nothing.
    before = counts(session)
    assert form_client.post(f"/api/v1/publications/{first['id']}/revoke").status_code == 200
    assert counts(session) == before

    session.expire_all()
    actions = [e.action for e in session.exec(select(AuditEntry).order_by(col(AuditEntry.id)))]
    assert actions.count("plan.save") == 1
    assert actions.count("plan.publish") == 2
    assert actions.count("plan.revoke") == 2


def test_revoke_without_the_form_token_is_refused(
    workspace: Workspace, form_client: TestClient
) -> None:
    plan = save_live(form_client, workspace)
    link = publish(form_client, plan["id"])
    refused = form_client.post(f"/publications/{link['id']}/revoke", data={})
    assert refused.status_code == 403
    assert form_client.get(link["url"]).status_code == 200


def test_revoking_on_the_page_asks_to_confirm_and_changes_nothing_unconfirmed(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    plan = save_live(form_client, workspace)
    link = publish(form_client, plan["id"])
    page = form_client.get(f"/plans/{plan['id']}").text
    box = (
        '<input type="checkbox" name="confirm" value="yes" required> I understand the address '
        "stops working for everyone who has it"
    )
    assert box in page  # the browser asks for the tick before sending, without JavaScript

    before = counts(session)
    for unticked in ({}, {"confirm": ""}, {"confirm": "on"}):
        refused = form_client.post(
            f"/publications/{link['id']}/revoke",
            data={"csrf_token": form_client.csrf, **unticked},  # type: ignore[attr-defined]
            follow_redirects=False,
        )
        assert refused.status_code == 422
        form = refused.text.split(f'action="/publications/{link["id"]}/revoke"', 1)[1]
        form = form.split("</form>", 1)[0]
        assert 'role="alert"' in form  # the message beside the box it asks for
        assert "Tick “I understand the address stops working for everyone who has it”" in form
        assert counts(session) == before
        assert form_client.get(link["url"]).status_code == 200

    ticked = form_client.post(
        f"/publications/{link['id']}/revoke",
        data={"csrf_token": form_client.csrf, "confirm": "yes"},  # type: ignore[attr-defined]
        follow_redirects=False,
    )
    assert ticked.status_code == 303
    assert form_client.get(link["url"]).status_code == 410


def _raw_get(app: object, path: str) -> tuple[int, dict[str, str], bytes]:
    """Send a GET with the path exactly as given (as `curl --path-as-is` would), no clean-up."""
    sent: list[dict[str, object]] = []

    async def receive() -> dict[str, object]:
        return {"type": "http.request", "body": b"", "more_body": False}

    async def send(message: dict[str, object]) -> None:
        sent.append(message)

    scope = {
        "type": "http",
        "asgi": {"version": "3.0"},
        "http_version": "1.1",
        "method": "GET",
        "scheme": "http",
        "path": unquote(path),
        "raw_path": path.encode(),
        "query_string": b"",
        "root_path": "",
        "headers": [(b"host", b"testserver")],
        "client": ("127.0.0.1", 50000),
        "server": ("testserver", 80),
    }
    # In a thread of its own: the browser tests leave an event loop running in this one.
    with ThreadPoolExecutor(max_workers=1) as pool:
        pool.submit(anyio.run, app, scope, receive, send).result()  # type: ignore[arg-type]
    start = next(m for m in sent if m["type"] == "http.response.start")
    body = b"".join(m.get("body", b"") for m in sent if m["type"] == "http.response.body")  # type: ignore[misc]
    headers = {k.decode(): v.decode() for k, v in start["headers"]}  # type: ignore[attr-defined]
    return int(start["status"]), headers, body  # type: ignore[call-overload]


@pytest.mark.parametrize(
    "suffix",
    [
        "/../plans/{plan}",
        "/../../api/v1/plans/{plan}",
        "/..%2F..%2Fapi%2Fv1%2Fteams",
        "%2F..%2F..%2Fteams%2F1",
        "/x",
        ".json",
        "/",
        "%00",
        "/export.csv",
    ],
)
def test_a_token_reaches_nothing_but_its_own_page(
    workspace: Workspace, client: TestClient, suffix: str
) -> None:
    plan = save_live(client, workspace, "Public plan")
    link = publish(client, plan["id"])
    path = f"/p/{link['token']}" + suffix.format(plan=plan["id"])
    status, headers, body = _raw_get(client.app, path)
    if status in (307, 308):  # a trailing slash is redirected to the page itself, nothing else
        assert headers["location"].endswith(f"/p/{link['token']}")
        return
    assert status == 404, (path, status)
    assert b"Public plan" not in body
    assert b"Harbour" not in body


@pytest.mark.parametrize(
    "token_of",
    [
        lambda t: t[:-1],
        lambda t: t + "A",
        lambda t: t.upper(),
        lambda t: t[::-1],
        lambda t: "A" * 43,
        lambda t: "",
        lambda t: "'; DROP TABLE publication; --",
    ],
)
def test_unknown_and_malformed_tokens_get_404(
    session: Session, workspace: Workspace, client: TestClient, token_of: object
) -> None:
    plan = save_live(client, workspace, "Public plan")
    link = publish(client, plan["id"])
    before = counts(session)
    response = client.get(f"/p/{token_of(link['token'])}")  # type: ignore[operator]
    assert response.status_code == 404
    assert "Public plan" not in response.text
    assert counts(session) == before


def test_each_token_shows_its_own_plan_only(
    session: Session, workspace: Workspace, client: TestClient
) -> None:
    first = save_live(client, workspace, "First plan")
    edit(session, workspace.id_of("Depot dashboard"), title="Depot dashboard v2")
    second = save_live(client, workspace, "Second plan", changes={"capacity_days": 5})
    link_1, link_2 = publish(client, first["id"]), publish(client, second["id"])
    page_1, page_2 = client.get(link_1["url"]).text, client.get(link_2["url"]).text
    assert "First plan" in page_1
    assert "Second plan" not in page_1
    assert "Second plan" in page_2
    assert "First plan" not in page_2
    assert "Depot dashboard v2" in page_2
    assert "Depot dashboard v2" not in page_1
    session.expire_all()
    stored = {p.plan_id for p in session.exec(select(Publication))}
    assert stored == {first["id"], second["id"]}


def test_publication_management_lists_links_with_revoke_buttons(
    workspace: Workspace, form_client: TestClient
) -> None:
    plan = save_live(form_client, workspace)
    made = form_client.post(
        f"/plans/{plan['id']}/publish",
        data={"csrf_token": form_client.csrf},  # type: ignore[attr-defined]
        follow_redirects=False,
    )
    assert made.status_code == 303
    links = form_client.get(f"/api/v1/plans/{plan['id']}/publications").json()
    assert len(links) == 1
    page = form_client.get(f"/plans/{plan['id']}").text
    assert f"/p/{links[0]['token']}" in page
    assert f'action="/publications/{links[0]["id"]}/revoke"' in page
    assert form_client.get("/api/v1/plans/999/publications").status_code == 404
    assert form_client.post("/api/v1/plans/999/publications").status_code == 404
    assert form_client.post("/api/v1/publications/999/revoke").status_code == 404


def test_published_page_render_leaves_no_cycles(
    app: FastAPI, workspace: Workspace, form_client: TestClient
) -> None:
    # The most read page of all: a view of it must not wait for the garbage collector
    # (see tests/pages/test_render_garbage.py).
    link = publish(form_client, save_live(form_client, workspace, "For the steering group")["id"])
    with TestClient(as_served(app)) as reader:
        assert reader.get(link["url"]).status_code == 200
        freed = unreachable_after(lambda: reader.get(link["url"]))
    # About 70 are the framework's own per-request cycles; a macro holding the page's context
    # (the snapshot of even this small plan) adds about 250.
    assert freed < 200, f"{freed} objects were left in reference cycles by one published view"
