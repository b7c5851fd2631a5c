"""The team page: members, availability per period and the capacity breakdown."""

from __future__ import annotations

from dataclasses import dataclass

import pytest
from fastapi.testclient import TestClient
from sqlmodel import Session, select

from server.models import AuditEntry, Availability, CapacitySettings, EffortLine, Member
from server.models import Team as TeamRow
from server.schemas import CapacitySettingsIn, TeamEffortIn
from server.store.periods import set_capacity_settings
from server.store.plans import create_scenario
from tests.factories import make_initiative, make_member, make_period, make_team, set_days_off
from tests.pages.parsed_page import (
    Element,
    Form,
    ids_are_unique_and_labels_point_at_fields,
    parse,
)


@dataclass(frozen=True)
class Team:
    id: int
    period: int
    ola: int
    kari: int
    other_team_member: int


@pytest.fixture
def team(session: Session) -> Team:
    """Harbour: Ola full time with 2 days off, Kari half time; Sprint 1 has 10 working days."""
    harbour = make_team(session, "Harbour")
    ola = make_member(session, harbour, "Ola", 1.0)
    kari = make_member(session, harbour, "Kari", 0.5)
    sprint = make_period(session, "Sprint 1")
    set_days_off(session, ola, sprint, 2)
    stranger = make_member(session, make_team(session, "Lighthouse"), "Sol")
    return Team(harbour.id or 0, sprint.id or 0, ola.id or 0, kari.id or 0, stranger.id or 0)


def _breakdown(page: Element) -> dict[str, str]:
    table = page.find("table", cls="breakdown")
    return {row.find("th").text(): row.find("td").text() for row in table.find_all("tr")}


def _post(client: TestClient, url: str, data: dict[str, str]) -> object:
    return client.post(url, data=data | {"csrf_token": client.csrf}, follow_redirects=False)  # type: ignore[attr-defined]


def _days_off(session: Session, member_id: int) -> list[float]:
    session.expire_all()
    query = select(Availability.days_off).where(Availability.member_id == member_id)
    return list(session.exec(query))


def test_team_page_shows_members_availability_and_capacity(client: TestClient, team: Team) -> None:
    page = parse(client.get(f"/teams/{team.id}").text)
    assert page.find("h1").text() == "Harbour"
    members = page.find("table", cls="availability")
    rows = {row.find("th").text(): row for row in members.find_all("tr")[1:]}
    assert set(rows) == {"Ola", "Kari"}  # not Sol, who is on another team
    assert rows["Kari"].find("td").text() == "50 %"
    ola_form = Form(page, f"/teams/{team.id}/availability", member_id=str(team.ola))
    assert ola_form.value("days_off") == "2"
    assert ola_form.value("period_id") == str(team.period)
    assert (
        Form(page, f"/teams/{team.id}/availability", member_id=str(team.kari)).value("days_off")
        == "0"
    )

    # Worked by hand: (10 - 2) x 1 = 8 and (10 - 0) x 0.5 = 5; 13 x 0.7 = 9.1;
    # reserve 15 % = 1.365 (shown 1.37); capacity 7.735 (shown 7.74).
    breakdown = _breakdown(page)
    assert breakdown["Working days in the period"] == "10"
    assert breakdown["Ola: (10 − 2 days off) × 100 %"] == "8"
    assert breakdown["Kari: (10 − 0 days off) × 50 %"] == "5"
    assert breakdown["Available person-days"] == "13"
    assert breakdown["× focus factor 0.7"] == "9.1"
    assert breakdown["− reserve 15 %"] == "1.37"
    assert breakdown["Capacity for planned work"] == "7.74 days"
    settings = Form(page, f"/teams/{team.id}/capacity")
    assert (settings.value("focus_factor"), settings.value("reserve_pct")) == ("0.7", "15")
    ids_are_unique_and_labels_point_at_fields(page)


def test_team_page_without_periods_points_to_the_home_page(
    client: TestClient, session: Session
) -> None:
    harbour = make_team(session, "Harbour")
    page = parse(client.get(f"/teams/{harbour.id}").text)
    assert "Add a period" in page.text()
    assert page.find_all("table", cls="breakdown") == []


