"""The Changes page (/audit): pages by entry id, filters, values in the pages' words."""

from __future__ import annotations

import datetime as dt
import re
from collections.abc import Iterator
from contextlib import contextmanager
from typing import Any

import pytest
from fastapi import FastAPI
from fastapi.testclient import TestClient
from sqlalchemy import event, update
from sqlmodel import Session, col, select

from server.models import AuditEntry
from server.planning.scenarios import ScenarioChanges
from server.schemas import (
    CapacitySettingsIn,
    EffortIn,
    InitiativeUpdate,
    PeriodUpdate,
    TeamEffortIn,
)
from server.store import audit
from server.store.initiatives import delete_initiative, get_initiative, update_initiative
from server.store.periods import set_capacity_settings, update_period
from server.store.plans import create_scenario, update_scenario
from server.store.teams import delete_team
from tests.factories import make_initiative, make_member, make_period, make_team
from tests.pages.html_tree import parse_html

_ENTRY_ROW = re.compile(r'<tr id="entry-(\d+)"')
_LINK = re.compile(r'<a href="([^"]+)" rel="(next|prev)">')


def _add_entries(session: Session, count: int, team_id: int | None = None) -> list[int]:
    """Entries made in one batch, as a bulk change writes them; their ids, oldest first."""
    audit.record_many(
        session,
        [
            audit.entry(
                actor="test",
                action="team.note",
                entity="team",
                entity_id=team_id,
                team_id=team_id,
                summary=f"Entry number {k}",
            )
            for k in range(count)
        ],
    )
    session.commit()
    return list(session.exec(select(AuditEntry.id).order_by(col(AuditEntry.id))))  # type: ignore[arg-type]


def _page(client: TestClient, url: str) -> tuple[list[int], dict[str, str], str]:
    response = client.get(url)
    assert response.status_code == 200, response.text
    ids = [int(found) for found in _ENTRY_ROW.findall(response.text)]
    links = {rel: href.replace("&amp;", "&") for href, rel in _LINK.findall(response.text)}
    shown = parse_html(response.text).find("p", cls="audit-shown").text()
    return ids, links, shown


def test_paging_reaches_every_entry_once_in_both_directions(
    client: TestClient, session: Session
) -> None:
    every = _add_entries(session, 320)
    assert len(every) == 320
    pages: list[list[int]] = []
    headings: list[str] = []
    url: str | None = "/audit"
    while url is not None:
        ids, links, shown = _page(client, url)
        pages.append(ids)
        headings.append(shown)
        url = links.get("next")
        assert len(pages) <= 4, "the older links go round in a circle"
    assert [len(ids) for ids in pages] == [100, 100, 100, 20]
    older_walk = [entry_id for ids in pages for entry_id in ids]
    assert older_walk == sorted(every, reverse=True)  # each once, newest first
    assert headings == [
        "Changes 1–100 of 320, newest first.",
        "Changes 101–200 of 320, newest first.",
        "Changes 201–300 of 320, newest first.",
        "Changes 301–320 of 320, newest first.",
    ]
    # Back from the oldest page by the newer links: the same pages, in reverse.
    _, links, _ = _page(client, "/audit?before=" + str(pages[2][-1]))
    assert "next" not in links
    newer_walk = [pages[3]]
    url = links.get("prev")
    while url is not None:
        ids, links, _ = _page(client, url)
        newer_walk.append(ids)
        url = links.get("prev")
        assert len(newer_walk) <= 4
    assert newer_walk == pages[::-1]


def test_an_entry_added_between_page_loads_does_not_shift_the_older_page(
    client: TestClient, session: Session
) -> None:
    every = _add_entries(session, 320)
    first, links, _ = _page(client, "/audit")
    _add_entries(session, 1)
    second, _, shown = _page(client, links["next"])
    assert second == sorted(every, reverse=True)[100:200]
    assert not set(first) & set(second)
    assert shown == "Changes 102–201 of 321, newest first."
    newest, _, shown = _page(client, "/audit")
    assert newest[1:] == first[:99]
    assert shown == "Changes 1–100 of 321, newest first."


