"""The home page: teams and periods, and the forms that add them."""

from __future__ import annotations

import datetime as dt

import pytest
from fastapi import FastAPI
from fastapi.testclient import TestClient
from sqlmodel import Session, select

from server import demo
from server.models import Period, Team
from tests.factories import make_initiative, make_period, make_team
from tests.pages.parsed_page import Form, ids_are_unique_and_labels_point_at_fields, parse

PERIOD_FORM = {
    "name": "Sprint 2",
    "kind": "sprint",
    "start_date": "2027-03-15",
    "end_date": "2027-03-26",
    "non_working_dates": "2027-03-19",
    "weekmask": "1111100",
}


def _teams(session: Session) -> list[str]:
    session.expire_all()
    return [team.name for team in session.exec(select(Team))]


def _periods(session: Session) -> list[str]:
    session.expire_all()
    return [period.name for period in session.exec(select(Period))]


def test_home_lists_the_demo_teams_and_periods(client: TestClient, app: FastAPI) -> None:
    demo.load_if_empty(app.state.engine)
    page = parse(client.get("/").text)
    links = {a.text(): a.attrs["href"] for a in page.find_all("a")}
    for name in demo.TEAMS:
        assert links[name].startswith("/teams/")
    rows = {
        row.find("td").find("a").text(): [cell.text() for cell in row.find_all("td")]
        for row in page.find("table").find_all("tr")[1:]
    }
    assert set(rows) == {demo.QUARTER} | {f"Sprint 27.{n}" for n in range(1, 7)}
    # Each period's name leads to its overview of every team's plan, which it used not to.
    overview = links[demo.QUARTER]
    assert overview.endswith("/overview")
    assert demo.QUARTER in parse(client.get(overview).text).find("h1").text()
    # The quarter: 13 weeks of 5 weekdays minus two company days off (counted on a calendar).
    assert rows[demo.QUARTER][1] == "quarter"
    assert rows[demo.QUARTER][-1] == "63"
    # Sprint 27.1 is 4-15 January 2027: two weeks, no days off.
    assert rows["Sprint 27.1"][-1] == "10"
    ids_are_unique_and_labels_point_at_fields(page)


def test_empty_home_says_so(client: TestClient) -> None:
    text = parse(client.get("/").text).text()
    assert "No teams yet." in text
    assert "No periods yet." in text


def test_adding_a_team_redirects_to_its_page(form_client: TestClient, session: Session) -> None:
    response = form_client.post(
        "/teams", data={"name": "Harbour", "csrf_token": form_client.csrf}, follow_redirects=False
    )
    assert response.status_code == 303
    team = session.exec(select(Team)).one()
    assert response.headers["location"] == f"/teams/{team.id}"
    assert "Harbour" in form_client.get(response.headers["location"]).text


def test_a_new_team_gets_the_spread_typed_on_the_home_page(
    form_client: TestClient, session: Session
) -> None:
    form = Form(parse(form_client.get("/").text), "/teams")
    assert form.value("spread_pct") == "0"  # offered, so a new team's risk is a choice
    data = {"name": "Harbour", "spread_pct": "12.5 %", "csrf_token": form_client.csrf}
    assert form_client.post("/teams", data=data, follow_redirects=False).status_code == 303
    session.expire_all()
    assert session.exec(select(Team)).one().default_spread == pytest.approx(0.125)
    # A post without the field (a script, an older page) keeps the 0 % default.
    data = {"name": "Quay", "csrf_token": form_client.csrf}
    assert form_client.post("/teams", data=data, follow_redirects=False).status_code == 303
    session.expire_all()
    assert session.exec(select(Team).where(Team.name == "Quay")).one().default_spread == 0


@pytest.mark.parametrize("typed", ["", "100", "-5", "wide"])
def test_a_bad_spread_for_a_new_team_is_shown_again_and_adds_nothing(
    form_client: TestClient, session: Session, typed: str
) -> None:
    data = {"name": "Harbour", "spread_pct": typed, "csrf_token": form_client.csrf}
    response = form_client.post("/teams", data=data)
    assert response.status_code == 422
    form = Form(parse(response.text), "/teams")
    assert form.value("name") == "Harbour"
    assert form.value("spread_pct") == typed
    assert "Enter a percentage from 0 to below 100." in form.error("spread_pct")
    assert _teams(session) == []


