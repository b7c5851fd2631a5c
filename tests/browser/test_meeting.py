"""A planning meeting in the browser: set up, type rows, paste rows, force, fix a bad effort."""

from __future__ import annotations

import re
from typing import Any
from urllib.parse import parse_qs

import pytest
from playwright.sync_api import Browser, Page, Request, Response, Route, expect

from tests.browser.conftest import WAIT_MS, LiveServer, sign_in
from tests.browser.flows import (
    add_team,
    broken_button_words,
    decision,
    quick_add,
    row_id,
    screenshot,
    set_up_team,
    unique,
)

pytestmark = pytest.mark.browser

PASTED = "\n".join(
    [
        "Title\tEffort\tValue\tState",
        "Pier lights\t2\t14\t",
        "Quay survey\t3/5/9\t22\t",
        "Harbour app login\t4\t30\tpinned",
        "Crane audit\t6\t18\t",
        "Berth booking\t2/4/6\t26\t",
        "Tide table import\t1\t6\truled out",
    ]
)


def _gangway_and_buoy(page: Page, live_server: LiveServer) -> tuple[int, int]:
    """A new team with two initiatives, 5 days / 30 and 8 days / 42; their row ids."""
    set_up_team(page, live_server.url)
    quick_add(page, "Gangway repair", "5", "30")
    quick_add(page, "Buoy sensors", "8", "42")
    return row_id(page, "Gangway repair"), row_id(page, "Buoy sensors")


def _number(page: Page, element_id: str) -> float:
    return float(page.locator(f"#{element_id}").get_attribute("value") or "nan")


ROW_SAVE = re.compile(r"/plan/initiatives/(\d+)$")


class RowSaves:
    """Every save of a plan row the page sends: which row, what it carried, how it was answered."""

    def __init__(self, page: Page) -> None:
        self.sent: list[tuple[int, dict[str, str]]] = []
        self.statuses: list[int] = []
        page.on("request", self._request)
        page.on("response", self._response)

    def _request(self, request: Request) -> None:
        found = ROW_SAVE.search(request.url)
        if found and request.method == "POST":
            form = {k: v[0] for k, v in parse_qs(request.post_data or "").items()}
            self.sent.append((int(found.group(1)), form))

    def _response(self, response: Response) -> None:
        if ROW_SAVE.search(response.url) and response.request.method == "POST":
            self.statuses.append(response.status)

    def values(self, name: str) -> list[tuple[int, str]]:
        return [(row, form.get(name, "")) for row, form in self.sent]


@pytest.mark.browser
def test_type_paste_and_watch_the_plan(app_page: Page, live_server: LiveServer) -> None:
    page = app_page
    team_id, _, _ = set_up_team(page, live_server.url)
    screenshot(page, "plan-empty")
    for title, effort, value in [
        ("Gangway repair", "5", "30"),
        ("Buoy sensors", "8", "42"),
        ("Fuel dock permits", "3", "12"),
        ("Crew rota tool", "9", "35"),
        ("Ferry timetable feed", "4", "25"),
        ("Storm shutters", "7", "20"),
    ]:
        quick_add(page, title, effort, value)
    value_typed = _number(page, "total-value")
    curve_typed = page.locator("#curve-desc").text_content()

    page.locator("#paste-text").fill(PASTED)
    page.get_by_role("button", name="Preview").click()
    expect(page.locator("#paste-preview")).to_contain_text("6 rows ready")
    screenshot(page, "paste-preview")
    page.get_by_role("button", name="Add these 6 initiatives").click()
    expect(page.locator("#notice")).to_have_text("Added 6 initiatives from the pasted rows.")
    assert _number(page, "total-value") != value_typed
    assert page.locator("#curve-desc").text_content() != curve_typed
    pinned = row_id(page, "Harbour app login")
    assert decision(page, pinned) == "in"
    assert page.locator(f"#state-{pinned}").input_value() == "pinned"
    assert decision(page, row_id(page, "Tide table import")) == "out"
    expect(page.locator("#readout-plus")).to_contain_text("more days would")
    screenshot(page, "plan-after-paste")
    assert page.url.startswith(f"{live_server.url}/teams/{team_id}/plan")