def test_the_api_pages_by_before_id(client: TestClient, session: Session) -> None:
    every = _add_entries(session, 320)
    seen: list[int] = []
    params: dict[str, Any] = {"limit": 100}
    while True:
        response = client.get("/api/v1/audit", params=params)
        assert response.status_code == 200
        ids = [item["id"] for item in response.json()]
        seen.extend(ids)
        if len(ids) < 100:
            break
        params["before"] = ids[-1]
        assert len(seen) <= 400, "before was not applied"
    assert seen == sorted(every, reverse=True)
    described = client.get("/openapi.json").json()["paths"]["/api/v1/audit"]["get"]
    assert "before" in {parameter["name"] for parameter in described["parameters"]}
    assert "`before`" in described["description"]
    too_large = client.get("/api/v1/audit", params={"before": 2**63})
    assert too_large.status_code == 422


def _rows(client: TestClient, url: str = "/audit") -> list[str]:
    response = client.get(url)
    assert response.status_code == 200, response.text
    return [row.text() for row in parse_html(response.text).find_all("tr")[1:]]


def _row(rows: list[str], summary: str) -> str:
    found_rows = [row for row in rows if summary in row]
    assert len(found_rows) == 1, "\n".join(rows)
    (found,) = found_rows
    return found


def test_values_read_with_names_and_the_pages_words(client: TestClient, session: Session) -> None:
    harbour, quay = make_team(session, "Harbour"), make_team(session, "Quay")
    period = make_period(session, "Sprint 1")
    ola = make_member(session, harbour, "Ola")
    bridge = make_initiative(session, harbour, period, "Bridge", effort=24.0)
    gone = make_initiative(session, harbour, period, "Old pier")
    gone_id = gone.row.id or 0
    ids = {"bridge": bridge.row.id or 0, "ola": ola.id or 0}

    three_point = EffortIn(likely=24, low=16, high=40)
    update_initiative(
        session,
        initiative_id=ids["bridge"],
        initiative_in=InitiativeUpdate(version=1, effort=three_point, state="ruled_out"),
    )
    quay_effort = TeamEffortIn(team_id=quay.id or 0, likely=24, low=16, high=40)
    update_initiative(
        session,
        initiative_id=ids["bridge"],
        initiative_in=InitiativeUpdate(version=2, other_efforts=[quay_effort], needs=[gone_id]),
    )
    version = get_initiative(session, initiative_id=ids["bridge"]).row.version
    update_initiative(
        session,
        initiative_id=ids["bridge"],
        initiative_in=InitiativeUpdate(version=version, needs=[]),
    )
    scenario = create_scenario(
        session, team_id=harbour.id or 0, period_id=period.id or 0, name="Lean", changes={}
    )
    changes = ScenarioChanges(confidence=0.8, days_off={ids["ola"]: 4}, forced_in=[gone_id])
    update_scenario(session, scenario_id=scenario.id or 0, changes=changes.to_json())
    delete_initiative(session, initiative_id=gone_id)
    set_capacity_settings(
        session,
        team_id=harbour.id or 0,
        period_id=period.id or 0,
        settings_in=CapacitySettingsIn(focus_factor=0.7, reserve_pct=20),
    )
    update_period(
        session,
        period_id=period.id or 0,
        period_in=PeriodUpdate(non_working_dates=[dt.date(2027, 3, 3)]),
    )

    rows = _rows(client)
    text = " ".join(rows)
    effort = _row(rows, "Changed effort and state of “Bridge”")
    assert "effort: 24 days" in effort
    assert "effort: 16 / 24 / 40 days" in effort
    assert "state: candidate" in effort
    assert "state: ruled out" in effort
    assert "Quay: 16 / 24 / 40 days" in _row(rows, "Changed needs and other teams' effort")
    # The initiative needed is named by title while it lasts, and by id once deleted.
    assert f"needs: a deleted initiative (id {gone_id})" in text
    scenario_row = _row(rows, "Changed scenario “Lean”")
    assert "changes: none (the live plan)" in scenario_row
    assert "name: Lean" not in scenario_row  # unchanged on both sides
    assert (
        f"confidence level P80; Ola: 4 days off; a deleted initiative (id {gone_id}) forced in"
        in scenario_row
    )
    capacity = _row(rows, "Changed capacity settings")
    assert "reserve: 15 %" in capacity
    assert "reserve: 20 %" in capacity
    period_row = _row(rows, "Changed non-working dates of period “Sprint 1”")
    assert "non-working dates: none" in period_row
    assert "non-working dates: 2027-03-03" in period_row
    for internal in (
        "team id",
        "reserve pct",
        "ruled_out",
        "likely 24",
        "non working",
        "days off 4",
    ):
        assert internal not in text