def test_unknown_team_page_is_404(client: TestClient) -> None:
    response = client.get("/teams/4711")
    assert response.status_code == 404
    assert "No team with id 4711" in response.text


def test_setting_days_off_through_the_form(
    form_client: TestClient, session: Session, team: Team
) -> None:
    url = f"/teams/{team.id}/availability"
    data = {"member_id": str(team.ola), "period_id": str(team.period), "days_off": "3"}
    response = _post(form_client, url, data)
    assert response.status_code == 303  # type: ignore[attr-defined]
    assert _days_off(session, team.ola) == [3]
    # (7 + 5) x 0.7 = 8.4; reserve 15 % = 1.26; capacity 7.14.
    page = parse(form_client.get(response.headers["location"]).text)  # type: ignore[attr-defined]
    assert _breakdown(page)["Capacity for planned work"] == "7.14 days"


def _described(row: Form, name: str) -> str:
    """The message the field points at (aria-describedby), found in the field's own form."""
    control = row.control(name)
    assert control.attrs.get("aria-invalid") == "true"
    target = control.attrs.get("aria-describedby")
    found = [e for e in row.element.iter() if target and e.attrs.get("id") == target]
    assert len(found) == 1, target
    assert "field-error" in found[0].classes
    return found[0].text()


@pytest.mark.parametrize(
    ("days_off", "share", "field", "message"),
    [
        ("11", "", "days_off", "more than the 10 working days"),
        ("-1", "", "days_off", "at least 0"),
        ("abc", "", "days_off", "Enter a number"),
        ("nan", "", "days_off", "finite number"),
        ("", "", "days_off", "Enter the days off, 0 if none."),  # saved 0 without a word
        ("1", "150", "share", "at most 100"),
        ("1", "0.5 of it", "share", "Enter a percentage"),
    ],
)
def test_bad_days_off_are_shown_again_in_the_member_row(
    form_client: TestClient,
    session: Session,
    team: Team,
    days_off: str,
    share: str,
    field: str,
    message: str,
) -> None:
    url = f"/teams/{team.id}/availability"
    data = {
        "member_id": str(team.ola),
        "period_id": str(team.period),
        "days_off": days_off,
        "share": share,
    }
    response = _post(form_client, url, data)
    assert response.status_code == 422  # type: ignore[attr-defined]
    page = parse(response.text)  # type: ignore[attr-defined]
    row = Form(page, url, member_id=str(team.ola))
    assert row.value("days_off") == days_off
    assert row.value("share") == share
    # The message sits beside its own field, which points at it: no label in front of it.
    said = _described(row, field)
    assert message in said
    assert not said.startswith(field.replace("_", " ") + ":")
    assert row.errors() == [said]
    # Kari's row is untouched and shows no message.
    assert Form(page, url, member_id=str(team.kari)).errors() == []
    assert _days_off(session, team.ola) == [2]


def test_every_bad_availability_field_is_named_once(
    form_client: TestClient, session: Session, team: Team
) -> None:
    url = f"/teams/{team.id}/availability"
    data = {
        "member_id": str(team.ola),
        "period_id": str(team.period),
        "days_off": "70",
        "share": "150",
    }
    response = _post(form_client, url, data)
    assert response.status_code == 422  # type: ignore[attr-defined]
    errors = Form(parse(response.text), url, member_id=str(team.ola)).errors()  # type: ignore[attr-defined]
    assert len(errors) == 2
    row = Form(parse(response.text), url, member_id=str(team.ola))  # type: ignore[attr-defined]
    # Each beside its own field, which names it: the message does not say it again.
    assert _described(row, "days_off").startswith("70 days off is more than the 10 working days")
    assert _described(row, "share") == "Enter a percentage above 0 and at most 100."
    assert not any(e.startswith(("days off:", "share:", "days_off")) for e in errors)
    assert _days_off(session, team.ola) == [2]


