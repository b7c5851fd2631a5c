"""Initiative pages: the list per team and period, and adding, editing and deleting by form."""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass
from typing import Any

import pytest
from fastapi.testclient import TestClient
from sqlmodel import Session, select

from server.models import Initiative, Team
from server.schemas import EffortIn, InitiativeUpdate
from server.store.initiatives import InitiativeRecord, get_initiative, update_initiative
from server.store.teams import get_team
from tests.factories import make_initiative, make_period, make_team
from tests.pages.html_tree import parse_html
from tests.pages.parsed_page import Form, ids_are_unique_and_labels_point_at_fields, parse


@dataclass(frozen=True)
class Stored:
    team: int
    period: int
    quay: int  # "Quay wall": 3 days, value 10, in Sprint 1
    crane: int  # "Crane rail": 2 / 4 / 7 days, value 8, pinned, 80 % sure, needs Quay wall


@pytest.fixture
def stored(session: Session) -> Stored:
    harbour = make_team(session, "Harbour")
    make_team(session, "Lighthouse")
    sprint = make_period(session, "Sprint 1")
    quay = make_initiative(session, harbour, sprint, "Quay wall", effort=3, value=10)
    crane = make_initiative(session, harbour, sprint, "Crane rail", value=8, effort=4)
    update_initiative(
        session,
        initiative_id=crane.row.id or 0,
        initiative_in=InitiativeUpdate(
            version=1,
            effort=EffortIn(low=2, likely=4, high=7),
            state="pinned",
            confidence=0.8,
            either_or="Lifting",
            needs=[quay.row.id or 0],
        ),
    )
    return Stored(harbour.id or 0, sprint.id or 0, quay.row.id or 0, crane.row.id or 0)


ADD = {
    "title": "Fender replacement",
    "effort.likely": "5",
    "effort.low": "3",
    "effort.high": "9",
    "value": "40",
    "confidence": "75",
    "state": "candidate",
    "either_or": "",
    "notes": "Both berths.",
}


def _post(client: TestClient, url: str, data: dict[str, Any]) -> Any:
    token = client.csrf  # type: ignore[attr-defined]
    return client.post(url, data=data | {"csrf_token": token}, follow_redirects=False)


def _record(session: Session, initiative_id: int) -> InitiativeRecord:
    session.expire_all()
    return get_initiative(session, initiative_id=initiative_id)


def _titles(session: Session) -> list[str]:
    session.expire_all()
    return sorted(row.title for row in session.exec(select(Initiative)))


def test_list_shows_efforts_states_needs_and_sets(client: TestClient, stored: Stored) -> None:
    page = parse(client.get(f"/teams/{stored.team}/initiatives").text)  # first period by default
    rows = {
        row.find("th").text(): [cell.text() for cell in row.find_all("td")]
        for row in page.find("table", cls="initiatives").find_all("tr")[1:]
    }
    assert list(rows) == ["Quay wall", "Crane rail"]
    assert rows["Quay wall"][:2] == ["3", "10"]
    effort, value, confidence, state, either_or, needs = rows["Crane rail"][:6]
    assert (effort, value, confidence) == ("2 / 4 / 7", "8", "80 %")
    assert (state, either_or, needs) == ("pinned", "Lifting", "Quay wall")
    edit = page.find("a", href=f"/initiatives/{stored.crane}/edit")
    assert "Edit" in edit.text()
    ids_are_unique_and_labels_point_at_fields(page)


def test_backlog_list_is_separate(client: TestClient, session: Session, stored: Stored) -> None:
    team = make_team(session, "Tugs")
    make_initiative(session, team, None, "Someday dredging")
    page = parse(client.get(f"/teams/{team.id}/initiatives?period=backlog").text)
    assert [r.find("th").text() for r in page.find("table").find_all("tr")[1:]] == [
        "Someday dredging"
    ]
    in_sprint = client.get(f"/teams/{team.id}/initiatives?period={stored.period}").text
    assert "No initiatives here yet." in in_sprint