def test_old_period_summaries_are_shown_in_the_pages_words(
    client: TestClient, session: Session
) -> None:
    period = make_period(session, "Weekmask sprint")
    audit.record(
        session,
        action="period.update",
        entity="period",
        entity_id=period.id,
        summary="Changed non working dates, weekmask of period “Weekmask sprint”",
        before={"weekmask": "1111100"},
        after={"weekmask": "1111000"},
    )
    session.commit()
    row = _row(_rows(client), "of period")
    assert "Changed non-working dates, working weekdays of period “Weekmask sprint”" in row
    assert "working weekdays: 1111100" in row


def test_removed_members_and_deleted_periods_are_named_by_id(
    client: TestClient, session: Session
) -> None:
    audit.record(
        session,
        action="scenario.update",
        entity="scenario",
        entity_id=1,
        summary="Changed scenario “Gone”",
        before={"changes": {}},
        after={"changes": {"days_off": {"77": 2}, "reserve_pct": 15}},
    )
    audit.record(
        session,
        action="member.delete",
        entity="member",
        entity_id=5,
        summary="Removed member “Kai” from team “Quay”",
        before={
            "name": "Kai",
            "allocation": 0.5,
            "availability": [{"period_id": 88, "days_off": 1, "allocation": None}],
        },
    )
    session.commit()
    rows = _rows(client)
    assert "changes: reserve 15 %; a removed member (id 77): 2 days off" in _row(rows, "“Gone”")
    removed = _row(rows, "Removed member “Kai”")
    assert "share: 50 %" in removed
    assert "days off: a deleted period (id 88): 1 day off, the member's usual share" in removed


def test_an_unknown_team_is_named_as_such(client: TestClient) -> None:
    response = client.get("/audit", params={"team_id": 999})
    assert response.status_code == 404
    text = parse_html(response.text).text()
    assert "There is no team with id 999" in text
    assert "No changes recorded yet" not in text


def test_a_team_without_changes_says_so(client: TestClient, session: Session) -> None:
    team = make_team(session, "Quay")
    session.exec(update(AuditEntry).values(team_id=None))  # type: ignore[call-overload]
    session.commit()
    response = client.get("/audit", params={"team_id": team.id})
    assert response.status_code == 200
    assert "No changes recorded for team “Quay”." in parse_html(response.text).text()


def test_a_deleted_teams_changes_are_still_shown(client: TestClient, session: Session) -> None:
    team = make_team(session, "Quay")
    team_id = team.id or 0
    delete_team(session, team_id=team_id)
    response = client.get("/audit", params={"team_id": team_id})
    assert response.status_code == 200
    text = parse_html(response.text).text()
    assert "Deleted team “Quay”" in text
    assert "Added team “Quay”" in text
    assert f"All 2 changes of a deleted team (id {team_id}), newest first." in text
    kept = parse_html(response.text).by_id("audit-team").find_all("option")
    assert [o.text() for o in kept if "selected" in o.attrs] == [f"a deleted team (id {team_id})"]


@pytest.mark.parametrize(
    ("params", "message"),
    [
        ({"team_id": "abc"}, "“abc” is not a team's number. Choose a team from the list."),
        ({"team_id": "-3"}, "“-3” is not a team's number."),
        ({"team_id": "99999999999999999999"}, "is not a team's number."),
        ({"from": "2026-13-01"}, "From: enter a date such as 2026-12-02."),
        ({"from": "2026-12-02", "to": "2026-12-01"}, "To: the end date is before the start date."),
        ({"before": "abc"}, "This page address does not name a page of changes."),
        ({"before": "3", "after": "1"}, "either older or newer than another, not both"),
    ],
)
def test_bad_parameters_get_one_plain_sentence(
    client: TestClient, params: dict[str, str], message: str
) -> None:
    response = client.get("/audit", params=params)
    assert response.status_code == 422
    root = parse_html(response.text)
    errors = [p.text() for p in root.find_all("p", cls="field-error")]
    assert len(errors) == 1
    assert message in errors[0]
    assert "team_id:" not in response.text
    assert root.find_all(
        "a", where=lambda node: node.attrs.get("href") == "/audit"
    )  # a way back to every change