def test_availability_for_a_member_of_another_team_is_refused(
    form_client: TestClient, session: Session, team: Team
) -> None:
    data = {
        "member_id": str(team.other_team_member),
        "period_id": str(team.period),
        "days_off": "1",
    }
    response = _post(form_client, f"/teams/{team.id}/availability", data)
    assert response.status_code == 404  # type: ignore[attr-defined]
    assert "That member is not on this team." in response.text  # type: ignore[attr-defined]
    assert _days_off(session, team.other_team_member) == []


def test_days_off_form_without_token_is_refused(
    form_client: TestClient, session: Session, team: Team
) -> None:
    data = {"member_id": str(team.ola), "period_id": str(team.period), "days_off": "5"}
    response = form_client.post(f"/teams/{team.id}/availability", data=data)
    assert response.status_code == 403
    assert _days_off(session, team.ola) == [2]


def test_adding_a_member_through_the_form(
    form_client: TestClient, session: Session, team: Team
) -> None:
    data = {"name": "Eli", "share": "60", "period_id": str(team.period)}
    response = _post(form_client, f"/teams/{team.id}/members", data)
    assert response.status_code == 303  # type: ignore[attr-defined]
    location = response.headers["location"]  # type: ignore[attr-defined]
    assert location == f"/teams/{team.id}?period_id={team.period}&saved=member-added"
    notice = parse(form_client.get(location).text).find("p", cls="notice")
    assert notice is not None
    assert notice.text() == "Member added."
    eli = session.exec(select(Member).where(Member.name == "Eli")).one()
    assert eli.allocation == 0.6
    page = parse(form_client.get(f"/teams/{team.id}").text)
    # Eli adds 10 x 0.6 = 6 person-days: (13 + 6) x 0.7 x 0.85 = 11.305 (shown 11.31).
    assert _breakdown(page)["Capacity for planned work"] == "11.31 days"


@pytest.mark.parametrize(
    ("name", "share", "field", "message"),
    [
        ("", "1", "name", "Enter some text"),
        ("Ola", "1", "name", "already has a member"),
        ("Eli", "200", "share", "at most 100"),
        ("Eli", "", "share", "Enter a percentage"),
        ("Eli", "0", "share", "above 0"),
        ("Eli", "full", "share", "Enter a percentage"),
    ],
)
def test_a_bad_member_is_shown_again(
    form_client: TestClient,
    session: Session,
    team: Team,
    name: str,
    share: str,
    field: str,
    message: str,
) -> None:
    data = {"name": name, "share": share, "period_id": str(team.period)}
    response = _post(form_client, f"/teams/{team.id}/members", data)
    assert response.status_code == 422  # type: ignore[attr-defined]
    form = Form(parse(response.text), f"/teams/{team.id}/members")  # type: ignore[attr-defined]
    assert (form.value("name"), form.value("share")) == (name, share)
    assert message in form.error(field)
    session.expire_all()
    assert len(list(session.exec(select(Member)))) == 3


def test_setting_focus_factor_and_reserve(
    form_client: TestClient, session: Session, team: Team
) -> None:
    # The reserve typed with its sign ("10 %") is read as 10: the label asks for a percentage.
    data = {"focus_factor": "0.8", "reserve_pct": "10 %", "period_id": str(team.period)}
    response = _post(form_client, f"/teams/{team.id}/capacity", data)
    assert response.status_code == 303  # type: ignore[attr-defined]
    page = parse(form_client.get(f"/teams/{team.id}?period_id={team.period}").text)
    # 13 x 0.8 = 10.4; reserve 10 % = 1.04; capacity 9.36.
    breakdown = _breakdown(page)
    assert breakdown["× focus factor 0.8"] == "10.4"
    assert breakdown["Capacity for planned work"] == "9.36 days"


