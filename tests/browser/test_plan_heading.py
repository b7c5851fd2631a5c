"""The live plan's heading, title and crumbs follow the period the plan shows."""

from __future__ import annotations

import re

import pytest
from playwright.sync_api import Page, expect
from sqlmodel import Session

from server.db import make_engine
from server.store.periods import list_periods
from server.store.teams import get_team
from tests.browser.conftest import LiveServer
from tests.browser.flows import busiest_team

pytestmark = pytest.mark.browser


def test_choosing_another_period_changes_the_heading_and_title_too(
    app_page: Page, live_server: LiveServer
) -> None:
    """htmx swapped only the plan: the heading still named the period chosen before."""
    engine = make_engine(live_server.settings)
    with Session(engine) as session:
        first, second = list_periods(session)[:2]
        team = get_team(session, team_id=busiest_team(session)[0])
        names = (team.name, first.name, second.name, first.id, second.id, team.id)
    engine.dispose()
    team_name, first_name, second_name, first_id, second_id, team_id = names
    page = app_page
    page.goto(f"{live_server.url}/teams/{team_id}/plan?period_id={first_id}")
    heading = page.locator("h1")
    expect(heading).to_have_text(f"Plan for {team_name} in {first_name}")
    page.select_option("#period-pick", str(second_id))
    expect(heading).to_have_text(f"Plan for {team_name} in {second_name}")
    expect(page).to_have_title(f"Plan · {team_name} · {second_name} · Loadline")
    expect(page.locator(".crumbs")).to_contain_text(f"{second_name} overview")
    assert page.locator("h1").count() == 1
    assert page.locator("#plan").count() == 1
    # The live region outside the swapped plan says what the answer shows.
    announce = page.locator("#plan-announce")
    expect(announce).to_have_attribute("role", "status")
    shown = page.locator("#total-value").inner_text()
    expect(announce).to_contain_text(f"Plan value {shown}, headroom ")


def test_after_a_what_if_link_the_focus_stays_with_its_row(
    app_page: Page, live_server: LiveServer
) -> None:
    """The link is gone once the plan is swapped: the focus fell back to the page's body,
    and a keyboard user started again from the top."""
    engine = make_engine(live_server.settings)
    with Session(engine) as session:
        team_id, period_id = busiest_team(session)
    engine.dispose()
    page = app_page
    page.goto(f"{live_server.url}/teams/{team_id}/plan?period_id={period_id}")
    row = page.locator("tr.plan-row.decision-in").first
    row_id = row.get_attribute("id")
    row.locator("details.why summary").click()
    force_out = row.get_by_role("link", name="Force out")
    force_out.focus()
    page.keyboard.press("Enter")
    expect(page.locator(f"#{row_id}")).to_have_class(re.compile(r"decision-out"))
    focused = page.evaluate(
        "() => [document.activeElement.tagName, document.activeElement.closest('tr.plan-row')?.id]"
    )
    assert focused == ["SUMMARY", row_id], focused


def test_arrowing_through_a_select_solves_the_plan_once(
    app_page: Page, live_server: LiveServer
) -> None:
    """Chromium fires change on each arrow key: every option passed re-solved the plan."""
    engine = make_engine(live_server.settings)
    with Session(engine) as session:
        team_id, period_id = busiest_team(session)
    engine.dispose()
    page = app_page
    page.goto(f"{live_server.url}/teams/{team_id}/plan?period_id={period_id}")
    solves: list[str] = []
    page.on(
        "request",
        lambda request: (
            solves.append(request.url)
            if request.method == "GET" and "/plan?" in request.url
            else None
        ),
    )
    page.focus("#confidence-pick")
    with page.expect_response(lambda response: "confidence=90" in response.url):
        for _ in range(3):  # likely -> P50 -> P80 -> P90
            page.keyboard.press("ArrowDown")
    expect(page.locator("#confidence-pick")).to_have_value("90")
    page.wait_for_timeout(600)  # a late second request would show by now
    assert len(solves) == 1, solves
    assert "confidence=90" in solves[0]
