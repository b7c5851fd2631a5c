"""Lost updates on the JSON API: ETag on reads and writes, If-Match on writes (RFC 9110).

For every kind of row without a version column (team, member, days-off row, period, scenario,
a team's capacity settings in a period): a write sent with a stale If-Match is refused with
412 and stores nothing; a current one is applied and answers with the new ETag; no If-Match
(or `*`) writes as before; a malformed If-Match is a 400 naming the header.
"""

from __future__ import annotations

import re
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import pytest
from fastapi.testclient import TestClient

from tests.api.conftest import Snapshot, Workspace
from tests.api.support import error_fields

STRONG_TAG = re.compile(r'"[0-9a-f]{16}"')


@dataclass(frozen=True)
class Kind:
    """One kind of row: where it is, how it is changed, and what a colleague changes."""

    name: str
    url: Callable[[TestClient, Workspace], str]
    method: str  # the write: PATCH, or PUT for capacity settings
    mine: dict[str, Any]
    theirs: dict[str, Any]
    refused_words: str  # what the 412 says is stored now, after the colleague's change
    deletable: bool = True


def _scenario(client: TestClient, ws: Workspace) -> str:
    body = {"name": "Lean", "team_id": ws.team, "period_id": ws.period}
    created = client.post("/api/v1/scenarios", json=body)
    assert created.status_code == 201
    return f"/api/v1/scenarios/{created.json()['id']}"


def _period(client: TestClient, _ws: Workspace) -> str:
    body = {"name": "Sprint 9", "kind": "sprint", "start_date": "2027-05-03"}
    created = client.post("/api/v1/periods", json=body | {"end_date": "2027-05-14"})
    assert created.status_code == 201
    return f"/api/v1/periods/{created.json()['id']}"


KINDS = [
    Kind(
        "team",
        lambda _c, ws: f"/api/v1/teams/{ws.other_team}",
        "PATCH",
        {"default_spread": 0.1},
        {"name": "Lighthouse East"},
        "The team's name and spread were changed while you were editing: now "
        "“Lighthouse East”, spread 0 %.",
    ),
    Kind(
        "member",
        lambda _c, ws: f"/api/v1/members/{ws.member}",
        "PATCH",
        {"allocation": 0.5},
        {"name": "Ola N."},
        "Ola N.'s name and share were changed while you were editing: now Ola N., share 100 %.",
    ),
    Kind(
        "days off",
        lambda _c, ws: f"/api/v1/availability/{ws.availability}",
        "PATCH",
        {"allocation": 0.5},
        {"days_off": 4},
        "Ola's days off in Sprint 1 were changed while you were editing: now 4 days off, the "
        "member's usual share.",
    ),
    Kind(
        "period",
        _period,
        "PATCH",
        {"weekmask": "1111000"},
        {"name": "Sprint 9 (moved)"},
        "Period “Sprint 9 (moved)” was changed while you were editing: now 2027-05-03 to "
        "2027-05-14, 10 working days.",
    ),
    Kind(
        "scenario",
        _scenario,
        "PATCH",
        {"name": "Leaner"},
        {"changes": {"capacity_days": 9}},
        "Scenario “Lean” was changed while you were editing: now changing capacity.",
    ),
    Kind(
        "capacity settings",
        lambda _c, ws: f"/api/v1/teams/{ws.team}/periods/{ws.period}/capacity",
        "PUT",
        {"focus_factor": 0.8, "reserve_pct": 15},
        {"focus_factor": 0.6, "reserve_pct": 10},
        "The focus factor and reserve were changed while you were editing: now focus factor "
        "0.6, reserve 10 %.",
        deletable=False,
    ),
]
DELETABLE = [kind for kind in KINDS if kind.deletable]


def _ids(kinds: list[Kind]) -> list[str]:
    return [kind.name for kind in kinds]


def _read(client: TestClient, url: str) -> tuple[str, dict[str, Any]]:
    answer = client.get(url)
    assert answer.status_code == 200
    return answer.headers["etag"], answer.json()


def _write(client: TestClient, kind: Kind, url: str, body: dict[str, Any], **headers: str) -> Any:
    return client.request(kind.method, url, json=body, headers=headers)