@pytest.mark.parametrize(
    ("focus", "reserve", "field"),
    [
        ("0", "15", "focus_factor"),
        ("1.5", "15", "focus_factor"),
        ("-1", "15", "focus_factor"),
        ("inf", "15", "focus_factor"),
        ("0.7", "100", "reserve_pct"),
        ("0.7", "-5", "reserve_pct"),
        ("0.7", "lots", "reserve_pct"),
    ],
)
def test_bad_focus_or_reserve_is_shown_again(
    form_client: TestClient,
    session: Session,
    team: Team,
    focus: str,
    reserve: str,
    field: str,
) -> None:
    data = {"focus_factor": focus, "reserve_pct": reserve, "period_id": str(team.period)}
    response = _post(form_client, f"/teams/{team.id}/capacity", data)
    assert response.status_code == 422  # type: ignore[attr-defined]
    page = parse(response.text)  # type: ignore[attr-defined]
    form = Form(page, f"/teams/{team.id}/capacity")
    assert (form.value("focus_factor"), form.value("reserve_pct")) == (focus, reserve)
    assert form.error(field)
    other = "reserve_pct" if field == "focus_factor" else "focus_factor"
    assert form.error(other) == ""
    assert list(session.exec(select(CapacitySettings))) == []
    ids_are_unique_and_labels_point_at_fields(page)


# --- changing a member and the team --------------------------------------------------------


def _member(session: Session, member_id: int) -> Member | None:
    session.expire_all()
    return session.get(Member, member_id)


def test_a_member_is_renamed_and_their_share_changed(
    form_client: TestClient, session: Session, team: Team
) -> None:
    url = f"/teams/{team.id}/members/{team.kari}"
    page = parse(form_client.get(f"/teams/{team.id}?period_id={team.period}").text)
    form = Form(page, url)
    assert (form.value("name"), form.value("share")) == ("Kari", "50")
    ids_are_unique_and_labels_point_at_fields(page)
    response = _post(
        form_client, url, {"name": "Kari N.", "share": "80", "period_id": str(team.period)}
    )
    assert response.status_code == 303  # type: ignore[attr-defined]
    kari = _member(session, team.kari)
    assert kari is not None
    assert (kari.name, kari.allocation) == ("Kari N.", 0.8)
    entry = session.exec(select(AuditEntry).where(AuditEntry.action == "member.update")).one()
    assert entry.actor  # the signed-in person, as for every page change


@pytest.mark.parametrize(
    ("name", "share", "field", "message"),
    [
        ("", "0.5", "name", "Enter some text"),
        ("Ola", "0.5", "name", "Ola"),  # the team already has an Ola
        ("Kari", "150", "share", "at most 100"),
        ("Kari", "", "share", "Enter a percentage"),  # not a silent reset to 100 %
        ("Kari", "half", "share", "Enter a percentage"),
    ],
)
def test_a_bad_member_change_is_shown_again_and_changes_nothing(
    form_client: TestClient,
    session: Session,
    team: Team,
    name: str,
    share: str,
    field: str,
    message: str,
) -> None:
    url = f"/teams/{team.id}/members/{team.kari}"
    response = _post(form_client, url, {"name": name, "share": share})
    assert response.status_code == 422  # type: ignore[attr-defined]
    form = Form(parse(response.text), url)  # type: ignore[attr-defined]
    assert (form.value("name"), form.value("share")) == (name, share)
    assert message in " ".join(form.errors())
    kari = _member(session, team.kari)
    assert kari is not None
    assert (kari.name, kari.allocation) == ("Kari", 0.5)


def test_removing_a_member_removes_their_days_off(
    form_client: TestClient, session: Session, team: Team
) -> None:
    url = f"/teams/{team.id}/members/{team.ola}/delete"
    unconfirmed = _post(form_client, url, {})
    assert unconfirmed.status_code == 422  # type: ignore[attr-defined]
    assert "Tick “Yes, remove Ola”" in unconfirmed.text  # type: ignore[attr-defined]
    assert _member(session, team.ola) is not None
    response = _post(form_client, url, {"confirm": "yes"})
    assert response.status_code == 303  # type: ignore[attr-defined]
    assert _member(session, team.ola) is None
    assert _days_off(session, team.ola) == []
    assert _member(session, team.kari) is not None


