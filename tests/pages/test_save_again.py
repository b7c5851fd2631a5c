"""Saving again after a colleague's change: only the fields this page changed keep their typed
values; every other field takes the stored value, so the second save keeps both changes.

Two tabs: tab A is the editor account, tab B the admin account. Each opens the same form, A
saves one field, then B saves another on the page as it was opened. B's save is refused (409),
the form comes back with A's value in the field B never touched, and saving it again stores
both changes. A field both changed keeps B's typed value and is named in the message.
"""

from __future__ import annotations

from typing import Any

import pytest
from fastapi.testclient import TestClient
from sqlmodel import Session, select

from server.models import CapacitySettings, Member, Period, Scenario
from server.routes.forms import BothChanged, merge_after_conflict
from server.store.initiatives import get_initiative
from server.store.plans import create_scenario
from tests.conftest import csrf_token
from tests.factories import make_initiative, make_member, make_period, make_team
from tests.pages.html_tree import Node, parse_html
from tests.pages.parsed_page import Element, Form, parse

HX = {"HX-Request": "true"}
Fields = dict[str, Any]


@pytest.fixture
def tabs(client: TestClient, editor: TestClient) -> tuple[TestClient, TestClient]:
    """Tab A (the editor account) and tab B (the admin account), each with its form token."""
    for tab in (editor, client):
        tab.csrf = csrf_token(tab)  # type: ignore[attr-defined]
    return editor, client


def _post(tab: TestClient, url: str, data: Fields, **headers: str) -> Any:
    body = data | {"csrf_token": tab.csrf}  # type: ignore[attr-defined]
    return tab.post(url, data=body, headers=headers, follow_redirects=False)


def submitted(form: Form) -> Fields:
    """What a browser sends for the form as shown: every named field, hidden ones too."""
    return _controls(form.element.iter())


def _controls(elements: list[Element] | list[Node]) -> Fields:
    data: Fields = {}
    for element in elements:
        name = element.attrs.get("name")
        if not name or element.tag not in {"input", "select", "textarea"}:
            continue
        kind = element.attrs.get("type", "text")
        if kind in {"checkbox", "radio"} and "checked" not in element.attrs:
            continue
        if kind in {"submit", "button"}:
            continue
        if element.tag == "select":
            chosen = [
                o.attrs.get("value", "")
                for o in element.find_all("option")  # type: ignore[union-attr]
                if "selected" in o.attrs
            ]
            data[name] = chosen if "multiple" in element.attrs else (chosen or [""])[0]
        elif element.tag == "textarea":
            data[name] = "".join(c for c in element.children if isinstance(c, str))
        else:
            data[name] = element.attrs.get("value", "")
    return data


# --- the inline row of the plan page (htmx) ----------------------------------------------


def _row_fields(root: Node, initiative_id: int) -> Fields:
    """The row form's hidden fields and the row's own fields (tied to it by form=)."""
    form_id = f"edit-{initiative_id}"
    inside = list(root.by_id(form_id).iter())
    tied = [n for n in root.iter() if n.get("form") == form_id]
    return _controls(inside + tied)


@pytest.fixture
def plan_row(session: Session) -> tuple[str, str, int]:
    team = make_team(session)
    period = make_period(session)
    make_member(session, team, "Ola")
    record = make_initiative(session, team, period, "Quay wall", 12, 25)
    rid = record.row.id or 0
    return (
        f"/teams/{team.id}/plan?period_id={period.id}",
        f"/teams/{team.id}/plan/initiatives/{rid}",
        rid,
    )


def _open_row(tab: TestClient, page_url: str, rid: int) -> Fields:
    response = tab.get(page_url)
    assert response.status_code == 200, response.text[:300]
    return _row_fields(parse_html(response.text), rid)


def _stored(session: Session, rid: int) -> tuple[float, float]:
    session.expire_all()
    record = get_initiative(session, initiative_id=rid)
    return record.own_effort.likely, record.row.value