def test_adding_an_initiative_through_the_form(
    form_client: TestClient, session: Session, stored: Stored
) -> None:
    data = ADD | {
        "period_id": str(stored.period),
        "either_or": "Berths",
        "state": "pinned",
        "needs": [str(stored.quay), str(stored.crane)],
    }
    response = _post(form_client, f"/teams/{stored.team}/initiatives", data)
    assert response.status_code == 303
    row = session.exec(select(Initiative).where(Initiative.title == "Fender replacement")).one()
    location = response.headers["location"]
    assert location == (
        f"/teams/{stored.team}/initiatives?period={stored.period}&saved=added-{row.id}"
    )
    notice = parse(form_client.get(location).text).find("p", cls="notice")
    assert notice.text() == "Added “Fender replacement”."
    record = _record(session, row.id or 0)
    effort = record.own_effort
    assert (effort.low, effort.likely, effort.high) == (3, 5, 9)
    assert (row.value, row.confidence, row.state, row.either_or) == (40, 0.75, "pinned", "Berths")
    assert row.notes == "Both berths."
    assert sorted(record.needs) == sorted([stored.quay, stored.crane])
    assert "Fender replacement" in form_client.get(response.headers["location"]).text


def test_the_form_reads_a_decimal_comma_as_the_plan_page_does(
    form_client: TestClient, session: Session, stored: Stored
) -> None:
    data = ADD | {
        "period_id": str(stored.period),
        "effort.low": "2,5",
        "effort.likely": "4,5",
        "effort.high": "9",
        "value": "12,5",
    }
    response = _post(form_client, f"/teams/{stored.team}/initiatives", data)
    assert response.status_code == 303, response.text
    row = session.exec(select(Initiative).where(Initiative.title == "Fender replacement")).one()
    effort = _record(session, row.id or 0).own_effort
    assert (effort.low, effort.likely, effort.high, row.value) == (2.5, 4.5, 9, 12.5)


def test_adding_to_the_backlog_with_a_single_estimate(
    form_client: TestClient, session: Session, stored: Stored
) -> None:
    data = ADD | {"effort.low": "", "effort.high": "", "confidence": "", "period_id": "backlog"}
    response = _post(form_client, f"/teams/{stored.team}/initiatives", data)
    assert response.status_code == 303
    assert "?period=backlog&saved=added-" in response.headers["location"]
    row = session.exec(select(Initiative).where(Initiative.title == "Fender replacement")).one()
    effort = _record(session, row.id or 0).own_effort
    assert (effort.low, effort.likely, effort.high) == (None, 5, None)
    assert (row.period_id, row.confidence) == (None, None)


@pytest.mark.parametrize(
    ("change", "field", "message"),
    [
        ({"title": ""}, "title", "Enter some text"),
        ({"title": "i" * 201}, "title", "200 characters at most"),
        (
            {"effort.likely": "abc", "effort.low": "", "effort.high": ""},
            "effort.likely",
            "Enter a number",
        ),
        (
            {"effort.likely": "-3", "effort.low": "", "effort.high": ""},
            "effort.likely",
            "above 0",
        ),
        ({"effort.likely": "", "effort.low": "", "effort.high": ""}, "effort.likely", "number"),
        ({"effort.low": "6"}, "effort.low", "above the likely"),
        ({"effort.high": "4"}, "effort.high", "below the likely"),
        ({"effort.high": ""}, "effort.high", "low and high together"),
        ({"value": "abc"}, "value", "Enter a number"),
        ({"value": "0"}, "value", "above 0"),
        ({"confidence": "150"}, "confidence", "at most 100"),
        ({"confidence": "sure"}, "confidence", "percentage"),
        ({"either_or": "e" * 81}, "either_or", "80 characters at most"),
    ],
)
def test_a_bad_initiative_form_is_shown_again(
    form_client: TestClient,
    session: Session,
    stored: Stored,
    change: dict[str, str],
    field: str,
    message: str,
) -> None:
    typed = ADD | {"period_id": str(stored.period)} | change
    response = _post(form_client, f"/teams/{stored.team}/initiatives", typed)
    assert response.status_code == 422
    page = parse(response.text)
    form = Form(page, f"/teams/{stored.team}/initiatives")
    for name in ("title", "effort.likely", "effort.low", "effort.high", "value", "confidence"):
        assert form.value(name) == typed[name], name
    assert form.value("notes") == typed["notes"]
    assert form.value("period_id") == str(stored.period)
    assert message in form.error(field)
    assert _titles(session) == ["Crane rail", "Quay wall"]
    ids_are_unique_and_labels_point_at_fields(page)


