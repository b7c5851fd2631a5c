"""A name as long as the forms allow, with no space in it, must not push controls out of reach."""

from __future__ import annotations

import pytest
from playwright.sync_api import Page
from sqlmodel import Session

from server.db import make_engine
from server.schemas import MemberCreate, TeamCreate
from server.store.periods import list_periods
from server.store.teams import create_member, create_team
from tests.browser.conftest import LiveServer
from tests.browser.flows import screenshot

pytestmark = pytest.mark.browser

LONG_NAME = "W" * 80  # the longest member name the form takes, one unbroken word


def test_a_member_with_the_longest_name_can_still_be_removed(
    app_page: Page, live_server: LiveServer
) -> None:
    """At 1280 px the "Remove …" button ran under the Capacity panel, out of reach."""
    engine = make_engine(live_server.settings)
    with Session(engine) as session:
        team_id = create_team(session, team_in=TeamCreate(name="Long names")).id or 0
        create_member(session, member_in=MemberCreate(team_id=team_id, name=LONG_NAME))
        period_id = list_periods(session)[0].id
    engine.dispose()
    page = app_page
    page.goto(f"{live_server.url}/teams/{team_id}?period_id={period_id}")
    page.locator("details.member-edit summary").first.click()
    remove = page.get_by_role("button", name=f"Remove {LONG_NAME} and their days off")
    remove.scroll_into_view_if_needed()
    box = remove.bounding_box()
    assert box is not None
    # The button is what a click at its centre reaches: nothing lies over it.
    reached = page.evaluate(
        "([x, y]) => document.elementFromPoint(x, y)?.closest('button')?.textContent",
        [box["x"] + box["width"] / 2, box["y"] + box["height"] / 2],
    )
    screenshot(page, "long-member-name")
    assert page.evaluate("() => document.documentElement.scrollWidth <= window.innerWidth")
    assert reached is not None
    assert LONG_NAME in reached