def test_inline_row_save_again_keeps_the_colleagues_value(
    tabs: tuple[TestClient, TestClient], session: Session, plan_row: tuple[str, str, int]
) -> None:
    """The tester's sequence: A changes the value 25 -> 26, B the effort 12 -> 15."""
    tab_a, tab_b = tabs
    page_url, edit_url, rid = plan_row
    opened_a, opened_b = _open_row(tab_a, page_url, rid), _open_row(tab_b, page_url, rid)
    assert _post(tab_a, edit_url, opened_a | {"value": "26"}, **HX).status_code == 200

    refused = _post(tab_b, edit_url, opened_b | {"effort": "15"}, **HX)
    assert refused.status_code == 409
    root = parse_html(refused.text)
    assert root.by_id(f"effort-{rid}").get("value") == "15"  # changed here: kept as typed
    assert root.by_id(f"value-{rid}").get("value") == "26"  # untouched here: refreshed
    note = root.by_id(f"conflict-{rid}").text()
    assert "Kept as you typed: effort." in note
    assert "Refreshed to the stored value: value." in note
    assert "both changed" not in note
    assert _stored(session, rid) == (12, 26)

    again = _post(tab_b, edit_url, _row_fields(root, rid), **HX)
    assert again.status_code == 200
    assert _stored(session, rid) == (15, 26)  # both changes


def test_inline_row_names_a_field_both_changed(
    tabs: tuple[TestClient, TestClient], session: Session, plan_row: tuple[str, str, int]
) -> None:
    tab_a, tab_b = tabs
    page_url, edit_url, rid = plan_row
    opened_a, opened_b = _open_row(tab_a, page_url, rid), _open_row(tab_b, page_url, rid)
    assert _post(tab_a, edit_url, opened_a | {"value": "26"}, **HX).status_code == 200

    refused = _post(tab_b, edit_url, opened_b | {"effort": "15", "value": "27"}, **HX)
    assert refused.status_code == 409
    root = parse_html(refused.text)
    assert root.by_id(f"value-{rid}").get("value") == "27"  # this tab's value is kept
    note = root.by_id(f"conflict-{rid}").text()
    assert "You and editor both changed value: yours 27, stored 26" in note

    assert _post(tab_b, edit_url, _row_fields(root, rid), **HX).status_code == 200
    assert _stored(session, rid) == (15, 27)


def test_inline_row_without_script_merges_too(
    tabs: tuple[TestClient, TestClient], session: Session, plan_row: tuple[str, str, int]
) -> None:
    """A plain form post gets the whole page back with the same merged row."""
    tab_a, tab_b = tabs
    page_url, edit_url, rid = plan_row
    opened_a, opened_b = _open_row(tab_a, page_url, rid), _open_row(tab_b, page_url, rid)
    assert _post(tab_a, edit_url, opened_a | {"state": "pinned"}).status_code == 303
    refused = _post(tab_b, edit_url, opened_b | {"value": "30"})
    assert refused.status_code == 409
    root = parse_html(refused.text)
    assert _row_fields(root, rid)["state"] == "pinned"
    assert _post(tab_b, edit_url, _row_fields(root, rid)).status_code == 303
    session.expire_all()
    row = get_initiative(session, initiative_id=rid).row
    assert (row.state, row.value) == ("pinned", 30)


# --- the initiative edit page -------------------------------------------------------------