def test_a_title_the_period_already_has_is_shown_again_beside_the_title(
    form_client: TestClient, session: Session, stored: Stored
) -> None:
    typed = ADD | {"title": "quay WALL ", "period_id": str(stored.period), "value": "41"}
    response = _post(form_client, f"/teams/{stored.team}/initiatives", typed)
    assert response.status_code == 422
    page = parse(response.text)
    form = Form(page, f"/teams/{stored.team}/initiatives")
    assert form.error("title") == (
        "“quay WALL” already exists in team Harbour for Sprint 1; choose another title."
    )
    for name in ("title", "effort.likely", "effort.low", "effort.high", "value", "confidence"):
        assert form.value(name) == typed[name], name
    assert form.value("notes") == typed["notes"]
    assert form.value("period_id") == str(stored.period)
    assert _titles(session) == ["Crane rail", "Quay wall"]
    ids_are_unique_and_labels_point_at_fields(page)


def test_adding_without_the_token_is_refused(
    form_client: TestClient, session: Session, stored: Stored
) -> None:
    url = f"/teams/{stored.team}/initiatives"
    response = form_client.post(url, data=ADD | {"period_id": str(stored.period)})
    assert response.status_code == 403
    assert _titles(session) == ["Crane rail", "Quay wall"]


def test_edit_page_shows_the_stored_values(client: TestClient, stored: Stored) -> None:
    page = parse(client.get(f"/initiatives/{stored.crane}/edit").text)
    form = Form(page, f"/initiatives/{stored.crane}")
    assert form.value("title") == "Crane rail"
    assert (form.value("effort.low"), form.value("effort.likely"), form.value("effort.high")) == (
        "2",
        "4",
        "7",
    )
    assert (form.value("value"), form.value("confidence"), form.value("state")) == (
        "8",
        "80",
        "pinned",
    )
    assert form.value("needs") == str(stored.quay)
    assert form.value("version") == "2"
    ids_are_unique_and_labels_point_at_fields(page)


def test_editing_through_the_form(
    form_client: TestClient, session: Session, stored: Stored
) -> None:
    data = ADD | {"title": "Quay wall, north", "version": "1", "period_id": "backlog"}
    response = _post(form_client, f"/initiatives/{stored.quay}", data)
    assert response.status_code == 303
    record = _record(session, stored.quay)
    assert record.row.title == "Quay wall, north"
    assert (record.own_effort.low, record.own_effort.likely, record.own_effort.high) == (3, 5, 9)
    assert (record.row.version, record.row.period_id) == (2, None)


def test_another_teams_effort_is_added_and_changed_on_the_edit_page(
    form_client: TestClient, session: Session, stored: Stored
) -> None:
    """Found in use: the edit page could only remove another team's effort; adding one
    needed the JSON API."""
    dock = make_team(session, "Dock crew")
    page = parse(form_client.get(f"/initiatives/{stored.quay}/edit").text)
    options = page.find("select", id="f-add_effort_team").find_all("option")
    assert [o.text() for o in options] == ["(none)", "Dock crew", "Lighthouse"]  # not the owner
    ids_are_unique_and_labels_point_at_fields(page)
    base = ADD | {"title": "Quay wall", "period_id": str(stored.period)}
    added = _post(
        form_client,
        f"/initiatives/{stored.quay}",
        base | {"version": "1", "add_effort_team": str(dock.id), "add_effort": "1,5/2/4"},
    )
    assert added.status_code == 303, added.text
    session.expire_all()
    line = _record(session, stored.quay).efforts[dock.id or 0]
    assert (line.low, line.likely, line.high) == (1.5, 2, 4)
    # The same team again: its share is replaced, not doubled.
    again = _post(
        form_client,
        f"/initiatives/{stored.quay}",
        base | {"version": "2", "add_effort_team": str(dock.id), "add_effort": "3"},
    )
    assert again.status_code == 303, again.text
    session.expire_all()
    record = _record(session, stored.quay)
    assert (record.efforts[dock.id or 0].likely, len(record.efforts)) == (3, 2)