def test_a_member_of_another_team_is_not_changed_here(
    form_client: TestClient, session: Session, team: Team
) -> None:
    url = f"/teams/{team.id}/members/{team.other_team_member}"
    assert _post(form_client, url, {"name": "X", "share": "100"}).status_code == 404  # type: ignore[attr-defined]
    gone = _post(form_client, url + "/delete", {"confirm": "yes"})
    assert gone.status_code == 404  # type: ignore[attr-defined]
    sol = _member(session, team.other_team_member)
    assert sol is not None
    assert sol.name == "Sol"


def test_the_team_is_renamed_and_its_spread_set_in_percent(
    form_client: TestClient, session: Session, team: Team
) -> None:
    url = f"/teams/{team.id}/settings"
    response = _post(form_client, url, {"name": "Harbour Ops", "spread_pct": "20"})
    assert response.status_code == 303  # type: ignore[attr-defined]
    page = parse(form_client.get(f"/teams/{team.id}").text)
    assert page.find("h1").text() == "Harbour Ops"
    assert Form(page, url).value("spread_pct") == "20"
    for bad in ("100", "x", ""):  # blank: not a silent reset to 0 %
        refused = _post(form_client, url, {"name": "Harbour Ops", "spread_pct": bad})
        assert refused.status_code == 422  # type: ignore[attr-defined]
        errors = Form(parse(refused.text), url).errors()  # type: ignore[attr-defined]
        assert "Enter a percentage from 0 to below 100." in " ".join(errors)
    taken = _post(form_client, url, {"name": "Lighthouse", "spread_pct": "20"})
    assert taken.status_code == 422  # type: ignore[attr-defined]
    assert Form(parse(taken.text), url).value("name") == "Lighthouse"  # type: ignore[attr-defined]


def _team_exists(session: Session, team_id: int) -> bool:
    session.expire_all()
    return session.get(TeamRow, team_id) is not None


def test_a_team_is_deleted_from_its_page_after_the_tick(
    form_client: TestClient, session: Session, team: Team
) -> None:
    page = parse(form_client.get(f"/teams/{team.id}").text)
    url = f"/teams/{team.id}/delete"
    form = Form(page, url)
    assert "Yes, delete team Harbour" in form.element.text()
    unconfirmed = _post(form_client, url, {})
    assert unconfirmed.status_code == 422  # type: ignore[attr-defined]
    assert "Tick “Yes, delete team Harbour”" in unconfirmed.text  # type: ignore[attr-defined]
    assert _team_exists(session, team.id)

    response = _post(form_client, url, {"confirm": "yes"})
    assert response.status_code == 303  # type: ignore[attr-defined]
    location = response.headers["location"]  # type: ignore[attr-defined]
    assert location == f"/?done=deleted-team-{team.id}"
    assert not _team_exists(session, team.id)
    # The home page says what went (found in use: it came back without a word).
    notice = parse(form_client.get(location).text).find("p", id="notice")
    assert notice.text().startswith("Deleted team “Harbour”")
    assert _member(session, team.ola) is None
    assert _member(session, team.other_team_member) is not None
    entry = session.exec(select(AuditEntry).where(AuditEntry.action == "team.delete")).one()
    assert entry.summary == "Deleted team “Harbour”"


def test_the_delete_box_and_the_audit_say_the_scenarios_go_too(
    form_client: TestClient, session: Session, team: Team
) -> None:
    create_scenario(session, team_id=team.id, period_id=team.period, name="Lean", changes={})
    page = parse(form_client.get(f"/teams/{team.id}").text)
    box = page.find("details", cls="team-delete").text()
    assert "and its 1 scenario go with it" in box
    assert _post(form_client, f"/teams/{team.id}/delete", {"confirm": "yes"}).status_code == 303  # type: ignore[attr-defined]
    entry = session.exec(select(AuditEntry).where(AuditEntry.action == "team.delete")).one()
    assert entry.summary == "Deleted team “Harbour” with its 1 scenario"
    assert [s["name"] for s in entry.before["scenarios"]] == ["Lean"]