def test_a_form_without_its_token_is_refused_and_stores_nothing(
    form_client: TestClient, session: Session
) -> None:
    response = form_client.post("/teams", data={"name": "Harbour"}, follow_redirects=False)
    assert response.status_code == 403
    response = form_client.post(
        "/teams", data={"name": "Harbour", "csrf_token": "0" * 64}, follow_redirects=False
    )
    assert response.status_code == 403
    response = form_client.post("/periods", data=PERIOD_FORM, follow_redirects=False)
    assert response.status_code == 403
    assert _teams(session) == []
    assert _periods(session) == []


@pytest.mark.parametrize(
    ("typed", "message"),
    [("", "Enter some text"), ("   ", "Enter some text"), ("t" * 81, "80 characters at most")],
)
def test_a_bad_team_name_is_shown_again_with_the_message(
    form_client: TestClient, session: Session, typed: str, message: str
) -> None:
    response = form_client.post("/teams", data={"name": typed, "csrf_token": form_client.csrf})
    assert response.status_code == 422
    form = Form(parse(response.text), "/teams")
    assert form.value("name") == typed.strip()
    assert message in form.error("name")
    assert _teams(session) == []


def test_a_duplicate_team_name_is_shown_again(form_client: TestClient, session: Session) -> None:
    make_team(session, "Harbour")
    response = form_client.post("/teams", data={"name": "HARBOUR", "csrf_token": form_client.csrf})
    assert response.status_code == 422
    page = parse(response.text)
    form = Form(page, "/teams")
    assert form.value("name") == "HARBOUR"
    assert "already exists" in form.error("name")
    assert _teams(session) == ["Harbour"]
    ids_are_unique_and_labels_point_at_fields(page)


def test_adding_a_period(form_client: TestClient, session: Session) -> None:
    response = form_client.post(
        "/periods", data=PERIOD_FORM | {"csrf_token": form_client.csrf}, follow_redirects=False
    )
    assert response.status_code == 303
    period = session.exec(select(Period)).one()
    assert (period.start_date, period.end_date) == (dt.date(2027, 3, 15), dt.date(2027, 3, 26))
    assert period.non_working_dates == ["2027-03-19"]
    rows = parse(form_client.get("/").text).find("table").find_all("tr")
    assert [cell.text() for cell in rows[1].find_all("td")][-1] == "9"  # 10 weekdays - 1
    # Found in use: the page came back with no word of what was added.
    location = response.headers["location"]
    assert location == f"/?done=added-{period.id}#periods-h"
    notice = parse(form_client.get(location).text).find("p", id="notice")
    assert notice.text() == f"Added period “{period.name}”."
    assert parse(form_client.get("/?done=added-999999").text).find_all("p", id="notice") == []


@pytest.mark.parametrize(
    ("change", "field", "message"),
    [
        ({"end_date": "2027-03-12"}, "end_date", "ends before it starts"),
        ({"end_date": "2028-06-30"}, "end_date", "at most 400 days"),
        ({"start_date": ""}, "start_date", "date"),
        ({"non_working_dates": "2027-04-01"}, "non_working_dates", "outside the period"),
        ({"non_working_dates": "2027-03-40"}, "non_working_dates", "date"),
        ({"weekmask": "11111"}, "weekmask", "seven digits"),
        (
            {"start_date": "2027-03-20", "end_date": "2027-03-21", "non_working_dates": ""},
            "end_date",
            "no working day",
        ),
        ({"kind": "month"}, "kind", "sprint"),
        ({"name": "p" * 81}, "name", "80 characters at most"),
    ],
)
def test_a_bad_period_is_shown_again_with_the_values_kept(
    form_client: TestClient,
    session: Session,
    change: dict[str, str],
    field: str,
    message: str,
) -> None:
    typed = PERIOD_FORM | change
    response = form_client.post("/periods", data=typed | {"csrf_token": form_client.csrf})
    assert response.status_code == 422
    form = Form(parse(response.text), "/periods")
    for name in ("name", "start_date", "end_date", "non_working_dates", "weekmask"):
        assert form.value(name) == typed[name], name
    if field != "kind":
        assert form.value("kind") == "sprint"
    assert message in form.error(field)
    assert _periods(session) == []