def test_an_effort_typed_without_its_team_is_refused_not_dropped(
    form_client: TestClient, session: Session, stored: Stored
) -> None:
    """Found in use: "Its effort" with Team left on "(none)" saved, and the 4 was lost."""
    data = ADD | {"title": "Quay wall", "period_id": str(stored.period), "version": "1"}
    response = _post(form_client, f"/initiatives/{stored.quay}", data | {"add_effort": "4"})
    assert response.status_code == 422, response.text
    error = parse(response.text).find("p", id="add_effort-error")
    assert "Choose the team this effort is for" in error.text()
    session.expire_all()
    assert _record(session, stored.quay).row.version == 1


@pytest.mark.parametrize(
    ("effort", "says"),
    [("", "Enter the team's effort in days"), ("lots", "Enter a number of days"), ("-2", "0")],
)
def test_a_bad_effort_for_another_team_is_refused_beside_its_field(
    form_client: TestClient, session: Session, stored: Stored, effort: str, says: str
) -> None:
    dock = make_team(session, "Dock crew")
    data = ADD | {
        "title": "Quay wall",
        "period_id": str(stored.period),
        "version": "1",
        "add_effort_team": str(dock.id),
        "add_effort": effort,
    }
    response = _post(form_client, f"/initiatives/{stored.quay}", data)
    assert response.status_code == 422, response.text
    page = parse(response.text)
    error = page.find("p", id="add_effort-error")
    assert error is not None
    assert says in error.text()
    form = Form(page, f"/initiatives/{stored.quay}")
    assert form.value("add_effort") == effort
    assert form.value("add_effort_team") == str(dock.id)
    session.expire_all()
    record = _record(session, stored.quay)
    assert (record.row.version, list(record.efforts)) == (1, [stored.team])


def test_a_stale_edit_shows_both_versions(
    form_client: TestClient, session: Session, stored: Stored
) -> None:
    # Someone else saves version 2 after this person opened the form at version 1.
    form_client.patch(
        f"/api/v1/initiatives/{stored.quay}",
        json={
            "version": 1,
            "title": "Quay wall (theirs)",
            "notes": "Wait for the tide tables",
            "either_or": "Quay works",
            "confidence": 0.6,
        },
    )
    mine = ADD | {"title": "Quay wall (mine)", "version": "1", "period_id": str(stored.period)}
    response = _post(form_client, f"/initiatives/{stored.quay}", mine)
    assert response.status_code == 409
    page = parse(response.text)
    form = Form(page, f"/initiatives/{stored.quay}")
    assert form.value("title") == "Quay wall (mine)"  # the person's values are kept
    assert form.value("effort.likely") == "5"
    assert form.value("version") == "2"  # saving again applies on top of the current version
    conflict = page.find("section", cls="conflict").text()
    assert "Quay wall (theirs)" in conflict
    assert "Someone else changed this initiative" in conflict
    # Every field the form saves is shown, or saving again would overwrite it unseen.
    for theirs in ("Wait for the tide tables", "Quay works", "60 %"):
        assert theirs in conflict
    assert "version:" not in page.text()
    assert _record(session, stored.quay).row.title == "Quay wall (theirs)"

    again = _post(form_client, f"/initiatives/{stored.quay}", mine | {"version": "2"})
    assert again.status_code == 303
    assert _record(session, stored.quay).row.title == "Quay wall (mine)"


