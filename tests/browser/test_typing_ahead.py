"""Typing on before the plan's answer comes: the answer must not take the keyboard away.

Found in a meeting: a refused effort's answer put the focus back into the refused field, so
the next keystrokes meant for another row replaced it there; and after Enter in the quick-add
row, the first letters of the next title were lost.
"""

from __future__ import annotations

import re

import pytest
from playwright.sync_api import Page, Route, expect

from tests.browser.conftest import LiveServer
from tests.browser.flows import quick_add, row_id, set_up_team
from tests.browser.test_meeting import RowSaves

pytestmark = pytest.mark.browser


def _held(page: Page, pattern: str) -> list[Route]:
    """Answers to requests matching pattern wait in the list until continued."""
    held: list[Route] = []

    def hold(route: Route) -> None:
        held.append(route)

    page.route(pattern, hold)
    return held


def test_a_refusal_does_not_pull_the_keyboard_back_from_another_row(
    app_page: Page, live_server: LiveServer
) -> None:
    page = app_page
    set_up_team(page, live_server.url)
    quick_add(page, "Gangway repair", "5", "30")
    quick_add(page, "Buoy sensors", "8", "42")
    gangway, buoy = row_id(page, "Gangway repair"), row_id(page, "Buoy sensors")
    held = _held(page, f"**/plan/initiatives/{gangway}")
    page.locator(f"#effort-{gangway}").fill("2d")
    page.locator(f"#effort-{buoy}").click()  # leaving the field sends its row
    page.keyboard.press("ControlOrMeta+a")
    page.keyboard.type("7")
    assert len(held) == 1
    held[0].continue_()
    page.unroute(f"**/plan/initiatives/{gangway}")
    expect(page.locator(f"#row-{gangway}")).to_have_class(re.compile(r"row-refused"))
    expect(page.locator(f"#effort-{buoy}")).to_be_focused()
    page.keyboard.type("5")  # still typing in the row the person is in
    page.keyboard.press("Enter")
    expect(page.locator(f"#effort-{buoy}")).to_have_value("75")
    expect(page.locator(f"#effort-{gangway}")).to_have_value("2d")
    page.reload()
    expect(page.locator(f"#effort-{buoy}")).to_have_value("75")
    expect(page.locator(f"#effort-{gangway}")).to_have_value("5")


def _type_on_before_the_answer(page: Page, *, effort: str, typed: str) -> None:
    """Enter a quick-add row ("Pier lights", effort, 14), type on while its answer is held,
    then let the answer come."""
    held = _held(page, "**/plan/initiatives")
    page.locator("#quick-title").fill("Pier lights")
    page.locator("#quick-effort").fill(effort)
    page.locator("#quick-value").fill("14")
    page.locator("#quick-value").press("Enter")
    page.keyboard.type(typed)
    assert len(held) == 1
    held[0].continue_()
    page.unroute("**/plan/initiatives")


def test_letters_typed_right_after_enter_begin_the_next_title(
    app_page: Page, live_server: LiveServer
) -> None:
    page = app_page
    set_up_team(page, live_server.url)
    _type_on_before_the_answer(page, effort="2", typed="Qu")  # still in the value field
    expect(page.locator("#notice")).to_have_text("Added “Pier lights”.")
    title = page.locator("#quick-title")
    expect(title).to_have_value("Qu")
    expect(title).to_be_focused()
    page.keyboard.type("ay survey")
    expect(title).to_have_value("Quay survey")
    expect(page.locator("#quick-value")).to_have_value("")
    added = page.locator("tr.plan-row", has=page.locator(".title-text", has_text="Pier lights"))
    expect(added.locator("input[name=value]")).to_have_value("14")


def test_a_refused_quick_row_keeps_what_was_typed_after_enter(
    app_page: Page, live_server: LiveServer
) -> None:
    page = app_page
    set_up_team(page, live_server.url)
    _type_on_before_the_answer(page, effort="2d", typed="5")
    expect(page.locator("#quick-add")).to_have_class(re.compile(r"row-refused"))
    expect(page.locator("#quick-title")).to_have_value("Pier lights")
    expect(page.locator("#quick-value")).to_have_value("145")
    expect(page.locator("#quick-effort")).to_have_value("2d")


def test_arrowing_through_a_rows_state_saves_only_where_it_rests(
    app_page: Page, live_server: LiveServer
) -> None:
    """Found in use: from "candidate" to "ruled out" by arrow keys stored "pinned" on the way,
    with a re-plan and an undo entry for each step."""
    page = app_page
    set_up_team(page, live_server.url)
    quick_add(page, "Gangway repair", "5", "30")
    gangway = row_id(page, "Gangway repair")
    saves = RowSaves(page)
    state = page.locator(f"#state-{gangway}")
    state.focus()
    with page.expect_response(lambda r: r.url.endswith(f"/plan/initiatives/{gangway}")):
        page.keyboard.press("ArrowDown")  # pinned
        page.keyboard.press("ArrowDown")  # ruled out
    expect(page.locator(f"#state-{gangway}")).to_have_value("ruled_out")
    expect(page.locator(f"#state-{gangway}")).to_be_focused()
    page.wait_for_timeout(700)  # a late second save would show by now
    assert saves.values("state") == [(gangway, "ruled_out")]
    page.reload()
    expect(page.locator(f"#state-{gangway}")).to_have_value("ruled_out")


def test_leaving_a_rows_state_saves_it_at_once(app_page: Page, live_server: LiveServer) -> None:
    page = app_page
    set_up_team(page, live_server.url)
    quick_add(page, "Gangway repair", "5", "30")
    gangway = row_id(page, "Gangway repair")
    saves = RowSaves(page)
    page.locator(f"#state-{gangway}").focus()
    with page.expect_response(lambda r: r.url.endswith(f"/plan/initiatives/{gangway}")):
        page.keyboard.press("ArrowDown")  # pinned
        page.keyboard.press("Tab")
    expect(page.locator(f"#state-{gangway}")).to_have_value("pinned")
    assert saves.values("state") == [(gangway, "pinned")]


def test_a_jump_link_takes_the_keyboard_past_every_row_to_the_new_row(
    app_page: Page, live_server: LiveServer
) -> None:
    """Found in use: with 47 rows the new-initiative row was about 235 Tab presses away."""
    page = app_page
    set_up_team(page, live_server.url)
    quick_add(page, "Gangway repair", "5", "30")
    page.locator("#plan-crumbs a").last.focus()  # the heading's crumbs: then the jump link
    page.keyboard.press("Tab")
    expect(page.get_by_role("link", name="Add an initiative")).to_be_focused()
    page.keyboard.press("Enter")
    expect(page.locator("#quick-title")).to_be_focused()
    page.keyboard.type("Buoy sensors")
    expect(page.locator("#quick-title")).to_have_value("Buoy sensors")
