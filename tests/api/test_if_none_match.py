"""Conditional reads on the JSON API: If-None-Match on a single-row GET (RFC 9110, sections
8.8.3.2 and 13.1.2).

Where the ETag covers the whole answer (team, member, days-off row, period), a client that
sends the tag it holds gets 304 Not Modified and no body while the row is unchanged, and the
full answer with the new tag once it changed. Answers computed from more than the tagged row
(capacity, a solved scenario) always answer in full: a 304 there could hide a change.
"""

from __future__ import annotations

from collections.abc import Callable

import pytest
from fastapi.testclient import TestClient

from tests.api.conftest import Snapshot, Workspace
from tests.api.support import error_fields
from tests.api.test_if_match import KINDS, Kind, _ids, _read, _write

WHOLE_ROW = [kind for kind in KINDS if kind.name in ("team", "member", "days off", "period")]


@pytest.mark.parametrize("kind", WHOLE_ROW, ids=_ids(WHOLE_ROW))
def test_a_current_tag_answers_304_without_a_body_until_the_row_changes(
    client: TestClient, workspace: Workspace, kind: Kind
) -> None:
    url = kind.url(client, workspace)
    etag, _ = _read(client, url)
    # The tag as sent, weakened by a proxy, in a list, or any copy at all (*): all current.
    for sent in (etag, f"W/{etag}", f'"0000000000000000", {etag}', "*"):
        answer = client.get(url, headers={"If-None-Match": sent})
        assert answer.status_code == 304, (sent, answer.text[:200])
        assert answer.content == b""
        assert answer.headers["etag"] == etag
    assert client.get(url, headers={"If-None-Match": '"0000000000000000"'}).status_code == 200
    assert _write(client, kind, url, kind.theirs).status_code == 200
    changed = client.get(url, headers={"If-None-Match": etag})
    assert changed.status_code == 200
    assert changed.headers["etag"] != etag
    assert changed.json()["etag"] == changed.headers["etag"]
    for field, value in kind.theirs.items():
        assert changed.json()[field] == value


@pytest.mark.parametrize("sent", ["abc", '"abc" "def"', '*, "abc"', "W/abc", ""], ids=repr)
def test_a_malformed_if_none_match_on_a_read_is_400_naming_the_header(
    client: TestClient, workspace: Workspace, sent: str, snapshot: Callable[[], Snapshot]
) -> None:
    answer = client.get(f"/api/v1/teams/{workspace.team}", headers={"If-None-Match": sent})
    assert answer.status_code == 400, answer.text
    assert error_fields(answer) == ["If-None-Match"]
    assert "If-None-Match" in answer.json()["detail"]["message"]


def test_capacity_answers_in_full_when_days_off_change_under_the_same_tag(
    client: TestClient, workspace: Workspace
) -> None:
    # The capacity's ETag is that of its settings (focus factor, reserve): a change of days
    # off leaves it as it was but changes the answer, so the read never answers 304.
    url = f"/api/v1/teams/{workspace.team}/periods/{workspace.period}/capacity"
    etag, before = _read(client, url)
    changed = client.patch(f"/api/v1/availability/{workspace.availability}", json={"days_off": 6})
    assert changed.status_code == 200
    answer = client.get(url, headers={"If-None-Match": etag})
    assert answer.status_code == 200
    assert answer.headers["etag"] == etag
    assert answer.json()["capacity_days"] < before["capacity_days"]


def test_the_api_docs_list_304_on_conditional_reads_only(client: TestClient) -> None:
    paths = client.get("/openapi.json").json()["paths"]
    for path in (
        "/api/v1/teams/{team_id}",
        "/api/v1/members/{member_id}",
        "/api/v1/availability/{availability_id}",
        "/api/v1/periods/{period_id}",
    ):
        get = paths[path]["get"]
        assert "304" in get["responses"], path
        assert any(p["name"] == "If-None-Match" for p in get["parameters"]), path
    capacity = paths["/api/v1/teams/{team_id}/periods/{period_id}/capacity"]["get"]
    assert "304" not in capacity["responses"]
    assert "304" not in paths["/api/v1/scenarios/{scenario_id}"]["get"]["responses"]