@pytest.mark.parametrize(
    ("change", "field", "message"),
    [
        ({"effort.likely": "-3", "effort.low": "", "effort.high": ""}, "effort.likely", "above"),
        ({"effort.low": "6"}, "effort.low", "above the likely"),
        ({"title": " "}, "title", "Enter some text"),
    ],
)
def test_a_bad_edit_is_shown_again_and_changes_nothing(
    form_client: TestClient,
    session: Session,
    stored: Stored,
    change: dict[str, str],
    field: str,
    message: str,
) -> None:
    typed = ADD | {"version": "1", "period_id": str(stored.period)} | change
    response = _post(form_client, f"/initiatives/{stored.quay}", typed)
    assert response.status_code == 422
    form = Form(parse(response.text), f"/initiatives/{stored.quay}")
    assert form.value("effort.likely") == typed["effort.likely"]
    assert form.value("title") == typed["title"]
    assert message in form.error(field)
    record = _record(session, stored.quay)
    assert (record.row.title, record.row.version, record.own_effort.likely) == ("Quay wall", 1, 3)


def test_an_edit_onto_a_taken_title_or_period_is_shown_again(
    form_client: TestClient, session: Session, stored: Stored
) -> None:
    make_initiative(session, get_team(session, team_id=stored.team), None, "Quay wall")
    cases = [
        ({"title": "Crane Rail", "period_id": str(stored.period)}, "in team Harbour for Sprint 1"),
        ({"title": "Quay wall", "period_id": "backlog"}, "in the backlog of team Harbour"),
    ]
    for change, where in cases:
        typed = ADD | {"version": "1"} | change
        response = _post(form_client, f"/initiatives/{stored.quay}", typed)
        assert response.status_code == 422
        form = Form(parse(response.text), f"/initiatives/{stored.quay}")
        title = change["title"]
        assert form.error("title") == f"“{title}” already exists {where}; choose another title."
        assert form.value("title") == title
        assert form.value("period_id") == change["period_id"]
        assert form.value("effort.likely") == typed["effort.likely"]
        assert form.value("notes") == typed["notes"]
        record = _record(session, stored.quay)
        assert (record.row.title, record.row.period_id, record.row.version) == (
            "Quay wall",
            stored.period,
            1,
        )


def test_a_needs_cycle_in_the_edit_form_is_refused(
    form_client: TestClient, session: Session, stored: Stored
) -> None:
    # Crane rail needs Quay wall; making Quay wall need Crane rail would loop.
    typed = ADD | {"version": "1", "period_id": str(stored.period), "needs": [str(stored.crane)]}
    response = _post(form_client, f"/initiatives/{stored.quay}", typed)
    assert response.status_code == 422
    form = Form(parse(response.text), f"/initiatives/{stored.quay}")
    assert "needs cycle" in form.error("needs")
    assert form.value("needs") == str(stored.crane)
    assert _record(session, stored.quay).needs == []


YES = {"confirm": "yes"}


def test_deleting_through_the_form(
    form_client: TestClient, session: Session, stored: Stored
) -> None:
    without_token = form_client.post(f"/initiatives/{stored.quay}/delete")
    assert without_token.status_code == 403
    assert _titles(session) == ["Crane rail", "Quay wall"]

    # One press is not enough: the tick the browser requires, when it was not sent.
    unticked = _post(form_client, f"/initiatives/{stored.crane}/delete", {})
    assert unticked.status_code == 422
    assert Form(parse(unticked.text), f"/initiatives/{stored.crane}/delete").errors() == [
        "Tick “Yes, delete Crane rail” to delete it: it leaves every plan."
    ]
    # Without scripts the page opens on the box to tick, which the message describes.
    box = parse(unticked.text).find("input", name="confirm")
    assert "autofocus" in box.attrs
    assert box.attrs.get("aria-describedby") == "delete-error"
    assert _titles(session) == ["Crane rail", "Quay wall"]

    response = _post(form_client, f"/initiatives/{stored.crane}/delete", YES)
    assert response.status_code == 303
    location = response.headers["location"]
    assert location == (
        f"/teams/{stored.team}/initiatives?period={stored.period}&saved=deleted-{stored.crane}"
    )
    notice = parse(form_client.get(location).text).find("p", cls="notice")
    assert notice.text() == "Deleted “Crane rail”."
    assert _titles(session) == ["Quay wall"]
    # Nothing needs Quay wall any more, so it can go too.
    assert _post(form_client, f"/initiatives/{stored.quay}/delete", YES).status_code == 303
    assert _titles(session) == []


