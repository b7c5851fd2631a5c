"""Re-shown forms start at their problems, keep what was typed, and name each field once."""

from __future__ import annotations

from fastapi.testclient import TestClient
from sqlmodel import Session

from tests.conftest import csrf_token
from tests.factories import make_member, set_days_off
from tests.pages.html_tree import parse_html
from tests.pages.test_plan_pages import HX, build, edit_url, post_form, row_fields


def test_the_curve_field_keeps_a_refused_value(form_client: TestClient, session: Session) -> None:
    setup = build(session)
    for typed in ("-5", "0", "1000000", "NaN"):
        response = form_client.get(f"{setup.url}&delta={typed}")
        assert response.status_code == 422
        field = parse_html(response.text).by_id("delta-days")
        assert field.get("value") == typed
        assert field.get("aria-invalid") == "true"


def test_a_bad_query_value_is_named_once(form_client: TestClient) -> None:
    response = form_client.get("/plans?team_id=abc")
    assert response.status_code == 422
    text = " ".join(parse_html(response.text).text().split())
    assert "team id: Enter a number." in text
    assert "team_id: team_id" not in text
    assert "team_id:" not in text


def test_days_off_and_share_beside_their_fields_say_it_once(
    form_client: TestClient, session: Session
) -> None:
    setup = build(session)
    member = make_member(session, setup.team, "Noor")
    set_days_off(session, member, setup.period, 0)
    url = f"/teams/{setup.team.id}/availability"
    base = {"member_id": str(member.id), "period_id": str(setup.period.id)}
    for data, wrong in (
        ({"days_off": "70", "share": ""}, "days off: "),
        ({"days_off": "0", "share": "250"}, "share: "),
    ):
        response = post_form(form_client, url, base | data)
        assert response.status_code in (409, 422), response.text[:300]
        root = parse_html(response.text)
        errors = [p for p in root.find_all("p", cls="field-error") if p.get("id")]
        assert errors, response.text[:500]
        for error in errors:
            assert not error.text().strip().startswith(wrong), error.text()


def test_an_effort_of_two_parts_says_what_is_accepted(
    form_client: TestClient, session: Session
) -> None:
    setup = build(session)
    initiative_id = setup.ids["Audit log"]
    fields = row_fields(session, initiative_id, effort="5/8")
    response = post_form(form_client, edit_url(setup, "Audit log"), fields, **HX)
    assert response.status_code == 422
    error = parse_html(response.text).by_id(f"effort-{initiative_id}-error")
    assert error.text().strip() == "Enter a number of days, or low/likely/high such as 3/5/8."
    quick = post_form(
        form_client,
        f"/teams/{setup.team.id}/plan/initiatives",
        {"title": "Tide gauge", "effort": "5/8", "value": "3", "period_id": str(setup.period.id)},
        **HX,
    )
    assert quick.status_code == 422
    assert "Enter a number of days, or low/likely/high such as 3/5/8." in quick.text


def test_a_refused_period_change_opens_on_an_error_summary(
    form_client: TestClient, session: Session
) -> None:
    setup = build(session)
    response = post_form(
        form_client,
        f"/periods/{setup.period.id}",
        {
            "name": "",
            "kind": "sprint",
            "start_date": "2027-03-12",
            "end_date": "2027-03-01",
            "weekmask": "11111",
            "non_working_dates": "",
        },
    )
    assert response.status_code == 422
    summary = parse_html(response.text).by_id("error-summary")
    assert "autofocus" in summary.attrs
    links = {a.get("href") for a in summary.find_all("a")}
    assert "#f-weekmask" in links
    for href in links:
        assert parse_html(response.text).by_id((href or "#").removeprefix("#")) is not None


def summary_links(text: str) -> dict[str, str]:
    """A page's error summary: autofocus, and every link lands on a field of the page."""
    root = parse_html(text)
    summary = root.by_id("error-summary")
    assert summary is not None, text[:500]
    assert "autofocus" in summary.attrs
    links = {a.get("href") or "": " ".join(a.text().split()) for a in summary.find_all("a")}
    for href in links:
        assert root.by_id(href.removeprefix("#")) is not None, href
    return links