def test_edit_page_save_again_keeps_the_colleagues_value(
    tabs: tuple[TestClient, TestClient], session: Session, plan_row: tuple[str, str, int]
) -> None:
    tab_a, tab_b = tabs
    _, _, rid = plan_row
    url = f"/initiatives/{rid}"

    def opened(tab: TestClient) -> Fields:
        return submitted(Form(parse(tab.get(f"{url}/edit").text), url))

    opened_a, opened_b = opened(tab_a), opened(tab_b)
    assert _post(tab_a, url, opened_a | {"value": "26", "notes": "by A"}).status_code == 303

    refused = _post(tab_b, url, opened_b | {"effort.likely": "15", "notes": "by B"})
    assert refused.status_code == 409
    form = Form(parse(refused.text), url)
    assert form.value("effort.likely") == "15"
    assert form.value("value") == "26"
    assert form.value("notes") == "by B"
    note = parse(refused.text).find(cls="conflict-note").text()
    assert "Kept as you typed: notes, likely effort." in note
    assert "Refreshed to the stored value: value." in note
    assert "You and editor both changed notes: yours by B, stored by A" in note

    assert _post(tab_b, url, submitted(form)).status_code == 303
    session.expire_all()
    record = get_initiative(session, initiative_id=rid)
    assert (record.own_effort.likely, record.row.value, record.row.notes) == (15, 26, "by B")


# --- the team page: capacity settings, members, days off, team settings ----------------------


@pytest.fixture
def team_page(session: Session) -> tuple[int, int, int]:
    team = make_team(session)
    period = make_period(session)
    member = make_member(session, team, "Kari", 0.5)
    return team.id or 0, period.id or 0, member.id or 0


def _team_form(tab: TestClient, team_id: int, period_id: int, action: str, **having: str) -> Form:
    response = tab.get(f"/teams/{team_id}?period_id={period_id}")
    assert response.status_code == 200
    return Form(parse(response.text), action, **having)


def test_capacity_settings_save_again_keeps_the_colleagues_focus_factor(
    tabs: tuple[TestClient, TestClient], session: Session, team_page: tuple[int, int, int]
) -> None:
    tab_a, tab_b = tabs
    team_id, period_id, _ = team_page
    url = f"/teams/{team_id}/capacity"
    opened_a = submitted(_team_form(tab_a, team_id, period_id, url))
    opened_b = submitted(_team_form(tab_b, team_id, period_id, url))
    assert opened_b["focus_factor"] == "0.7"
    assert _post(tab_a, url, opened_a | {"focus_factor": "0.65"}).status_code == 303

    refused = _post(tab_b, url, opened_b | {"reserve_pct": "20"})
    assert refused.status_code == 409
    form = Form(parse(refused.text), url)
    assert (form.value("focus_factor"), form.value("reserve_pct")) == ("0.65", "20")
    message = " ".join(form.errors())
    assert "Kept as you typed: reserve." in message
    assert "Refreshed to the stored value: focus factor." in message

    assert _post(tab_b, url, submitted(form)).status_code == 303
    session.expire_all()
    row = session.exec(select(CapacitySettings).where(CapacitySettings.team_id == team_id)).one()
    assert (row.focus_factor, row.reserve_pct) == (0.65, 20)


def test_capacity_settings_name_a_field_both_changed(
    tabs: tuple[TestClient, TestClient], session: Session, team_page: tuple[int, int, int]
) -> None:
    tab_a, tab_b = tabs
    team_id, period_id, _ = team_page
    url = f"/teams/{team_id}/capacity"
    opened_a = submitted(_team_form(tab_a, team_id, period_id, url))
    opened_b = submitted(_team_form(tab_b, team_id, period_id, url))
    assert _post(tab_a, url, opened_a | {"focus_factor": "0.65"}).status_code == 303
    refused = _post(tab_b, url, opened_b | {"focus_factor": "0.8"})
    assert refused.status_code == 409
    form = Form(parse(refused.text), url)
    assert form.value("focus_factor") == "0.8"
    message = " ".join(form.errors())
    assert "You and editor both changed focus factor: yours 0.8, stored 0.65" in message