@pytest.mark.browser
def test_force_in_from_the_explanation(app_page: Page, live_server: LiveServer) -> None:
    page = app_page
    set_up_team(page, live_server.url)
    rows = [("Big rebuild", "14", "30"), ("Small fix", "2", "10"), ("Medium job", "8", "40")]
    for title, effort, value in rows:
        quick_add(page, title, effort, value)
    big = row_id(page, "Big rebuild")
    assert decision(page, big) == "out"
    page.locator(f"#why-{big} summary").click()
    figure = page.locator(f"#explain-{big} data.value-if-in")
    expected = float(figure.get_attribute("value") or "nan")
    page.locator(f"#explain-{big}").get_by_role("link", name="Force in").click()
    expect(page).to_have_url(re.compile(rf"force_in={big}"))
    expect(page.locator(f"#row-{big} td.decision .mark")).to_have_text("In")
    assert _number(page, "total-value") == pytest.approx(expected)
    expect(page.locator(".whatif")).to_contain_text("Forced in: “Big rebuild”")
    screenshot(page, "plan-what-if")
    page.get_by_role("link", name="Clear the what-if").click()
    expect(page.locator(f"#row-{big} td.decision .mark")).to_have_text("Out")


@pytest.mark.browser
def test_bad_effort_is_refused_beside_the_field(app_page: Page, live_server: LiveServer) -> None:
    page = app_page
    gangway, _ = _gangway_and_buoy(page, live_server)
    effort = page.locator(f"#effort-{gangway}")
    for bad, message in (("abc", "Enter a number of days, or low/likely/high"), ("-2", "above 0")):
        effort = page.locator(f"#effort-{gangway}")
        effort.fill(bad)
        effort.press("Tab")
        error = page.locator(f"#effort-{gangway}-error")
        expect(error).to_contain_text(message)
        expect(page.locator(f"#effort-{gangway}")).to_have_value(bad)
        expect(page.locator(f"#effort-{gangway}")).to_have_attribute("aria-invalid", "true")
        expect(page.locator(f"#effort-{gangway}")).to_be_focused()
    screenshot(page, "plan-bad-effort")
    # A good value: stored, re-solved, and the keyboard moves on to the next field as usual.
    effort = page.locator(f"#effort-{gangway}")
    effort.fill("6")
    effort.press("Tab")
    expect(page.locator(f"#effort-{gangway}-error")).to_have_count(0)
    expect(page.locator(f"#effort-{gangway}")).to_have_value("6")
    expect(page.locator(f"#value-{gangway}")).to_be_focused()
    assert float(page.locator("#total-effort").get_attribute("value") or 0) == pytest.approx(14)


@pytest.mark.browser
def test_quick_add_refuses_bad_effort(app_page: Page, live_server: LiveServer) -> None:
    page = app_page
    set_up_team(page, live_server.url)
    page.locator("#quick-title").fill("Harbour wall")
    page.locator("#quick-effort").fill("-2")
    page.locator("#quick-value").fill("10")
    page.locator("#quick-value").press("Enter")
    expect(page.locator("#quick-effort-error")).to_contain_text("above 0")
    expect(page.locator("#quick-title")).to_have_value("Harbour wall")
    expect(page.locator("#quick-effort")).to_be_focused()


@pytest.mark.browser
def test_reading_and_editing_without_javascript(
    browser: Browser, live_server: LiveServer, watch: Any
) -> None:
    context = browser.new_context(java_script_enabled=False)
    sign_in(context, live_server)
    page = context.new_page()
    watch(page)
    page.set_default_timeout(WAIT_MS)
    set_up_team(page, live_server.url)
    page.locator("#quick-title").fill("Slipway")
    page.locator("#quick-effort").fill("3")
    page.locator("#quick-value").fill("9")
    page.get_by_role("button", name="Add", exact=True).click()
    expect(page.locator(".title-text", has_text="Slipway")).to_be_visible()
    slipway = row_id(page, "Slipway")
    page.locator(f"#value-{slipway}").fill("12")
    page.locator(f"#save-{slipway}").click()
    expect(page.locator(f"#value-{slipway}")).to_have_value("12")
    page.locator(f"#why-{slipway} summary").click()  # <details> opens without scripts
    expect(page.locator(f"#explain-{slipway} .reason")).to_be_visible()
    screenshot(page, "plan-no-javascript")
    context.close()


@pytest.mark.browser
def test_main_pages_of_the_demo(app_page: Page, live_server: LiveServer) -> None:
    page = app_page
    page.goto(live_server.url + "/")
    screenshot(page, "home")
    page.get_by_role("link", name="Journey Planner", exact=True).click()
    screenshot(page, "team")
    page.get_by_role("link", name=re.compile(r"^Plan for ")).click()
    expect(page.locator("#total-value")).to_be_visible()
    screenshot(page, "plan-demo")
    page.get_by_label("Efforts planned at").select_option("80")
    expect(page.locator("#confidence-cost")).to_contain_text("Planning at P80 gives up")
    expect(page).to_have_url(re.compile(r"confidence=80"))
    screenshot(page, "plan-demo-p80")
    page.get_by_role("link", name=re.compile(r"overview$")).click()
    expect(page.get_by_role("heading", name=re.compile("Work that spans teams"))).to_be_visible()
    expect(page.locator("#joint-value")).to_be_visible()
    screenshot(page, "overview")