@pytest.mark.parametrize("kind", KINDS, ids=_ids(KINDS))
def test_a_read_answers_with_a_strong_etag_that_the_json_shows(
    client: TestClient, workspace: Workspace, kind: Kind
) -> None:
    url = kind.url(client, workspace)
    etag, row = _read(client, url)
    assert STRONG_TAG.fullmatch(etag), etag
    assert row["etag"] == etag
    assert _read(client, url)[0] == etag  # nothing changed, the same tag


@pytest.mark.parametrize("kind", KINDS, ids=_ids(KINDS))
def test_a_stale_if_match_is_refused_with_412_and_nothing_stored(
    client: TestClient, workspace: Workspace, kind: Kind, snapshot: Callable[[], Snapshot]
) -> None:
    url = kind.url(client, workspace)
    read_etag, _ = _read(client, url)
    assert _write(client, kind, url, kind.theirs).status_code == 200  # a colleague's change
    stored_etag, stored = _read(client, url)
    before = snapshot()

    refused = _write(client, kind, url, kind.mine, **{"If-Match": read_etag})

    assert refused.status_code == 412
    assert error_fields(refused) == ["If-Match"]
    detail = refused.json()["detail"]
    assert detail["message"].startswith(kind.refused_words)
    assert "Nothing was saved" in detail["message"]
    assert "in the form again" not in detail["message"]
    assert detail["current"]  # the stored values, as the message says them
    assert refused.headers["etag"] == stored_etag  # what to send to write over them
    assert snapshot() == before
    assert _read(client, url) == (stored_etag, stored)


@pytest.mark.parametrize("kind", DELETABLE, ids=_ids(DELETABLE))
def test_a_stale_if_match_on_delete_is_refused_with_412_and_nothing_deleted(
    client: TestClient, workspace: Workspace, kind: Kind, snapshot: Callable[[], Snapshot]
) -> None:
    url = kind.url(client, workspace)
    read_etag, _ = _read(client, url)
    assert _write(client, kind, url, kind.theirs).status_code == 200
    before = snapshot()

    refused = client.delete(url, headers={"If-Match": read_etag})

    assert refused.status_code == 412
    assert refused.json()["detail"]["message"].startswith(kind.refused_words)
    assert snapshot() == before
    assert client.get(url).status_code == 200


@pytest.mark.parametrize("kind", KINDS, ids=_ids(KINDS))
def test_a_current_if_match_writes_and_answers_with_the_new_etag(
    client: TestClient, workspace: Workspace, kind: Kind
) -> None:
    url = kind.url(client, workspace)
    read_etag, _ = _read(client, url)

    written = _write(client, kind, url, kind.mine, **{"If-Match": read_etag})

    assert written.status_code == 200
    new_etag = written.headers["etag"]
    assert STRONG_TAG.fullmatch(new_etag)
    assert new_etag != read_etag
    assert written.json()["etag"] == new_etag
    assert _read(client, url)[0] == new_etag
    for field, value in kind.mine.items():
        assert written.json()[field] == value
    # The new tag is current: a second write based on it goes through too.
    again = _write(client, kind, url, kind.theirs, **{"If-Match": new_etag})
    assert again.status_code == 200


@pytest.mark.parametrize("kind", DELETABLE, ids=_ids(DELETABLE))
def test_a_current_if_match_deletes(client: TestClient, workspace: Workspace, kind: Kind) -> None:
    url = kind.url(client, workspace)
    read_etag, _ = _read(client, url)
    assert client.delete(url, headers={"If-Match": read_etag}).status_code == 204
    assert client.get(url).status_code == 404


@pytest.mark.parametrize("kind", KINDS, ids=_ids(KINDS))
@pytest.mark.parametrize("if_match", [None, "*"], ids=["no If-Match", "If-Match *"])
def test_without_a_condition_the_last_write_wins_as_before(
    client: TestClient, workspace: Workspace, kind: Kind, if_match: str | None
) -> None:
    url = kind.url(client, workspace)
    _read(client, url)
    assert _write(client, kind, url, kind.theirs).status_code == 200

    headers = {} if if_match is None else {"If-Match": if_match}
    written = _write(client, kind, url, kind.mine, **headers)

    assert written.status_code == 200
    assert written.headers["etag"] == _read(client, url)[0]
    for field, value in kind.mine.items():
        assert written.json()[field] == value