def test_a_refused_save_on_the_team_page_opens_on_an_error_summary(
    form_client: TestClient, session: Session
) -> None:
    # The team page holds five forms; a refused one is re-shown far down the page, so the
    # summary at the top names the problem and links to the field, without any script.
    setup = build(session)
    member = make_member(session, setup.team, "Noor")
    set_days_off(session, member, setup.period, 0)
    team, period = setup.team.id, str(setup.period.id)
    cases = [
        (
            f"/teams/{team}/members",
            {"name": "", "share": "150", "period_id": period},
            {"#f-name", "#f-share"},
        ),
        (
            f"/teams/{team}/members/{member.id}",
            {"name": "Noor", "share": "0", "period_id": period},
            {f"#m{member.id}-f-share"},
        ),
        (
            f"/teams/{team}/settings",
            {"name": "Harbour", "spread_pct": "-3", "period_id": period},
            {"#team-f-spread_pct"},
        ),
        (
            f"/teams/{team}/capacity",
            {"focus_factor": "1.5", "reserve_pct": "100", "period_id": period},
            {"#f-focus_factor", "#f-reserve_pct"},
        ),
        (
            f"/teams/{team}/availability",
            {"member_id": str(member.id), "period_id": period, "days_off": "70", "share": ""},
            {f"#off-{member.id}"},
        ),
    ]
    for url, data, expected in cases:
        response = post_form(form_client, url, data)
        assert response.status_code == 422, (url, response.text[:300])
        links = summary_links(response.text)
        assert expected <= set(links), (url, links)
        heading = parse_html(response.text).by_id("error-summary-h").text()
        assert heading.startswith("Not saved: "), heading
        for typed in data.values():
            assert f'value="{typed}"' in response.text, (url, typed)
    names = summary_links(post_form(form_client, f"/teams/{team}/availability", cases[-1][1]).text)
    assert names[f"#off-{member.id}"].startswith("Noor: days off: ")


def test_a_refused_team_delete_opens_on_a_summary_saying_nothing_was_deleted(
    form_client: TestClient, session: Session
) -> None:
    setup = build(session)  # the team owns initiatives: deleting it needs the second tick
    response = post_form(form_client, f"/teams/{setup.team.id}/delete", {"confirm": "yes"})
    assert response.status_code in (409, 422), response.text[:300]
    root = parse_html(response.text)
    assert root.by_id("error-summary-h").text().startswith("Not deleted: 1 problem")
    assert "initiative" in root.by_id("error-summary").text()


def test_the_team_page_without_a_refusal_has_no_error_summary(
    form_client: TestClient, session: Session
) -> None:
    setup = build(session)
    page = form_client.get(f"/teams/{setup.team.id}?period_id={setup.period.id}")
    assert page.status_code == 200
    assert parse_html(page.text).find(id="error-summary") is None


def test_a_refused_new_team_opens_on_the_summary_of_its_form(form_client: TestClient) -> None:
    response = post_form(form_client, "/teams", {"name": "", "spread_pct": "-4"})
    assert response.status_code == 422
    links = summary_links(response.text)
    assert {"#team-f-name", "#team-f-spread_pct"} <= set(links), links
    assert 'value="-4"' in response.text


def test_a_refused_account_opens_on_a_summary_and_keeps_the_name(
    form_client: TestClient,
) -> None:
    response = post_form(
        form_client, "/users", {"username": "newcomer", "password": "short", "role": "editor"}
    )
    assert response.status_code == 422, response.text[:300]
    assert "#f-password" in summary_links(response.text)
    assert 'value="newcomer"' in response.text
    assert "newcomer" not in form_client.get("/api/v1/users").text


def test_a_refused_sign_in_opens_on_its_summary_not_on_the_name(
    anonymous_client: TestClient,
) -> None:
    page = anonymous_client.get("/login")
    token = csrf_token(anonymous_client, "/login")
    response = anonymous_client.post(
        "/login", data={"username": "editor", "password": "wrong-password", "csrf_token": token}
    )
    assert response.status_code in (401, 422), response.text[:300]
    assert "#f-password" in summary_links(response.text)
    assert "autofocus" not in parse_html(response.text).by_id("f-username").attrs
    assert "autofocus" in parse_html(page.text).by_id("f-username").attrs