@pytest.mark.browser
def test_enter_saves_a_row_once(app_page: Page, live_server: LiveServer) -> None:
    page = app_page
    set_up_team(page, live_server.url)
    quick_add(page, "Gangway repair", "5", "30")
    gangway = row_id(page, "Gangway repair")
    saves = RowSaves(page)
    value = page.locator(f"#value-{gangway}")
    value.fill("31")
    value.press("Enter")
    expect(page.locator("#total-value")).to_have_attribute("value", "31.0")
    expect(page.locator(f"#value-{gangway}")).to_be_focused()
    page.locator(f"#value-{gangway}").fill("32")
    page.locator(f"#value-{gangway}").press("Enter")
    expect(page.locator("#total-value")).to_have_attribute("value", "32.0")
    expect(page.locator(".conflict")).to_have_count(0)
    expect(page.locator(f"#value-{gangway}")).to_have_value("32")
    expect(page.locator(f"#value-{gangway}")).to_be_focused()
    assert saves.statuses == [200, 200]  # one request per Enter, never a clash with itself
    assert saves.values("value") == [(gangway, "31"), (gangway, "32")]
    # The second save was built from the answer to the first: the version it carries is newer.
    (_, first), (_, second) = saves.values("version")
    assert int(second) == int(first) + 1


@pytest.mark.browser
def test_typing_while_a_save_is_on_its_way(app_page: Page, live_server: LiveServer) -> None:
    """Nothing typed while the plan is re-solved is lost, and each change is saved once."""
    page = app_page
    gangway, buoy = _gangway_and_buoy(page, live_server)
    expect(page.locator("#total-value")).to_have_attribute("value", "72.0")
    saves = RowSaves(page)
    # Hold the first save's answer until the typing below is done (Playwright's Route: a
    # request routed to a handler waits until it is continued).
    held: list[Route] = []

    def hold(route: Route) -> None:
        held.append(route)

    page.route(f"**/plan/initiatives/{gangway}", hold)
    page.locator(f"#value-{gangway}").fill("31")
    page.locator(f"#value-{gangway}").press("Enter")
    page.locator(f"#value-{buoy}").fill("50")
    page.locator(f"#value-{buoy}").press("Tab")  # left: saved once the plan has settled
    page.locator(f"#value-{gangway}").fill("32")  # typed after its row's save was sent
    assert len(held) == 1, "the first save is held, not answered"
    held[0].continue_()
    page.unroute(f"**/plan/initiatives/{gangway}")
    expect(page.locator("#total-value")).to_have_attribute("value", "81.0")  # 31 + 50
    expect(page.locator(f"#value-{buoy}")).to_have_value("50")
    expect(page.locator(f"#value-{gangway}")).to_have_value("32")
    expect(page.locator(f"#value-{gangway}")).to_be_focused()
    page.locator(f"#value-{gangway}").press("Enter")
    expect(page.locator("#total-value")).to_have_attribute("value", "82.0")  # 32 + 50
    expect(page.locator(".conflict")).to_have_count(0)
    assert saves.statuses == [200, 200, 200]
    assert saves.values("value") == [(gangway, "31"), (buoy, "50"), (gangway, "32")]


@pytest.mark.browser
def test_large_plan_explains_a_row_when_opened(app_page: Page, live_server: LiveServer) -> None:
    page = app_page
    set_up_team(page, live_server.url)
    rows = "\n".join(f"Task {k}\t{k % 5 + 1}\t{k % 9 + 2}" for k in range(65))
    page.locator("#paste-text").fill(rows)
    page.get_by_role("button", name="Preview").click()
    page.get_by_role("button", name="Add these 65 initiatives").click()
    expect(page.locator("#notice")).to_contain_text("Added 65 initiatives")
    task = row_id(page, "Task 7")
    expect(page.locator(f"#why-{task} .explain-link")).to_have_count(1)
    page.locator(f"#why-{task} summary").click()
    expect(page.locator(f"#explain-{task} .reason")).to_be_visible()
    expect(page.locator(f"#explain-{task} data.value-if-in")).to_have_count(1)
    screenshot(page, "plan-large-explained")