def test_member_days_off_and_team_settings_merge_too(
    tabs: tuple[TestClient, TestClient], session: Session, team_page: tuple[int, int, int]
) -> None:
    tab_a, tab_b = tabs
    team_id, period_id, member_id = team_page
    member_url = f"/teams/{team_id}/members/{member_id}"
    team_url = f"/teams/{team_id}/settings"
    days_url = f"/teams/{team_id}/availability"
    having = {"member_id": str(member_id)}
    for url, first, second, refreshed in (
        (member_url, {"name": "Kari N."}, {"share": "80"}, ("name", "Kari N.")),
        (team_url, {"spread_pct": "10"}, {"name": "Harbour Ops"}, ("spread_pct", "10")),
        (days_url, {"share": "40"}, {"days_off": "3"}, ("share", "40")),
    ):
        kwargs = having if url == days_url else {}
        opened_a = submitted(_team_form(tab_a, team_id, period_id, url, **kwargs))
        opened_b = submitted(_team_form(tab_b, team_id, period_id, url, **kwargs))
        assert _post(tab_a, url, opened_a | first).status_code == 303, url
        refused = _post(tab_b, url, opened_b | second)
        assert refused.status_code == 409, url
        form = Form(parse(refused.text), url, **kwargs)
        name, value = refreshed
        assert form.value(name) == value, url
        assert _post(tab_b, url, submitted(form)).status_code == 303, url
    session.expire_all()
    member = session.get(Member, member_id)
    assert member is not None
    assert (member.name, member.allocation) == ("Kari N.", 0.8)
    page = parse(tab_b.get(f"/teams/{team_id}?period_id={period_id}").text)
    assert page.find("h1").text() == "Harbour Ops"
    team_form = Form(page, team_url)
    assert team_form.value("spread_pct") == "10"
    days = Form(page, days_url, **having)
    assert (days.value("days_off"), days.value("share")) == ("3", "40")


# --- periods and scenarios ---------------------------------------------------------------


def test_period_save_again_keeps_the_colleagues_dates(
    tabs: tuple[TestClient, TestClient], session: Session, team_page: tuple[int, int, int]
) -> None:
    tab_a, tab_b = tabs
    _, period_id, _ = team_page
    url = f"/periods/{period_id}"

    def opened(tab: TestClient) -> Fields:
        return submitted(Form(parse(tab.get(f"{url}/edit").text), url))

    opened_a, opened_b = opened(tab_a), opened(tab_b)
    assert _post(tab_a, url, opened_a | {"end_date": "2027-03-19"}).status_code == 303
    refused = _post(tab_b, url, opened_b | {"name": "Sprint one"})
    assert refused.status_code == 409
    form = Form(parse(refused.text), url)
    assert (form.value("name"), form.value("end_date")) == ("Sprint one", "2027-03-19")
    assert _post(tab_b, url, submitted(form)).status_code == 303
    session.expire_all()
    period = session.get(Period, period_id)
    assert period is not None
    assert (period.name, period.end_date.isoformat()) == ("Sprint one", "2027-03-19")


def test_scenario_save_again_keeps_the_colleagues_focus_factor(
    tabs: tuple[TestClient, TestClient], session: Session, team_page: tuple[int, int, int]
) -> None:
    """Before, the focus-factor field came back empty while 0.8 was stored."""
    tab_a, tab_b = tabs
    team_id, period_id, _ = team_page
    scenario = create_scenario(
        session, team_id=team_id, period_id=period_id, name="Lean", changes={}
    )
    url = f"/scenarios/{scenario.id}"

    def opened(tab: TestClient) -> Fields:
        return submitted(Form(parse(tab.get(url).text), url))

    opened_a, opened_b = opened(tab_a), opened(tab_b)
    assert opened_b["focus_factor"] == ""
    assert _post(tab_a, url, opened_a | {"focus_factor": "0.8"}).status_code == 303

    refused = _post(tab_b, url, opened_b | {"name": "Lean and late", "reserve_pct": "25"})
    assert refused.status_code == 409
    form = Form(parse(refused.text), url)
    assert form.value("focus_factor") == "0.8"
    assert (form.value("name"), form.value("reserve_pct")) == ("Lean and late", "25")
    message = " ".join(form.errors())
    assert "Kept as you typed: name, reserve." in message
    assert "Refreshed to the stored value: focus factor." in message

    assert _post(tab_b, url, submitted(form)).status_code == 303
    session.expire_all()
    stored = session.get(Scenario, scenario.id)
    assert stored is not None
    assert stored.name == "Lean and late"
    assert stored.changes.get("focus_factor") == 0.8
    assert stored.changes.get("reserve_pct") == 25


