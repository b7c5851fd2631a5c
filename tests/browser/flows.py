"""Steps a person takes in the browser, shared by the browser tests."""

from __future__ import annotations

import itertools
import re
from pathlib import Path

from playwright.sync_api import Page, expect
from sqlmodel import Session

from server.config import PROJECT_ROOT
from server.store.initiatives import list_initiatives
from server.store.periods import list_periods
from server.store.teams import list_teams

SCREENSHOTS = PROJECT_ROOT / "test-artifacts" / "screenshots"
_names = itertools.count(1)


def screenshot(page: Page, name: str) -> Path:
    """Save a full-page screenshot under test-artifacts/screenshots/."""
    SCREENSHOTS.mkdir(parents=True, exist_ok=True)
    path = SCREENSHOTS / f"{name}.png"
    # caret="initial": hiding the caret leaves empty style attributes on inputs, which htmx
    # then copies on its next swap and the page's CSP (rightly) refuses.
    page.screenshot(path=str(path), full_page=True, caret="initial")
    return path


def unique(prefix: str) -> str:
    """Team and period names are unique in the shared test database."""
    return f"{prefix} {next(_names)}"


def add_period(page: Page, base: str, name: str) -> None:
    page.goto(base + "/")
    form = page.locator("form[action='/periods']")
    form.get_by_label("Name").fill(name)
    form.get_by_label("Kind").select_option("sprint")
    form.get_by_label("First day").fill("2027-03-01")
    form.get_by_label("Last day").fill("2027-03-12")
    form.get_by_role("button", name="Add period").click()
    # The new period is listed, its name leading to its overview.
    expect(page.get_by_role("link", name=name, exact=True)).to_have_attribute(
        "href", re.compile(r"/periods/\d+/overview$")
    )


def add_team(page: Page, base: str, name: str) -> int:
    page.goto(base + "/")
    form = page.locator("form[action='/teams']")
    form.get_by_label("Team name").fill(name)
    form.get_by_role("button", name="Add team").click()
    page.wait_for_url(re.compile(r"/teams/\d+"))
    return int(re.search(r"/teams/(\d+)", page.url).group(1))  # type: ignore[union-attr]


def add_members(page: Page, names: list[str]) -> None:
    for name in names:
        form = page.locator("form[action$='/members']")
        form.get_by_label("Name").fill(name)
        form.get_by_label("Share of time on this team (%)").fill("100")
        form.get_by_role("button", name="Add member").click()
        expect(page.get_by_role("rowheader", name=name, exact=True)).to_be_visible()


def choose_period(page: Page, period: str) -> None:
    page.get_by_label("Period", exact=True).select_option(label=f"{period} (sprint)")
    page.get_by_role("button", name="Show").click()
    expect(page.get_by_role("heading", name=f"Capacity in {period}")).to_be_visible()


def set_up_team(page: Page, base: str) -> tuple[int, str, str]:
    """A period, a team and three members, all through the pages; ends on the plan page."""
    period = unique("Browser sprint")
    team = unique("Browser team")
    add_period(page, base, period)
    team_id = add_team(page, base, team)
    choose_period(page, period)
    add_members(page, ["Ada", "Ben", "Cleo"])
    page.get_by_role("link", name=f"Plan for {period}").click()
    expect(page.get_by_role("heading", name=f"Plan for {team} in {period}")).to_be_visible()
    return team_id, team, period


def quick_add(page: Page, title: str, effort: str, value: str) -> None:
    """Type a row with the keyboard alone: Enter moves on, and saves the complete row."""
    title_box = page.locator("#quick-title")
    title_box.focus()
    page.keyboard.type(title)
    page.keyboard.press("Enter")  # moves to the effort field
    expect(page.locator("#quick-effort")).to_be_focused()
    page.keyboard.type(effort)
    page.keyboard.press("Tab")
    page.keyboard.type(value)
    page.keyboard.press("Enter")  # saves
    expect(page.locator("#notice")).to_have_text(f"Added “{title}”.")
    expect(page.locator("#quick-title")).to_be_focused()
    expect(page.locator("#quick-title")).to_have_value("")


def row_id(page: Page, title: str) -> int:
    row = page.locator("tr.plan-row", has=page.locator(".title-text", has_text=title)).first
    return int((row.get_attribute("id") or "row-0").removeprefix("row-"))


def decision(page: Page, initiative_id: int) -> str:
    return page.locator(f"#row-{initiative_id} td.decision .mark").inner_text().strip().lower()


def busiest_team(session: Session) -> tuple[int, int]:
    """The demo team with the most initiatives in the first period, and that period: other
    tests add teams of their own to the shared server."""
    period_id = list_periods(session)[0].id or 0
    team_id = max(
        (t.id or 0 for t in list_teams(session)),
        key=lambda t: len(list_initiatives(session, team_id=t, period_id=period_id)),
    )
    return team_id, period_id


# Buttons whose first word is broken over two lines ("Sav/e"): the text's first word laid out
# in more than one line box.
_BROKEN_BUTTON_WORDS = """() => [...document.querySelectorAll('button')].filter((b) => {
  const text = [...b.childNodes].find((n) => n.nodeType === 3 && n.textContent.trim());
  if (!text || !b.getClientRects().length) return false;
  const word = text.textContent.trim().split(/\\s+/)[0];
  const start = text.textContent.indexOf(word);
  const range = document.createRange();
  range.setStart(text, start);
  range.setEnd(text, start + word.length);
  return new Set([...range.getClientRects()].map((r) => Math.round(r.top))).size > 1;
}).map((b) => b.textContent.trim())"""


def broken_button_words(page: Page) -> list[str]:
    return page.evaluate(_BROKEN_BUTTON_WORDS)
