"""Teams, members and periods are refused a second name that reads the same on a page: the
same letters in another case, accents typed either way, full-width letters, runs of spaces,
a no-break space or a zero-width one (compared by `name_key`, Unicode's compatibility
caseless match, with invisible format characters left out)."""

from __future__ import annotations

from collections.abc import Callable

import pytest
from fastapi.testclient import TestClient

from tests.api.conftest import Snapshot, Workspace
from tests.api.support import error_fields

LOOK_ALIKES = [
    "harbour",
    "Harbour ",
    "HARBOUR",
    "Ｈａｒｂｏｕｒ",  # full-width letters
    "Harbour\u200b",  # a zero-width space at the end
    "Har\u200dbour",  # a zero-width joiner inside
]


@pytest.mark.parametrize("name", LOOK_ALIKES, ids=repr)
def test_a_team_name_that_reads_like_another_is_refused(
    client: TestClient, workspace: Workspace, snapshot: Callable[[], Snapshot], name: str
) -> None:
    before = snapshot()
    answer = client.post("/api/v1/teams", json={"name": name})
    assert answer.status_code == 409, answer.text
    assert error_fields(answer) == ["name"]
    assert "“Harbour” already exists" in answer.json()["detail"]["message"]
    assert snapshot() == before


def test_spaces_and_accents_typed_either_way_are_one_name(
    client: TestClient, workspace: Workspace
) -> None:
    made = client.post("/api/v1/teams", json={"name": "QA Team"})
    assert made.status_code == 201
    for twin in ("QA  Team", "QA\u00a0Team"):
        assert client.post("/api/v1/teams", json={"name": twin}).status_code == 409
    combining = client.post("/api/v1/teams", json={"name": "E\u0301quipe"})
    assert combining.status_code == 201
    assert client.post("/api/v1/teams", json={"name": "équipe"}).status_code == 409
    # A team keeps its own name in another case: only other rows clash.
    renamed = client.patch(f"/api/v1/teams/{made.json()['id']}", json={"name": "qa team"})
    assert renamed.status_code == 200, renamed.text
    other = client.patch(f"/api/v1/teams/{workspace.other_team}", json={"name": "QA TEAM"})
    assert other.status_code == 409


def test_member_and_period_names_compare_the_same_way(
    client: TestClient, workspace: Workspace
) -> None:
    first = client.post("/api/v1/members", json={"team_id": workspace.team, "name": "Ömer"})
    assert first.status_code == 201
    twin = client.post("/api/v1/members", json={"team_id": workspace.team, "name": "ömer"})
    assert twin.status_code == 409
    assert error_fields(twin) == ["name"]
    elsewhere = client.post(
        "/api/v1/members", json={"team_id": workspace.other_team, "name": "ömer"}
    )
    assert elsewhere.status_code == 201  # another team's member may share a name
    period = {"kind": "sprint", "start_date": "2027-05-03", "end_date": "2027-05-14"}
    refused = client.post("/api/v1/periods", json=period | {"name": "SPRINT\u00a01"})
    assert refused.status_code == 409
    assert "“Sprint 1” already exists" in refused.json()["detail"]["message"]