def test_a_typing_mistake_keeps_the_form_based_on_what_it_showed(
    tabs: tuple[TestClient, TestClient], session: Session, team_page: tuple[int, int, int]
) -> None:
    """A saves a focus factor; B, on the page as it was, types a bad reserve and is refused
    as typed (422). The re-shown form is still based on what B first saw, so B's corrected
    save is refused too and merged, instead of putting the old focus factor back unseen."""
    tab_a, tab_b = tabs
    team_id, period_id, _ = team_page
    url = f"/teams/{team_id}/capacity"
    opened_a = submitted(_team_form(tab_a, team_id, period_id, url))
    opened_b = submitted(_team_form(tab_b, team_id, period_id, url))
    assert _post(tab_a, url, opened_a | {"focus_factor": "0.65"}).status_code == 303

    mistake = _post(tab_b, url, opened_b | {"reserve_pct": "lots"})
    assert mistake.status_code == 422
    form = Form(parse(mistake.text), url)
    assert form.value("focus_factor") == "0.7"  # as typed: the page B is looking at
    refused = _post(tab_b, url, submitted(form) | {"reserve_pct": "20"})
    assert refused.status_code == 409
    form = Form(parse(refused.text), url)
    assert (form.value("focus_factor"), form.value("reserve_pct")) == ("0.65", "20")
    assert _post(tab_b, url, submitted(form)).status_code == 303
    session.expire_all()
    row = session.exec(select(CapacitySettings).where(CapacitySettings.team_id == team_id)).one()
    assert (row.focus_factor, row.reserve_pct) == (0.65, 20)


def test_a_typing_mistake_on_the_plan_row_keeps_what_it_showed(
    tabs: tuple[TestClient, TestClient], session: Session, plan_row: tuple[str, str, int]
) -> None:
    tab_a, tab_b = tabs
    page_url, edit_url, rid = plan_row
    opened_a, opened_b = _open_row(tab_a, page_url, rid), _open_row(tab_b, page_url, rid)
    assert _post(tab_a, edit_url, opened_a | {"value": "26"}, **HX).status_code == 200
    mistake = _post(tab_b, edit_url, opened_b | {"effort": "soon"}, **HX)
    assert mistake.status_code == 422
    fields = _row_fields(parse_html(mistake.text), rid)
    assert (fields["version"], fields["shown_value"]) == ("1", "25")
    refused = _post(tab_b, edit_url, fields | {"effort": "15"}, **HX)
    assert refused.status_code == 409
    assert (
        _post(tab_b, edit_url, _row_fields(parse_html(refused.text), rid), **HX).status_code == 200
    )
    assert _stored(session, rid) == (15, 26)


# --- the merge rule itself ---------------------------------------------------------------


def test_merge_rule_field_by_field() -> None:
    shown = {"shown_a": "1", "shown_b": "x", "shown_c": "5", "shown_needs": "3,4", "shown_d": "2"}
    typed = {"a": "1.0", "b": "y", "c": "6", "needs": ["4", "3"], "d": "7", "e": "typed"}
    stored = {"a": "2", "b": "x", "c": "8", "needs": ["3"], "d": "7", "e": "stored"}
    merged = merge_after_conflict(shown, typed, stored, {"c": "value"})
    # a: typed as shown (1.0 is 1) -> stored; b: changed here only; c: changed by both;
    # needs: untouched here (order aside) -> stored; d: both set it to 7 (no clash);
    # e: no shown value sent (an older page) -> kept as typed, not named.
    assert merged.values == typed | {"a": "2", "needs": ["3"]}
    assert merged.kept == ("b", "value", "d")
    assert merged.refreshed == ("a", "needs")
    assert merged.both == (BothChanged("value", "6", "8"),)
    assert merged.note("Ines").endswith(
        "You and Ines both changed value: yours 6, stored 8; yours is kept."
    )