@pytest.mark.browser
def test_long_unbroken_names_do_not_widen_the_page(app_page: Page, live_server: LiveServer) -> None:
    """A pasted link as a title, a long team name: the page wraps them instead of scrolling."""
    page = app_page
    set_up_team(page, live_server.url)
    quick_add(page, "Harbour" + "x" * 180, "2", "5")
    overflow = "document.documentElement.scrollWidth - window.innerWidth"
    assert page.evaluate(overflow) <= 0
    add_team(page, live_server.url, unique("T" * 70))
    page.goto(live_server.url + "/")
    assert page.evaluate(overflow) <= 0
    screenshot(page, "long-names-home")


@pytest.mark.browser
def test_save_again_after_a_colleagues_change_keeps_both(
    app_page: Page, live_server: LiveServer, watch: Any
) -> None:
    """Two tabs on one plan: A changes the value, B the effort; B's save is refused, the value
    field shows A's value, and saving again stores both changes."""
    tab_a = app_page
    set_up_team(tab_a, live_server.url)
    quick_add(tab_a, "Gangway repair", "12", "25")
    gangway = row_id(tab_a, "Gangway repair")
    tab_b = tab_a.context.new_page()
    watch(tab_b)
    tab_b.goto(tab_a.url)
    expect(tab_b.locator(f"#value-{gangway}")).to_have_value("25")

    tab_a.locator(f"#value-{gangway}").fill("26")
    tab_a.locator(f"#value-{gangway}").press("Enter")
    expect(tab_a.locator("#total-value")).to_have_attribute("value", "26.0")

    tab_b.locator(f"#effort-{gangway}").fill("15")
    tab_b.locator(f"#effort-{gangway}").press("Tab")
    conflict = tab_b.locator(f"#conflict-{gangway}")
    expect(conflict).to_contain_text("Kept as you typed: effort.")
    expect(conflict).to_contain_text("Refreshed to the stored value: value.")
    expect(tab_b.locator(f"#effort-{gangway}")).to_have_value("15")
    expect(tab_b.locator(f"#value-{gangway}")).to_have_value("26")
    screenshot(tab_b, "save-again-after-a-colleagues-change")
    assert broken_button_words(tab_b) == []  # found in use: "Sav/e" beside the clash box

    tab_b.locator(f"#save-{gangway}").click()
    expect(tab_b.locator(".conflict")).to_have_count(0)
    tab_a.reload()
    expect(tab_a.locator(f"#effort-{gangway}")).to_have_value("15")
    expect(tab_a.locator(f"#value-{gangway}")).to_have_value("26")
    tab_b.close()


@pytest.mark.browser
def test_compare_the_live_plan_and_two_scenarios_without_saving(
    app_page: Page, live_server: LiveServer
) -> None:
    page = app_page
    team_id, _, period = set_up_team(page, live_server.url)
    quick_add(page, "Gangway repair", "5", "30")
    quick_add(page, "Buoy sensors", "8", "42")
    quick_add(page, "Fuel dock permits", "3", "12")
    found = re.search(r"period_id=(\d+)", page.url)
    assert found, page.url
    scenarios = f"{live_server.url}/teams/{team_id}/scenarios?period_id={found.group(1)}"
    for name, capacity in [("Short week", "6"), ("Ample week", "30")]:
        page.goto(scenarios)
        page.get_by_label("Scenario name").fill(name)
        page.get_by_label("Capacity (days)").fill(capacity)
        page.get_by_role("button", name="Make and solve scenario").click()
        expect(page.get_by_role("heading", name=f"Scenario: {name}")).to_be_visible()
    page.goto(scenarios)
    page.get_by_label("Live plan").check()
    page.get_by_label("Compare Short week").check()
    page.get_by_label("Compare Ample week").check()
    page.get_by_role("button", name="Compare ticked").click()
    expect(
        page.get_by_role("heading", name=f"Comparing the live plan and 2 scenarios in {period}")
    ).to_be_visible()
    assert re.search(r"/scenarios/compare\?period_id=\d+&pick=live,\d+,\d+$", page.url)
    screenshot(page, "scenario-comparison")
    figures = page.locator("table.cmp-figures")
    expect(figures).to_contain_text("Capacity: 6 days")
    expect(figures).to_contain_text("Capacity: 30 days")
    # Columns in the list's order (newest scenario first): the ample week takes everything,
    # the short week only what 6 days hold.
    heads = figures.locator("thead th a")
    expect(heads).to_have_text(["Live plan", "Ample week", "Short week"])
    matrix = page.locator("table.cmp-matrix")
    buoy = matrix.locator("tr", has=page.get_by_role("rowheader", name="Buoy sensors"))
    expect(buoy.locator("td")).to_have_text(["in", "in", "out"])
    page.get_by_role("link", name="scenarios", exact=True).click()
    expect(page.get_by_role("checkbox", name="Live plan")).not_to_be_checked()
