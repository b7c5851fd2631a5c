"""Browser tests: Debian's chromium driven by Playwright against a real uvicorn server.

The server runs in a daemon thread on 127.0.0.1 (a free port, bound before it starts) with a
temp SQLite database migrated like production and holding the demo workspace. No browser is
downloaded: Playwright is pointed at the system chromium (LOADLINE_CHROMIUM, else `chromium`
on the PATH). A test fails on any response with status 500 or more, on an uncaught page error,
and on a console error other than a 4xx answer the test asked for (a refused value, say).
Screenshots go to test-artifacts/screenshots/ (see flows.py; git ignores the folder).
"""

from __future__ import annotations

import os
import shutil
import socket
import threading
import time
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest
import uvicorn
from playwright.sync_api import BrowserContext, ConsoleMessage, Page, Response, expect
from sqlmodel import Session

from server import demo, migrate
from server.access import SESSION_COOKIE
from server.app import create_app
from server.config import Settings
from server.store.users import create_user, start_session

CHROMIUM_ARGS = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
]


# Generous waits: the machines that run these are often busy with other work. A real failure
# still fails, only later.
WAIT_MS = 15_000
expect.set_options(timeout=WAIT_MS)


def pytest_collection_modifyitems(items: list[pytest.Item]) -> None:
    browser_dir = Path(__file__).parent
    for item in items:
        if browser_dir in Path(str(item.fspath)).parents:
            assert item.get_closest_marker("browser"), f"{item.nodeid} lacks @pytest.mark.browser"


def _chromium() -> str:
    path = os.environ.get("LOADLINE_CHROMIUM") or shutil.which("chromium")
    if not path:
        pytest.fail(
            "No chromium found: install Debian's chromium package or set LOADLINE_CHROMIUM "
            "(never `playwright install`)."
        )
    return path


@pytest.fixture(scope="session")
def browser_type_launch_args(browser_type_launch_args: dict[str, Any]) -> dict[str, Any]:
    return {
        **browser_type_launch_args,
        "executable_path": _chromium(),
        "headless": True,
        "args": CHROMIUM_ARGS,
    }


class LiveServer:
    def __init__(self, url: str, settings: Settings, session_token: str) -> None:
        self.url = url
        self.settings = settings
        self.session_token = session_token  # an editor's sign-in, for the browser's cookie


@pytest.fixture(scope="session")
def live_server(tmp_path_factory: pytest.TempPathFactory) -> Iterator[LiveServer]:
    path = tmp_path_factory.mktemp("browser") / "loadline.db"
    settings = Settings.from_env(
        {}, database_url=f"sqlite:///{path}", secret_key="browser-test-secret-not-for-production"
    )
    migrate.upgrade(settings)
    app = create_app(settings)
    with Session(app.state.engine) as session:
        demo.load(session)
        editor = create_user(
            session, username="meeting", password="browser-test-password", role="editor"
        )
        token = start_session(session, user=editor)
    sock = socket.socket(socket.AF_INET, socket.SOCK_STREAM)
    sock.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
    sock.bind(("127.0.0.1", 0))
    port = sock.getsockname()[1]
    server = uvicorn.Server(
        uvicorn.Config(app, host="127.0.0.1", port=port, log_level="warning", lifespan="off")
    )
    thread = threading.Thread(target=server.run, kwargs={"sockets": [sock]}, daemon=True)
    thread.start()
    deadline = time.monotonic() + 15
    while not server.started:
        if time.monotonic() > deadline or not thread.is_alive():
            pytest.fail("the live server did not start")
        time.sleep(0.05)
    yield LiveServer(f"http://127.0.0.1:{port}", settings, token)
    server.should_exit = True
    thread.join(timeout=5)
    app.state.engine.dispose()


@pytest.fixture
def problems() -> list[str]:
    return []


# Name the element behind a Content Security Policy refusal (the console only says what).
_CSP_REPORTER = """
document.addEventListener("securitypolicyviolation", (e) => {
  const what = e.target && e.target.outerHTML ? e.target.outerHTML.slice(0, 200) : "";
  console.error(`CSP ${e.violatedDirective} at ${e.sourceFile}:${e.lineNumber} ${what}`);
});
"""


def _watch(page: Page, problems: list[str]) -> None:
    page.add_init_script(_CSP_REPORTER)

    def on_response(response: Response) -> None:
        if response.status >= 500:
            problems.append(f"server error {response.status} on {response.url}")

    def on_console(message: ConsoleMessage) -> None:
        text = message.text
        asked_for = text.startswith("Failed to load resource") and any(
            f"status of {status}" in text for status in (403, 404, 409, 422)
        )
        if message.type == "error" and not asked_for:
            problems.append(f"console error: {text}")

    page.on("response", on_response)
    page.on("pageerror", lambda error: problems.append(f"page error: {error}"))
    page.on("console", on_console)


def sign_in(context: BrowserContext, server: LiveServer) -> None:
    """Give the browser the editor's session cookie, as signing in on /login would."""
    context.add_cookies(
        [{"name": SESSION_COOKIE, "value": server.session_token, "url": server.url}]
    )


@pytest.fixture
def app_page(page: Page, live_server: LiveServer, problems: list[str]) -> Iterator[Page]:
    """A signed-in page that records server errors, page errors and console errors."""
    page.set_default_timeout(WAIT_MS)
    sign_in(page.context, live_server)
    _watch(page, problems)
    yield page
    assert problems == [], "\n".join(problems)


@pytest.fixture
def watch(problems: list[str]) -> Iterator[Any]:
    """Watch pages a test opens itself (e.g. with scripts off); checked after the test."""
    yield lambda page: _watch(page, problems)
    assert problems == [], "\n".join(problems)