def test_deleting_a_needed_initiative_through_the_form_shows_why_not(
    form_client: TestClient, session: Session, stored: Stored
) -> None:
    response = _post(form_client, f"/initiatives/{stored.quay}/delete", YES)
    assert response.status_code == 409
    page = parse(response.text)
    ids_are_unique_and_labels_point_at_fields(page)
    refusal = Form(page, f"/initiatives/{stored.quay}/delete").errors()
    assert refusal == ["“Quay wall” is needed by “Crane rail”; remove it from their needs first."]
    # The edit form is shown again with the stored values; nothing was changed.
    edit = Form(page, f"/initiatives/{stored.quay}")
    assert (edit.value("title"), edit.value("version")) == ("Quay wall", "1")
    assert edit.errors() == []
    assert _titles(session) == ["Crane rail", "Quay wall"]
    crane = _record(session, stored.crane)
    assert (crane.needs, crane.row.version) == ([stored.quay], 2)


def test_unknown_initiative_pages_are_404(form_client: TestClient) -> None:
    assert form_client.get("/initiatives/4711/edit").status_code == 404
    assert _post(form_client, "/initiatives/4711", ADD | {"version": "1"}).status_code == 404
    assert _post(form_client, "/initiatives/4711/delete", YES).status_code == 404


def test_editing_keeps_cross_team_needs_and_effort_lines(
    form_client: TestClient, session: Session, stored: Stored
) -> None:
    # A Lighthouse initiative that needs Harbour's "Quay wall" and carries Harbour effort.
    lighthouse = make_team(session, "Beacons")
    beacon = make_initiative(
        session,
        lighthouse,
        None,
        "Beacon on the quay",
        effort=4,
        needs=[stored.quay],
        other_efforts=[{"team_id": stored.team, "likely": 1.5}],
    )
    page = parse(form_client.get(f"/initiatives/{beacon.row.id}/edit").text)
    form = Form(page, f"/initiatives/{beacon.row.id}")
    assert form.value("needs") == str(stored.quay)  # offered, and selected
    # The browser sends back what the form shows, with a new title.
    data = {
        name: form.value(name)
        for name in ("title", "effort.likely", "effort.low", "effort.high", "value")
    }
    data |= {
        "title": "Beacon on the north quay",
        "state": "candidate",
        "period_id": "backlog",
        "version": "1",
        "needs": [str(stored.quay)],
    }
    assert _post(form_client, f"/initiatives/{beacon.row.id}", data).status_code == 303
    record = _record(session, beacon.row.id or 0)
    assert record.row.title == "Beacon on the north quay"
    assert record.needs == [stored.quay]
    assert record.efforts[stored.team].likely == 1.5


def test_list_names_needs_in_other_periods(
    client: TestClient, session: Session, stored: Stored
) -> None:
    harbour = session.get(Team, stored.team)
    assert harbour is not None
    later = make_initiative(session, harbour, None, "Crane cab", needs=[stored.crane])
    page = parse(client.get(f"/teams/{stored.team}/initiatives?period=backlog").text)
    row = page.find("table", cls="initiatives").find_all("tr")[1]
    assert row.find("th").text() == later.row.title
    assert row.find_all("td")[5].text() == "Crane rail"  # by title, not by number


def test_the_edit_form_shows_stored_numbers_with_every_digit(
    form_client: TestClient, session: Session, stored: Stored
) -> None:
    """Six significant digits showed a value score of 123456.75 as 123457, which a save of
    the form would then have stored."""
    current = _record(session, stored.quay)
    form_client.patch(
        f"/api/v1/initiatives/{stored.quay}",
        json={"version": current.row.version, "value": 123456.75},
    )
    url = f"/initiatives/{stored.quay}"
    assert Form(parse(form_client.get(url + "/edit").text), url).value("value") == "123456.75"