@pytest.mark.parametrize("kind", DELETABLE, ids=_ids(DELETABLE))
def test_a_delete_without_if_match_still_deletes(
    client: TestClient, workspace: Workspace, kind: Kind
) -> None:
    url = kind.url(client, workspace)
    _read(client, url)
    assert _write(client, kind, url, kind.theirs).status_code == 200
    assert client.delete(url, headers={"If-Match": "*"}).status_code == 204
    assert client.get(url).status_code == 404


@pytest.mark.parametrize(
    "value",
    [
        "0123456789abcdef",  # the tag without its quotes
        '"0123456789abcdef" "fedcba9876543210"',  # no comma between tags
        '*, "0123456789abcdef"',
        '"0123456789abcdef',  # an unclosed quote
        ",",
    ],
    ids=["unquoted", "no comma", "star in a list", "unclosed quote", "no tag"],
)
@pytest.mark.parametrize("kind", KINDS, ids=_ids(KINDS))
def test_a_malformed_if_match_is_400_naming_the_header(
    client: TestClient,
    workspace: Workspace,
    kind: Kind,
    value: str,
    snapshot: Callable[[], Snapshot],
) -> None:
    url = kind.url(client, workspace)
    before = snapshot()

    refused = _write(client, kind, url, kind.mine, **{"If-Match": value})

    assert refused.status_code == 400
    assert error_fields(refused) == ["If-Match"]
    message = refused.json()["detail"]["message"]
    assert message.startswith("If-Match: ")
    assert "entity tags in double quotes" in message
    assert snapshot() == before
    if kind.deletable:
        assert client.delete(url, headers={"If-Match": value}).status_code == 400
        assert snapshot() == before


def test_any_listed_tag_may_match(client: TestClient, workspace: Workspace) -> None:
    url = f"/api/v1/members/{workspace.member}"
    etag, _ = _read(client, url)
    stale = '"0123456789abcdef"'
    written = client.patch(url, json={"allocation": 0.5}, headers={"If-Match": f"{stale}, {etag}"})
    assert written.status_code == 200
    refused = client.patch(url, json={"allocation": 0.4}, headers={"If-Match": f"{stale}, {etag}"})
    assert refused.status_code == 412


def test_a_weak_tag_never_matches_a_write(
    client: TestClient, workspace: Workspace, snapshot: Callable[[], Snapshot]
) -> None:
    url = f"/api/v1/members/{workspace.member}"
    etag, _ = _read(client, url)
    before = snapshot()
    refused = client.patch(url, json={"allocation": 0.5}, headers={"If-Match": f"W/{etag}"})
    assert refused.status_code == 412
    assert "only weak entity tags" in refused.json()["detail"]["message"]
    assert snapshot() == before


def test_lists_show_each_rows_etag(client: TestClient, workspace: Workspace) -> None:
    for listing, single in [
        ("/api/v1/teams", "/api/v1/teams/{}"),
        ("/api/v1/members", "/api/v1/members/{}"),
        ("/api/v1/availability", "/api/v1/availability/{}"),
        ("/api/v1/periods", "/api/v1/periods/{}"),
    ]:
        rows = client.get(listing).json()
        assert rows
        for row in rows:
            assert row["etag"] == client.get(single.format(row["id"])).headers["etag"]


def test_a_created_row_answers_with_its_etag(client: TestClient, workspace: Workspace) -> None:
    sprint = {"kind": "sprint", "start_date": "2027-05-03", "end_date": "2027-05-14"}
    for path, body in [
        ("/api/v1/teams", {"name": "Pier"}),
        ("/api/v1/members", {"team_id": workspace.team, "name": "Kari"}),
        ("/api/v1/availability", {"member_id": workspace.member, "period_id": workspace.period}),
        ("/api/v1/periods", {"name": "Sprint 9", **sprint}),
        (
            "/api/v1/scenarios",
            {"name": "Lean", "team_id": workspace.team, "period_id": workspace.period},
        ),
    ]:
        created = client.post(path, json=body)
        assert created.status_code == 201, path
        assert created.headers["etag"] == created.json()["etag"], path
        read = client.get(f"{path}/{created.json()['id']}")
        assert read.headers["etag"] == created.headers["etag"], path