def test_a_team_with_initiatives_needs_the_second_tick(
    form_client: TestClient, session: Session, team: Team
) -> None:
    harbour = session.get(TeamRow, team.id)
    assert harbour is not None
    make_initiative(session, harbour, None, "Quay lights")
    page = parse(form_client.get(f"/teams/{team.id}").text)
    url = f"/teams/{team.id}/delete"
    assert "Also delete its 1 initiative" in Form(page, url).element.text()

    refused = _post(form_client, url, {"confirm": "yes"})
    assert refused.status_code == 409  # type: ignore[attr-defined]
    shown = parse(refused.text)  # type: ignore[attr-defined]
    assert "still has 1 initiative" in shown.find("details", cls="team-delete").text()
    assert _team_exists(session, team.id)

    done = _post(form_client, url, {"confirm": "yes", "with_initiatives": "yes"})
    assert done.status_code == 303  # type: ignore[attr-defined]
    assert not _team_exists(session, team.id)


def test_a_team_another_team_needs_is_kept_with_the_boxes_still_ticked(
    form_client: TestClient, session: Session, team: Team
) -> None:
    harbour = session.get(TeamRow, team.id)
    lighthouse = session.exec(select(TeamRow).where(TeamRow.name == "Lighthouse")).one()
    assert harbour is not None
    lights = make_initiative(session, harbour, None, "Quay lights")
    make_initiative(session, lighthouse, None, "Beacon", needs=[lights.row.id])
    url = f"/teams/{team.id}/delete"

    refused = _post(form_client, url, {"confirm": "yes", "with_initiatives": "yes"})
    assert refused.status_code == 409  # type: ignore[attr-defined]
    form = Form(parse(refused.text), url)  # type: ignore[attr-defined]
    assert "“Quay lights” is needed by “Beacon” (team Lighthouse)" in form.element.text()
    assert form.control("with_initiatives").attrs.get("checked") is not None
    assert _team_exists(session, team.id)


def _settings(session: Session, team: Team) -> tuple[float, float]:
    session.expire_all()
    row = session.exec(select(CapacitySettings).where(CapacitySettings.team_id == team.id)).one()
    return row.focus_factor, row.reserve_pct


def test_capacity_settings_saved_over_a_colleagues_change_are_refused(
    form_client: TestClient, session: Session, team: Team
) -> None:
    """Two managers open the team page; one saves a focus factor of 0.8, then the other, on
    the page as it was, saves a reserve of 20 %. Before, the second save set the focus factor
    back to 0.7 without a word."""
    url = f"/teams/{team.id}/capacity"
    opened = Form(parse(form_client.get(f"/teams/{team.id}?period_id={team.period}").text), url)
    first = {"period_id": str(team.period), "based_on": opened.value("based_on")}
    assert (
        _post(form_client, url, first | {"focus_factor": "0.8", "reserve_pct": "15"}).status_code
        == 303
    )  # type: ignore[attr-defined]
    assert _settings(session, team) == (0.8, 15)

    stale = _post(form_client, url, first | {"focus_factor": "0.7", "reserve_pct": "20"})
    assert stale.status_code == 409  # type: ignore[attr-defined]
    assert _settings(session, team) == (0.8, 15)
    shown = Form(parse(stale.text), url)  # type: ignore[attr-defined]
    assert (shown.value("focus_factor"), shown.value("reserve_pct")) == ("0.7", "20")
    assert "now focus factor 0.8, reserve 15 %" in " ".join(shown.errors())
    assert "version:" not in " ".join(shown.errors())
    # Saving the re-shown form applies the values on purpose.
    again = {"period_id": str(team.period), "based_on": shown.value("based_on")}
    assert (
        _post(form_client, url, again | {"focus_factor": "0.8", "reserve_pct": "20"}).status_code
        == 303
    )  # type: ignore[attr-defined]
    assert _settings(session, team) == (0.8, 20)


