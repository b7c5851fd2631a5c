"""A role that changes while a plan is open: the refused save says so beside its row."""

from __future__ import annotations

from typing import Any

import pytest
from playwright.sync_api import Browser, expect
from sqlmodel import Session

from server.access import SESSION_COOKIE
from server.db import make_engine
from server.store.users import create_user, set_role, start_session
from tests.browser.conftest import WAIT_MS, LiveServer
from tests.browser.flows import quick_add, row_id, screenshot, set_up_team

pytestmark = pytest.mark.browser


@pytest.mark.browser
def test_refused_edit_shows_its_message_in_the_row(
    browser: Browser, live_server: LiveServer, watch: Any
) -> None:
    engine = make_engine(live_server.settings)
    with Session(engine) as session:
        user = create_user(
            session, username="soon-viewer", password="browser-test-password", role="editor"
        )
        user_id = user.id or 0
        token = start_session(session, user=user)
    context = browser.new_context()
    context.add_cookies([{"name": SESSION_COOKIE, "value": token, "url": live_server.url}])
    page = context.new_page()
    watch(page)
    page.set_default_timeout(WAIT_MS)
    set_up_team(page, live_server.url)
    quick_add(page, "Lock gates", "4", "11")
    gates = row_id(page, "Lock gates")
    # Meanwhile an administrator makes the account a viewer; the open page still has fields.
    with Session(engine) as session:
        set_role(session, user_id=user_id, role="viewer", disabled=False)
    engine.dispose()
    effort = page.locator(f"#effort-{gates}")
    effort.fill("6")
    effort.press("Tab")
    refusal = page.locator(f"#row-{gates} .col-save .refusal")
    expect(refusal).to_contain_text("Your role (viewer) may not do this; it needs editor.")
    expect(page.locator(f"#effort-{gates}")).to_have_value("6")  # kept, and said to be unsaved
    screenshot(page, "plan-refused-edit")
    # Reloaded, the page is read only: no fields, and a note saying who may edit.
    page.reload()
    expect(page.locator(f"#effort-{gates}")).to_have_count(0)
    expect(page.locator("#read-only-note")).to_contain_text("editors and admins")
    context.close()