def test_the_date_range_includes_both_days(client: TestClient, session: Session) -> None:
    ids = _add_entries(session, 3)
    days = [dt.datetime(2026, 11, day, 23, 30, tzinfo=dt.UTC) for day in (1, 2, 3)]
    for entry_id, at in zip(ids, days, strict=True):
        session.exec(update(AuditEntry).where(col(AuditEntry.id) == entry_id).values(at=at))  # type: ignore[call-overload]
    session.commit()
    shown, _, heading = _page(client, "/audit?from=2026-11-02&to=2026-11-03")
    assert shown == ids[:0:-1]
    assert heading == "All 2 changes, newest first."
    shown, _, _ = _page(client, "/audit?to=2026-11-01")
    assert shown == ids[:1]
    shown, _, _ = _page(client, "/audit?from=2026-11-03&to=9999-12-31")
    assert shown == ids[2:]
    empty = client.get("/audit", params={"from": "2026-11-04"})
    assert "No changes since 4 November 2026." in parse_html(empty.text).text()
    form = parse_html(client.get("/audit?from=2026-11-02").text)
    assert form.by_id("audit-from").attrs["value"] == "2026-11-02"


@contextmanager
def _statements(app: FastAPI) -> Iterator[list[str]]:
    seen: list[str] = []

    def note(_conn: Any, _cursor: Any, statement: str, *_rest: Any) -> None:
        seen.append(statement)

    event.listen(app.state.engine, "before_cursor_execute", note)
    try:
        yield seen
    finally:
        event.remove(app.state.engine, "before_cursor_execute", note)


def _scenario_edits(session: Session, team_name: str, count: int) -> None:
    team = make_team(session, team_name)
    period = make_period(session, f"{team_name} sprint")
    members = [make_member(session, team, f"Member {k}") for k in range(count)]
    work = [make_initiative(session, team, period, f"Work {k}") for k in range(count)]
    scenario = create_scenario(
        session, team_id=team.id or 0, period_id=period.id or 0, name="What if", changes={}
    )
    for k in range(count):
        changes = ScenarioChanges(days_off={members[k].id or 0: 1}, forced_in=[work[k].row.id or 0])
        update_scenario(session, scenario_id=scenario.id or 0, changes=changes.to_json())
        update_initiative(
            session,
            initiative_id=work[k].row.id or 0,
            initiative_in=InitiativeUpdate(version=1, needs=[work[k - 1].row.id or 0] if k else []),
        )


def test_names_are_read_in_a_fixed_number_of_statements(
    app: FastAPI, client: TestClient, session: Session
) -> None:
    _scenario_edits(session, "Small", 2)
    client.get("/audit")  # the first request signs in and warms caches
    with _statements(app) as few:
        assert "Member 1" in client.get("/audit").text
    _scenario_edits(session, "Large", 30)
    with _statements(app) as many:
        page = parse_html(client.get("/audit").text).text()
    assert "Member 29: 1 day off" in page
    assert "needs: “Work 28”" in page
    assert len(many) == len(few)
    # Sign-in (2), teams, the entries, their count, member names, initiative titles.
    assert len(many) <= 7


def test_a_deleted_initiative_is_listed_with_what_it_was(
    client: TestClient, session: Session
) -> None:
    """Its Before column was empty: all that is left to make it again by hand is the entry."""
    harbour, period = make_team(session, "Harbour"), make_period(session, "Sprint 1")
    pier = make_initiative(session, harbour, period, "Old pier", effort=8.0, value=15.0)
    update_initiative(
        session,
        initiative_id=pier.row.id or 0,
        initiative_in=InitiativeUpdate(version=1, state="pinned", notes="Keep the bollards"),
    )
    delete_initiative(session, initiative_id=pier.row.id or 0)
    deleted = _row(_rows(client), "Deleted “Old pier”")
    for said in ("title: Old pier", "effort: 8 days", "value score: 15", "state: pinned"):
        assert said in deleted, (said, deleted)
    assert "Keep the bollards" in deleted
    for internal in ("version", "position", "team id", "created"):
        assert internal not in deleted, (internal, deleted)
