"""A rendered plan leaves nothing for the garbage collector: counted objects, not timings.

A macro defined inside a template, or a macro module imported "with context", closes over the
render context; that closure is a reference cycle, and the context holds the whole plan view
(rows, records, ORM rows, curve). Every render of the plan then waits for a collection to be
freed, and those collections are most of the slow edits (docs/benchmarks.md, "Live edit").
"""

from __future__ import annotations

from collections.abc import Iterator

import pytest
from fastapi import FastAPI
from fastapi.testclient import TestClient
from sqlmodel import Session

from tests.conftest import bearer
from tests.factories import make_initiative, make_member, make_period, make_team
from tests.pages.html_tree import parse_html
from tests.served import as_served, unreachable_after


@pytest.fixture
def served_client(app: FastAPI) -> Iterator[TestClient]:
    with TestClient(as_served(app), headers=bearer("admin")) as client:
        yield client


def test_plan_fragment_render_leaves_no_cycles(served_client: TestClient, session: Session) -> None:
    team = make_team(session)
    for k in range(4):
        make_member(session, team, name=f"Member {k}")
    period = make_period(session)
    for k in range(120):
        make_initiative(session, team, period, title=f"Row {k}", effort=1 + k % 7, value=3 + k % 11)
    url = f"/teams/{team.id}/plan?period_id={period.id}"
    headers = {"HX-Request": "true"}
    first = served_client.get(url, headers=headers)
    assert first.status_code == 200
    assert 'id="curve-h"' in first.text  # the curve and its readouts are part of the fragment
    freed = unreachable_after(lambda: served_client.get(url, headers=headers))
    # A plan view of 120 rows is several thousand objects; a few hundred are the framework's
    # own per-request cycles (SQL statement caches, the middleware's send wrappers).
    assert freed < 1_000, f"{freed} objects were left in reference cycles by one render"


def test_bad_addresses_of_pages_get_pages_not_json(
    form_client: TestClient, session: Session
) -> None:
    """A hand-edited link: a page saying what is wrong (it was JSON, or a 200 for a period
    that does not exist, or "No period with id 0")."""
    team = make_team(session)
    make_period(session)
    bad_number = form_client.get("/plans?team_id=abc")
    assert bad_number.status_code == 422
    assert bad_number.headers["content-type"].startswith("text/html")
    said = parse_html(bad_number.text).text()
    assert "team id: Enter a number." in said
    assert "team_id" not in said
    unknown = form_client.get(f"/teams/{team.id}?period_id=999")
    assert unknown.status_code == 404
    assert "No period with id 999" in unknown.text
    letters = form_client.get(f"/teams/{team.id}/initiatives?period=abc")
    assert letters.status_code == 404
    assert "No period “abc”" in parse_html(letters.text).text()
    # The JSON API keeps its JSON errors.
    api = form_client.get("/api/v1/plans?team_id=abc")
    assert api.status_code == 422
    assert api.json()["detail"][0]["field"] == "team_id"