CONDITIONAL_ROUTES = [
    ("/api/v1/teams/{team_id}", "patch"),
    ("/api/v1/teams/{team_id}", "delete"),
    ("/api/v1/members/{member_id}", "patch"),
    ("/api/v1/members/{member_id}", "delete"),
    ("/api/v1/availability/{availability_id}", "patch"),
    ("/api/v1/availability/{availability_id}", "delete"),
    ("/api/v1/periods/{period_id}", "patch"),
    ("/api/v1/periods/{period_id}", "delete"),
    ("/api/v1/scenarios/{scenario_id}", "patch"),
    ("/api/v1/scenarios/{scenario_id}", "delete"),
    ("/api/v1/teams/{team_id}/periods/{period_id}/capacity", "put"),
]
TAGGED_READS = sorted({path for path, _ in CONDITIONAL_ROUTES})


def test_the_api_docs_describe_if_match_412_and_etag(client: TestClient) -> None:
    spec = client.get("/openapi.json").json()
    for path, method in CONDITIONAL_ROUTES:
        operation = spec["paths"][path][method]
        headers = [p for p in operation["parameters"] if p["in"] == "header"]
        assert [p["name"] for p in headers] == ["If-Match"], (path, method)
        assert "412" in headers[0]["description"], (path, method)
        assert "Precondition Failed" in operation["responses"]["412"]["description"]
        assert "If-Match" in operation["responses"]["400"]["description"]
        if method != "delete":
            assert "ETag" in operation["responses"]["200"]["headers"], (path, method)
    for path in TAGGED_READS:
        assert "ETag" in spec["paths"][path]["get"]["responses"]["200"]["headers"], path
    for path in ["/teams", "/members", "/availability", "/periods", "/scenarios"]:
        created = spec["paths"][f"/api/v1{path}"]["post"]["responses"]["201"]
        assert "ETag" in created["headers"], path


def test_the_days_off_upsert_replaces_a_row_only_as_read_when_if_match_is_sent(
    client: TestClient, workspace: Workspace, snapshot: Callable[[], Snapshot]
) -> None:
    # POST /availability replaces the member's row for the period: If-Match guards that too.
    etag = client.get(f"/api/v1/availability/{workspace.availability}").headers["etag"]
    body = {"member_id": workspace.member, "period_id": workspace.period}
    colleague = client.patch(f"/api/v1/availability/{workspace.availability}", json={"days_off": 4})
    assert colleague.status_code == 200
    before = snapshot()
    stale = client.post(
        "/api/v1/availability", json=body | {"days_off": 1}, headers={"If-Match": etag}
    )
    assert stale.status_code == 412, stale.text
    assert error_fields(stale) == ["If-Match"]
    assert "now 4 days off" in stale.json()["detail"]["message"]
    assert stale.headers["etag"] == colleague.headers["etag"]
    assert snapshot() == before
    fresh = client.post(
        "/api/v1/availability",
        json=body | {"days_off": 1},
        headers={"If-Match": colleague.headers["etag"]},
    )
    assert fresh.status_code == 201, fresh.text
    assert fresh.json()["days_off"] == 1
    assert fresh.json()["id"] == workspace.availability  # replaced, not added
    assert fresh.headers["etag"] not in (etag, colleague.headers["etag"])
    malformed = client.post("/api/v1/availability", json=body, headers={"If-Match": "abc"})
    assert malformed.status_code == 400
    assert error_fields(malformed) == ["If-Match"]


def test_the_days_off_upsert_with_if_match_refuses_a_row_deleted_since(
    client: TestClient, workspace: Workspace, snapshot: Callable[[], Snapshot]
) -> None:
    url = f"/api/v1/availability/{workspace.availability}"
    etag = client.get(url).headers["etag"]
    assert client.delete(url).status_code == 204
    before = snapshot()
    body = {"member_id": workspace.member, "period_id": workspace.period, "days_off": 2}
    refused = client.post("/api/v1/availability", json=body, headers={"If-Match": etag})
    assert refused.status_code == 412, refused.text
    assert "none recorded" in refused.json()["detail"]["message"]
    assert snapshot() == before
    unconditional = client.post("/api/v1/availability", json=body)
    assert unconditional.status_code == 201