def test_a_duplicate_period_name_is_shown_again(form_client: TestClient, session: Session) -> None:
    make_period(session, "Sprint 2")
    response = form_client.post(
        "/periods", data=PERIOD_FORM | {"name": "sprint 2", "csrf_token": form_client.csrf}
    )
    assert response.status_code == 422
    form = Form(parse(response.text), "/periods")
    assert form.value("name") == "sprint 2"
    assert "already exists" in form.error("name")
    assert _periods(session) == ["Sprint 2"]


# --- changing and deleting a period ---------------------------------------------------------


def _send(client: TestClient, url: str, data: dict[str, str]):
    return client.post(url, data=data | {"csrf_token": client.csrf}, follow_redirects=False)  # type: ignore[attr-defined]


def test_a_period_is_changed_from_its_page(form_client: TestClient, session: Session) -> None:
    period = make_period(session)  # Sprint 1, 2027-03-01 to 03-12, 10 working days
    home = parse(form_client.get("/").text)
    assert any(a.attrs.get("href") == f"/periods/{period.id}/edit" for a in home.find_all("a"))
    page = parse(form_client.get(f"/periods/{period.id}/edit").text)
    ids_are_unique_and_labels_point_at_fields(page)
    form = Form(page, f"/periods/{period.id}")
    assert (form.value("name"), form.value("start_date")) == ("Sprint 1", "2027-03-01")
    changed = PERIOD_FORM | {"name": "Sprint 1b", "start_date": "2027-03-01"}
    sent = _send(form_client, f"/periods/{period.id}", changed)
    assert sent.status_code == 303
    said = parse(form_client.get(sent.headers["location"]).text).find("p", id="notice")
    assert said.text() == "Saved period “Sprint 1b”."
    session.expire_all()
    stored = session.get(Period, period.id)
    assert stored is not None
    assert (stored.name, stored.end_date) == ("Sprint 1b", dt.date(2027, 3, 26))
    assert stored.non_working_dates == ["2027-03-19"]


def test_a_bad_period_change_is_shown_again_and_changes_nothing(
    form_client: TestClient, session: Session
) -> None:
    period = make_period(session)
    url = f"/periods/{period.id}"
    bad = PERIOD_FORM | {"end_date": "2027-02-01", "weekmask": "11111"}
    response = _send(form_client, url, bad)
    assert response.status_code == 422
    form = Form(parse(response.text), url)
    assert (form.value("end_date"), form.value("weekmask")) == ("2027-02-01", "11111")
    assert "seven digits" in " ".join(form.errors())
    assert _periods(session) == ["Sprint 1"]


def test_a_period_in_use_is_not_deleted_and_says_why(
    form_client: TestClient, session: Session
) -> None:
    period = make_period(session)
    make_initiative(session, make_team(session), period, "Quay wall")
    url = f"/periods/{period.id}/delete"
    unticked = _send(form_client, url, {})
    assert unticked.status_code == 422
    assert "Tick “Yes, delete Sprint 1”" in unticked.text
    refused = _send(form_client, url, {"confirm": "yes"})
    assert refused.status_code == 409
    assert "still has 1 initiative (Harbour 1)" in refused.text
    assert _periods(session) == ["Sprint 1"]
    empty = make_period(session, "Sprint 9", dt.date(2027, 5, 3), dt.date(2027, 5, 14))
    assert _send(form_client, f"/periods/{empty.id}/delete", {"confirm": "yes"}).status_code == 303
    assert _periods(session) == ["Sprint 1"]


def test_a_period_edit_over_a_colleagues_change_is_refused(
    form_client: TestClient, session: Session
) -> None:
    period = make_period(session)  # Mon 1 to Fri 12 March 2027, 10 working days
    url = f"/periods/{period.id}"
    token = Form(parse(form_client.get(url + "/edit").text), url).value("based_on")
    fields = {
        "name": "Sprint 1",
        "kind": "sprint",
        "start_date": "2027-03-01",
        "end_date": "2027-03-12",
        "weekmask": "1111100",
        "based_on": token,
    }
    closed = _send(form_client, url, fields | {"non_working_dates": "2027-03-05"})
    assert closed.status_code == 303
    renamed = _send(form_client, url, fields | {"name": "Sprint 1 (final)"})
    assert renamed.status_code == 409
    assert "now 2027-03-01 to 2027-03-12, 9 working days" in parse(renamed.text).text()
    assert _periods(session) == ["Sprint 1"]
