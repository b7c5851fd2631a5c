"""Errors in the browser: a row deleted elsewhere, and refused forms that start at their
problem for the keyboard."""

from __future__ import annotations

import re

import pytest
from playwright.sync_api import Page, expect
from sqlmodel import Session

from server.db import make_engine
from server.schemas import InitiativeUpdate
from server.store.initiatives import delete_initiatives, get_initiative, update_initiative
from tests.browser.conftest import LiveServer
from tests.browser.flows import quick_add, row_id, screenshot, set_up_team

pytestmark = pytest.mark.browser


@pytest.mark.browser
def test_saving_a_row_deleted_elsewhere_keeps_the_plan(
    app_page: Page, live_server: LiveServer
) -> None:
    page = app_page
    team_id, _, _ = set_up_team(page, live_server.url)
    quick_add(page, "Mooring posts", "4", "20")
    quick_add(page, "Fog horn", "3", "12")
    posts, horn = row_id(page, "Mooring posts"), row_id(page, "Fog horn")
    plan_address = page.url
    engine = make_engine(live_server.settings)
    with Session(engine) as session:  # another tab, another person
        delete_initiatives(session, initiative_ids=[posts])
    engine.dispose()
    effort = page.locator(f"#effort-{posts}")
    effort.fill("6")
    effort.press("Tab")
    gone = page.locator(f"#row-{posts}-gone")
    expect(gone).to_contain_text("“Mooring posts” was deleted by someone else; see Changes.")
    expect(gone.get_by_role("link", name="Changes")).to_have_attribute(
        "href", f"/audit?team_id={team_id}"
    )
    expect(gone).to_be_focused()
    # The rest of the plan is as it was: one layout, the table, the other row's fields.
    expect(page.locator("header.masthead")).to_have_count(1)
    expect(page.locator("footer.colophon")).to_have_count(1)
    expect(page.locator("#plan table.plan-table")).to_have_count(1)
    expect(page.locator(f"#effort-{horn}")).to_be_editable()
    assert page.url == plan_address
    screenshot(page, "plan-row-deleted-elsewhere")
    # The other row still saves, and a reload shows the plan without the deleted row.
    page.locator(f"#value-{horn}").fill("15")
    page.locator(f"#value-{horn}").press("Enter")
    expect(page.locator(f"#value-{horn}")).to_have_value("15")
    page.reload()
    expect(page.locator(f"#effort-{horn}")).to_be_visible()
    expect(page.locator(f"#row-{posts}")).to_have_count(0)
    # The post-only address itself, opened by hand, leads to the plan.
    page.goto(f"{live_server.url}/teams/{team_id}/plan/initiatives/{posts}")
    expect(page).to_have_url(re.compile(rf"/teams/{team_id}/plan\?period_id=\d+$"))
    expect(page.locator("#plan")).to_have_count(1)


@pytest.mark.browser
def test_a_refused_edit_starts_at_the_error_summary(
    app_page: Page, live_server: LiveServer
) -> None:
    page = app_page
    set_up_team(page, live_server.url)
    quick_add(page, "Slip survey", "2", "8")
    quick_add(page, "Slip repair", "5", "30")
    survey, repair = row_id(page, "Slip survey"), row_id(page, "Slip repair")
    engine = make_engine(live_server.settings)
    with Session(engine) as session:  # the repair needs the survey
        version = get_initiative(session, initiative_id=repair).row.version
        update_initiative(
            session,
            initiative_id=repair,
            initiative_in=InitiativeUpdate(version=version, needs=[survey]),
        )
    engine.dispose()
    page.goto(f"{live_server.url}/initiatives/{survey}/edit")
    needs = page.get_by_role("group", name="Needs")
    needs.get_by_role("checkbox", name=re.compile(r"^Slip repair ")).check()
    page.get_by_role("button", name="Save changes").click()
    summary = page.locator("#error-summary")
    expect(summary).to_be_focused()
    expect(summary).to_contain_text("needs cycle")
    screenshot(page, "initiative-edit-error-summary")
    summary.get_by_role("link").first.click()
    expect(page.locator("#f-needs")).to_be_focused()
    # The tick is kept for the next try.
    expect(needs.get_by_role("checkbox", name=re.compile(r"^Slip repair "))).to_be_checked()


@pytest.mark.browser
def test_a_refused_curve_step_keeps_its_value_and_the_focus(
    app_page: Page, live_server: LiveServer
) -> None:
    page = app_page
    set_up_team(page, live_server.url)
    quick_add(page, "Lamp posts", "2", "8")
    address = page.url
    for typed in ("-5", "0", "1000000", "NaN"):
        page.goto(f"{address}&delta={typed}")
        field = page.locator("#delta-days")
        expect(field).to_have_value(typed)
        expect(field).to_have_attribute("aria-invalid", "true")
        expect(field).to_be_focused()


@pytest.mark.browser
def test_a_refused_scenario_starts_at_its_summary_and_links_to_the_field(
    app_page: Page, live_server: LiveServer
) -> None:
    page = app_page
    team_id, _, _ = set_up_team(page, live_server.url)
    period_id = re.search(r"period_id=(\d+)", page.url).group(1)  # type: ignore[union-attr]
    page.goto(f"{live_server.url}/teams/{team_id}/scenarios?period_id={period_id}")
    form = page.locator(f"form[action='/teams/{team_id}/scenarios']")
    form.get_by_label("Scenario name").fill("Long leave")
    days_off = form.locator("input[name^='days_off.']").first
    days_off.fill("999")
    form.get_by_role("button", name="Make and solve scenario").click()
    summary = page.locator("#error-summary")
    expect(summary).to_be_focused()
    expect(summary).to_contain_text("days off")
    expect(form.get_by_label("Scenario name")).to_have_value("Long leave")
    screenshot(page, "scenario-error-summary")
    summary.get_by_role("link").first.click()
    expect(form.locator("input[name^='days_off.']").first).to_be_focused()
    expect(form.locator("input[name^='days_off.']").first).to_have_value("999")


@pytest.mark.browser
def test_a_title_without_spaces_does_not_push_the_pages_sideways(
    app_page: Page, live_server: LiveServer
) -> None:
    # Reported: a 200-character title made the initiatives page 4,454 px wide.
    page = app_page
    page.set_viewport_size({"width": 1280, "height": 900})
    team_id, _, _ = set_up_team(page, live_server.url)
    long_title = "Breakwater" * 20
    quick_add(page, long_title, "2", "5")
    plan_address = page.url
    period_id = re.search(r"period_id=(\d+)", plan_address).group(1)  # type: ignore[union-attr]
    listing = f"{live_server.url}/teams/{team_id}/initiatives?period={period_id}"
    for address in (plan_address, listing):
        page.goto(address)
        assert long_title in page.content()
        width = page.evaluate("document.documentElement.scrollWidth")
        assert width <= 1280, (address, width)