def test_member_and_team_edits_over_a_colleagues_change_are_refused(
    form_client: TestClient, session: Session, team: Team
) -> None:
    page = parse(form_client.get(f"/teams/{team.id}").text)
    member_url = f"/teams/{team.id}/members/{team.kari}"
    team_url = f"/teams/{team.id}/settings"
    member_token = Form(page, member_url).value("based_on")
    team_token = Form(page, team_url).value("based_on")
    # A colleague gives Kari 80 % and renames the team meanwhile.
    for url, data in (
        (member_url, {"name": "Kari", "share": "80", "based_on": member_token}),
        (team_url, {"name": "Harbour Ops", "spread_pct": "0", "based_on": team_token}),
    ):
        assert _post(form_client, url, data).status_code == 303  # type: ignore[attr-defined]

    stale_member = _post(
        form_client, member_url, {"name": "Kari N.", "share": "50", "based_on": member_token}
    )
    assert stale_member.status_code == 409  # type: ignore[attr-defined]
    # The message says what the colleague stored, so saving again is a choice made knowingly.
    stale_text = parse(stale_member.text).text()  # type: ignore[attr-defined]
    assert "Kari's name and share were changed while you were editing: now Kari, share 80 %" in (
        stale_text
    )
    stale_team = _post(
        form_client, team_url, {"name": "Harbour", "spread_pct": "10", "based_on": team_token}
    )
    assert stale_team.status_code == 409  # type: ignore[attr-defined]
    assert "Harbour Ops" in parse(stale_team.text).find("h1").text()  # type: ignore[attr-defined]
    kari = _member(session, team.kari)
    assert kari is not None
    assert (kari.name, kari.allocation) == ("Kari", 0.8)
    harbour = session.get(TeamRow, team.id)
    assert harbour is not None
    assert (harbour.name, harbour.default_spread) == ("Harbour Ops", 0)


def test_days_off_saved_over_a_colleagues_change_are_refused(
    form_client: TestClient, session: Session, team: Team
) -> None:
    url = f"/teams/{team.id}/availability"
    opened = parse(form_client.get(f"/teams/{team.id}?period_id={team.period}").text)
    row = {"member_id": str(team.ola), "period_id": str(team.period)}
    token = Form(opened, url, member_id=str(team.ola)).value("based_on")
    assert _post(form_client, url, row | {"days_off": "9", "based_on": token}).status_code == 303  # type: ignore[attr-defined]
    stale = _post(form_client, url, row | {"days_off": "3", "share": "50", "based_on": token})
    assert stale.status_code == 409  # type: ignore[attr-defined]
    assert _days_off(session, team.ola) == [9]
    shown = Form(parse(stale.text), url, member_id=str(team.ola))  # type: ignore[attr-defined]
    assert (shown.value("days_off"), shown.value("share")) == ("3", "50")
    assert "now 9 days off" in " ".join(shown.errors())
    # Kari's row, untouched by anyone, still saves from the page as it was opened.
    kari = Form(opened, url, member_id=str(team.kari)).value("based_on")
    kari_row = {"member_id": str(team.kari), "period_id": str(team.period), "days_off": "1"}
    assert _post(form_client, url, kari_row | {"based_on": kari}).status_code == 303  # type: ignore[attr-defined]


def test_a_share_typed_with_three_decimals_is_shown_back_as_typed(
    form_client: TestClient, session: Session, team: Team
) -> None:
    url = f"/teams/{team.id}/members/{team.kari}"
    token = Form(parse(form_client.get(f"/teams/{team.id}").text), url).value("based_on")
    data = {"name": "Kari", "share": "33.333", "based_on": token}
    assert _post(form_client, url, data).status_code == 303  # type: ignore[attr-defined]
    shown = Form(parse(form_client.get(f"/teams/{team.id}").text), url)
    assert shown.value("share") == "33.333"  # was 33.33: saving it again stored the rounding