def test_the_api_docs_describe_both_conditions_on_the_days_off_upsert(client: TestClient) -> None:
    operation = client.get("/openapi.json").json()["paths"]["/api/v1/availability"]["post"]
    headers = [p["name"] for p in operation["parameters"] if p["in"] == "header"]
    assert headers == ["If-Match", "If-None-Match"]
    assert "Precondition Failed" in operation["responses"]["412"]["description"]
    assert "If-None-Match: *" in operation["responses"]["412"]["description"]
    assert "If-None-Match" in operation["responses"]["400"]["description"]
    assert "ETag" in operation["responses"]["201"]["headers"]


def test_the_days_off_upsert_with_if_none_match_star_never_replaces_a_stored_row(
    client: TestClient, workspace: Workspace, snapshot: Callable[[], Snapshot]
) -> None:
    # Two people entering the same member's days at once: the second learns of the first.
    url = f"/api/v1/availability/{workspace.availability}"
    stored = client.patch(url, json={"days_off": 3})
    assert stored.status_code == 200
    body = {"member_id": workspace.member, "period_id": workspace.period, "days_off": 1}
    before = snapshot()

    refused = client.post("/api/v1/availability", json=body, headers={"If-None-Match": "*"})

    assert refused.status_code == 412, refused.text
    assert error_fields(refused) == ["If-None-Match"]
    detail = refused.json()["detail"]
    assert "already recorded: 3 days off" in detail["message"]
    assert "Nothing was saved" in detail["message"]
    assert detail["current"]["days_off"] == 3
    assert refused.headers["etag"] == stored.headers["etag"]
    assert snapshot() == before
    # A current If-Match does not lift it: the row is still there, so create-only refuses.
    both = client.post(
        "/api/v1/availability",
        json=body,
        headers={"If-None-Match": "*", "If-Match": stored.headers["etag"]},
    )
    assert both.status_code == 412
    assert error_fields(both) == ["If-None-Match"]
    assert snapshot() == before


def test_the_days_off_upsert_with_if_none_match_star_creates_when_no_row_is_stored(
    client: TestClient, workspace: Workspace
) -> None:
    assert client.delete(f"/api/v1/availability/{workspace.availability}").status_code == 204
    body = {"member_id": workspace.member, "period_id": workspace.period, "days_off": 2}

    created = client.post("/api/v1/availability", json=body, headers={"If-None-Match": "*"})

    assert created.status_code == 201, created.text
    assert created.json()["days_off"] == 2
    assert created.headers["etag"] == created.json()["etag"]
    again = client.post(
        "/api/v1/availability", json=body | {"days_off": 5}, headers={"If-None-Match": "*"}
    )
    assert again.status_code == 412
    assert client.get(f"/api/v1/availability/{created.json()['id']}").json()["days_off"] == 2


def test_the_days_off_upsert_with_if_match_star_replaces_but_never_creates(
    client: TestClient, workspace: Workspace, snapshot: Callable[[], Snapshot]
) -> None:
    # RFC 9110, section 13.1.1: "*" holds only when a current representation exists.
    body = {"member_id": workspace.member, "period_id": workspace.period, "days_off": 4}
    replaced = client.post("/api/v1/availability", json=body, headers={"If-Match": "*"})
    assert replaced.status_code == 201, replaced.text
    assert replaced.json()["days_off"] == 4
    assert client.delete(f"/api/v1/availability/{replaced.json()['id']}").status_code == 204
    before = snapshot()

    refused = client.post("/api/v1/availability", json=body, headers={"If-Match": "*"})

    assert refused.status_code == 412, refused.text
    assert error_fields(refused) == ["If-Match"]
    message = refused.json()["detail"]["message"]
    assert "days off in Sprint 1 are not recorded yet" in message
    assert "Nothing was saved" in message
    assert "etag" not in refused.headers
    assert snapshot() == before


@pytest.mark.parametrize("value", ['"0123456789abcdef"', 'W/"0123456789abcdef"', "*, *", "none"])
def test_if_none_match_other_than_star_is_400_naming_the_header(
    client: TestClient, workspace: Workspace, value: str, snapshot: Callable[[], Snapshot]
) -> None:
    body = {"member_id": workspace.member, "period_id": workspace.period, "days_off": 1}
    before = snapshot()
    refused = client.post("/api/v1/availability", json=body, headers={"If-None-Match": value})
    assert refused.status_code == 400, refused.text
    assert error_fields(refused) == ["If-None-Match"]
    assert refused.json()["detail"]["message"].startswith("If-None-Match: only * is understood")
    assert snapshot() == before
