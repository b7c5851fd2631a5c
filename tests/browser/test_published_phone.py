"""Pages read on a phone: nothing wider than the screen (published, saved and live plans, the
changes list)."""

from __future__ import annotations

from collections.abc import Iterator
from typing import Any

import pytest
from playwright.sync_api import Browser, Page
from sqlmodel import Session

from server.db import make_engine
from server.planning.scenarios import ScenarioChanges, capture
from server.store import plans as store
from server.store.periods import list_periods
from server.store.teams import list_members, list_teams
from tests.browser.conftest import WAIT_MS, LiveServer, sign_in
from tests.browser.flows import broken_button_words, busiest_team, screenshot

pytestmark = pytest.mark.browser

PHONE = {"width": 390, "height": 844}


@pytest.fixture
def published(live_server: LiveServer) -> Iterator[tuple[int, str]]:
    """A demo team's plan saved from a scenario with more days off, and its published token."""
    engine = make_engine(live_server.settings)
    with Session(engine) as session:
        period = list_periods(session)[0]
        team = max(list_teams(session), key=lambda t: len(list_members(session, team_id=t.id)))
        member = list_members(session, team_id=team.id or 0)[0]
        snapshot = capture(
            session,
            team_id=team.id or 0,
            period_id=period.id or 0,
            changes=ScenarioChanges(days_off={member.id or 0: 3}),
            resolution=live_server.settings.resolution_days,
            scenario_name="Longer absence with a deliberately unbreakable-long-designation",
        )
        db_plan = store.save_plan(
            session, name="Phone check", snapshot=snapshot, scenario_changes={}, actor="meeting"
        )
        token = store.publish_plan(session, plan_id=db_plan.id or 0).token
        yield db_plan.id or 0, token
    engine.dispose()


@pytest.fixture
def phone_page(browser: Browser, live_server: LiveServer, watch: Any) -> Iterator[Page]:
    """A signed-in, watched page on a 390 px screen."""
    context = browser.new_context(viewport=PHONE)
    sign_in(context, live_server)
    page = context.new_page()
    page.set_default_timeout(WAIT_MS)
    watch(page)
    yield page
    context.close()


def _widths(page: Any) -> dict[str, int]:
    return page.evaluate(
        "() => ({scroll: document.documentElement.scrollWidth,"
        " body: document.body.scrollWidth, view: window.innerWidth})"
    )


def test_published_and_saved_plan_pages_fit_a_390_px_screen(
    browser: Browser, live_server: LiveServer, published: tuple[int, str], watch: Any
) -> None:
    plan_id, token = published
    context = browser.new_context(viewport=PHONE)
    try:
        page = context.new_page()
        page.set_default_timeout(WAIT_MS)
        watch(page)
        page.goto(f"{live_server.url}/p/{token}")
        assert page.get_by_role("heading", name="Phone check").is_visible()
        widths = _widths(page)
        screenshot(page, "published-390")
        assert widths["view"] == PHONE["width"]
        assert widths["scroll"] <= widths["view"], widths
        assert widths["body"] <= widths["view"], widths
        # Every column of an initiative row is on the screen, not cut off to its right.
        why = page.locator(".snap-initiatives tbody tr").first.locator("td").last
        box = why.bounding_box()
        assert box is not None
        assert box["x"] + box["width"] <= PHONE["width"] + 0.5, box

        sign_in(context, live_server)
        page.goto(f"{live_server.url}/plans/{plan_id}")
        widths = _widths(page)
        screenshot(page, "saved-plan-390")
        assert widths["scroll"] <= widths["view"], widths
    finally:
        context.close()


def test_the_live_plan_and_the_changes_list_fit_a_390_px_screen(
    phone_page: Page, live_server: LiveServer
) -> None:
    page = phone_page
    engine = make_engine(live_server.settings)
    with Session(engine) as session:
        team_id, period_id = busiest_team(session)
    engine.dispose()
    page.goto(f"{live_server.url}/teams/{team_id}/plan?period_id={period_id}")
    assert page.locator(".plan-row").count() > 0
    widths = _widths(page)
    screenshot(page, "live-plan-390")
    assert widths["scroll"] <= widths["view"], widths
    assert broken_button_words(page) == []  # found in use: "Rea/d" beside the curve
    # Each field of a row is on the screen, labelled by its column's name.
    row = page.locator(".plan-row").first
    for field in ("Effort (days)", "Value", "State"):
        cell = row.locator(f'td[data-label="{field}"]')
        box = cell.bounding_box()
        assert box is not None, field
        assert box["x"] >= 0, (field, box)
        assert box["x"] + box["width"] <= PHONE["width"] + 0.5, (field, box)
    quick = page.locator("#quick-add-button").bounding_box()
    assert quick is not None
    assert quick["x"] + quick["width"] <= PHONE["width"] + 0.5, quick

    page.goto(f"{live_server.url}/audit")
    assert page.locator("table.audit tbody tr").count() > 0
    widths = _widths(page)
    assert widths["scroll"] <= widths["view"], widths


def test_lists_the_overview_and_scenarios_do_not_widen_a_390_px_screen(
    phone_page: Page, live_server: LiveServer, published: tuple[int, str]
) -> None:
    """These scrolled the whole page sideways (720, 923, 621 and 539 px wide): a wide table
    now scrolls inside its own box, and the page stays the screen's width."""
    engine = make_engine(live_server.settings)
    with Session(engine) as session:
        team_id, period_id = busiest_team(session)
        scenario = store.create_scenario(
            session,
            team_id=team_id,
            period_id=period_id,
            name="Phone width check",
            changes=ScenarioChanges().model_dump(mode="json"),
        )
    engine.dispose()
    page = phone_page
    for path in (
        f"/teams/{team_id}/initiatives?period={period_id}",
        "/plans",
        f"/periods/{period_id}/overview",
        f"/teams/{team_id}/scenarios?period_id={period_id}",
        f"/scenarios/{scenario.id}",
    ):
        page.goto(live_server.url + path)
        assert page.locator("main table").count() > 0, path
        widths = _widths(page)
        assert widths["scroll"] <= widths["view"], (path, widths)
        assert widths["body"] <= widths["view"], (path, widths)
        screenshot(page, "phone-" + path.strip("/").split("?")[0].replace("/", "-"))