def _summary_links(html: str) -> dict[str, str]:
    root = parse_html(html)
    summary = root.by_id("error-summary")
    assert "autofocus" in summary.attrs
    assert summary.get("tabindex") == "-1"
    assert summary.get("role") == "alert"
    return {(a.get("href") or ""): " ".join(a.text().split()) for a in summary.find_all("a")}


def test_a_refused_initiative_edit_opens_on_an_error_summary(
    form_client: TestClient, stored: Stored
) -> None:
    typed = ADD | {
        "version": "1",
        "period_id": str(stored.period),
        "needs": [str(stored.crane)],
        "notes": "x" * 4001,
    }
    response = _post(form_client, f"/initiatives/{stored.quay}", typed)
    assert response.status_code == 422
    links = _summary_links(response.text)
    assert links["#f-notes"].startswith("Notes: Keep it to 4000 characters")
    root = parse_html(response.text)
    assert root.by_id("f-notes") is not None
    # The needs cycle is checked once the values are valid: the notes are cut to size.
    typed["notes"] = "Both berths."
    response = _post(form_client, f"/initiatives/{stored.quay}", typed)
    assert response.status_code == 422
    links = _summary_links(response.text)
    assert "needs cycle" in links["#f-needs"]
    assert links["#f-needs"].startswith("Needs: ")
    assert parse_html(response.text).by_id("f-needs") is not None


def test_a_refused_add_opens_on_the_summary_and_a_good_page_has_none(
    form_client: TestClient, stored: Stored
) -> None:
    page = form_client.get(f"/initiatives/{stored.quay}")
    assert "error-summary" not in page.text
    response = _post(
        form_client,
        f"/teams/{stored.team}/initiatives",
        ADD | {"period_id": str(stored.period), "value": "lots"},
    )
    assert response.status_code == 422
    links = _summary_links(response.text)
    assert links["#f-value"] == "Value score: Enter a number."


def _needs_choices(html: str) -> dict[str, tuple[str, bool]]:
    """The Needs tick boxes: value -> (label text, ticked)."""
    group = parse_html(html).by_id("f-needs")
    assert group.tag == "fieldset"
    return {
        box.get("value") or "": (" ".join(label.text().split()), "checked" in box.attrs)
        for label in group.find_all("label")
        for box in label.find_all("input")
    }


def test_needs_are_tick_boxes_that_tell_one_title_apart_by_period_and_team(
    form_client: TestClient, session: Session, stored: Stored
) -> None:
    # One plain click on a multiple select drops every other choice; tick boxes keep them.
    harbour = session.get(Team, stored.team)
    assert harbour is not None
    sprint_2 = make_period(session, "Sprint 2", dt.date(2027, 3, 15), dt.date(2027, 3, 26))
    again = make_initiative(session, harbour, sprint_2, "Quay wall", effort=2)
    beacons = make_team(session, "Beacons")
    beacon = make_initiative(session, beacons, None, "Beacon", effort=1, needs=[stored.quay])
    choices = _needs_choices(form_client.get(f"/initiatives/{beacon.row.id}/edit").text)
    assert choices[str(stored.quay)] == ("Quay wall · Sprint 1 · Harbour", True)
    assert str(again.row.id) not in choices  # another team's work is offered only when needed
    own = _needs_choices(form_client.get(f"/initiatives/{stored.crane}/edit").text)
    assert own[str(stored.quay)] == ("Quay wall · Sprint 1", True)
    assert own[str(again.row.id)] == ("Quay wall · Sprint 2", False)
    # Two ticked boxes arrive as two values, and both are stored.
    url = f"/initiatives/{stored.crane}"
    form = Form(parse(form_client.get(f"{url}/edit").text), url)
    data = {
        name: form.value(name)
        for name in ("title", "effort.likely", "effort.low", "effort.high", "value", "state")
    }
    data |= {
        "period_id": str(stored.period),
        "version": "2",
        "confidence": "80",
        "either_or": "Lifting",
        "needs": [str(stored.quay), str(again.row.id)],
    }
    assert _post(form_client, url, data).status_code == 303
    assert sorted(_record(session, stored.crane).needs) == sorted([stored.quay, again.row.id])