def test_another_teams_effort_is_removed_on_the_edit_page_so_a_team_can_go(
    form_client: TestClient, session: Session, team: Team
) -> None:
    """The refusal named Lighthouse's initiative carrying effort for Harbour, but no page
    showed or changed that effort: only the API could."""
    lighthouse = session.exec(select(TeamRow).where(TeamRow.name == "Lighthouse")).one()
    beacon = make_initiative(
        session,
        lighthouse,
        None,
        "Beacon",
        4,
        6,
        other_efforts=[TeamEffortIn(team_id=team.id, likely=1, low=0.5, high=2)],
    )
    refused = _post(form_client, f"/teams/{team.id}/delete", {"confirm": "yes"})
    assert refused.status_code == 409  # type: ignore[attr-defined]
    refusal = parse(refused.text).text()  # type: ignore[attr-defined]
    assert "remove the need, or the team's effort, on their edit pages" in refusal

    url = f"/initiatives/{beacon.row.id}"
    edit = Form(parse(form_client.get(url + "/edit").text), url)
    assert "Remove Harbour's effort (0.5 / 1 / 2 days)" in edit.element.text()
    fields = {
        name: edit.value(name)
        for name in ("title", "effort.likely", "effort.low", "effort.high", "value", "state")
    } | {"version": edit.value("version"), "period_id": "backlog", "drop_effort": str(team.id)}
    assert _post(form_client, url, fields).status_code == 303  # type: ignore[attr-defined]
    session.expire_all()
    lines = session.exec(select(EffortLine).where(EffortLine.initiative_id == beacon.row.id))
    assert [line.team_id for line in lines] == [lighthouse.id]
    assert _post(form_client, f"/teams/{team.id}/delete", {"confirm": "yes"}).status_code == 303  # type: ignore[attr-defined]


def test_a_save_on_the_team_page_says_what_was_saved(
    form_client: TestClient, session: Session, team: Team
) -> None:
    """Saving days off or the focus factor showed the page again without a word."""
    url = f"/teams/{team.id}/availability"
    data = {"member_id": str(team.ola), "period_id": str(team.period), "days_off": "3"}
    response = _post(form_client, url, data | {"share": ""})
    location = response.headers["location"]  # type: ignore[attr-defined]
    notice = parse(form_client.get(location).text).find("p", cls="notice")
    assert notice.text() == "Saved Ola's days off."
    # An unknown code or member says nothing rather than something wrong.
    for code in ("days-off-999999", "whatever"):
        page = parse(form_client.get(f"/teams/{team.id}?saved={code}").text)
        assert page.find_all("p", cls="notice") == []


def test_a_breakdown_that_does_not_add_up_after_rounding_says_why(
    form_client: TestClient, session: Session
) -> None:
    """39 person-days x 0.7 = 27.3, reserve 15 % = 4.095 (shown 4.1), capacity 23.205 (shown
    23.21): 27.3 - 4.1 is 23.2 on the page. With 40 person-days every figure adds up."""
    team, period = make_team(session, "Tugs"), make_period(session)  # 10 working days
    members = [make_member(session, team, name) for name in ("Ada", "Bo", "Cy", "Di")]
    set_days_off(session, members[0], period, 1)
    set_capacity_settings(
        session,
        team_id=team.id or 0,
        period_id=period.id or 0,
        settings_in=CapacitySettingsIn(focus_factor=0.7, reserve_pct=15),
    )
    page = parse(form_client.get(f"/teams/{team.id}?period_id={period.id}").text)
    assert _breakdown(page)["Capacity for planned work"] == "23.21 days"
    assert page.find_all("p", id="breakdown-rounding")
    set_days_off(session, members[0], period, 0)
    page = parse(form_client.get(f"/teams/{team.id}?period_id={period.id}").text)
    assert _breakdown(page)["Capacity for planned work"] == "23.8 days"  # 40 x 0.595
    assert not page.find_all("p", id="breakdown-rounding")


def test_each_members_fields_and_buttons_name_the_member(
    form_client: TestClient, session: Session, team: Team
) -> None:
    """Five boxes were all called "Days off" and twelve buttons "Save" to a screen reader."""
    page = parse(form_client.get(f"/teams/{team.id}?period_id={team.period}").text)
    off = page.find("label", **{"for": f"off-{team.ola}"}).text()
    share = page.find("label", **{"for": f"alloc-{team.ola}"}).text()
    assert " ".join(off.split()) == "Days off of Ola"
    assert " ".join(share.split()) == "Share (%) of Ola this period"
    buttons = {" ".join(b.text().split()) for b in page.find_all("button")}
    assert {"Save Ola's days off", "Save Ola"} <= buttons
