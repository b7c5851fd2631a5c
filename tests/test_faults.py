"""Faults the database layer must survive: a killed server, a locked database, a full disk.

In every case the database must stay sound and hold either all of a change or none of it, and a
refused request must get a plain 503 answer rather than a server error page.
"""

from __future__ import annotations

import dataclasses
import os
import shutil
import signal
import socket
import sqlite3
import subprocess
import sys
import threading
import time
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

import httpx
import pytest
from fastapi import FastAPI
from fastapi.testclient import TestClient
from sqlalchemy import event, func, select
from sqlalchemy.engine import make_url
from sqlmodel import Session

from server.app import create_app
from server.config import PROJECT_ROOT, Settings
from server.models import Team
from tests.conftest import POSTGRES_ADMIN_URL, TEST_SECRET, bearer

sqlite_only = pytest.mark.skipif(bool(POSTGRES_ADMIN_URL), reason="SQLite fault injection")

SERVER_START_SECONDS = 30.0
IMPORT_ROWS = 600
# None: kill right after the answer, to show a committed import survives SIGKILL.
KILL_DELAYS_SECONDS = (0.2, 0.8, 2.0, None)
PERIOD = {
    "name": "Sprint 9",
    "kind": "sprint",
    "start_date": "2027-05-03",
    "end_date": "2027-05-14",
}


def free_port() -> int:
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        return int(probe.getsockname()[1])


@contextmanager
def running_server(
    database_url: str, *, workers: int = 1
) -> Iterator[tuple[str, subprocess.Popen]]:
    """A real uvicorn process serving Loadline on a free loopback port; stopped on exit."""
    port = free_port()
    command = [sys.executable, "-m", "uvicorn", "server.serving:app_for_workers", "--factory"]
    command += ["--host", "127.0.0.1", "--port", str(port), "--log-level", "warning"]
    if workers > 1:
        command += ["--workers", str(workers)]
    env = os.environ | {"DATABASE_URL": database_url, "LOADLINE_SECRET_KEY": TEST_SECRET}
    process = subprocess.Popen(command, cwd=PROJECT_ROOT, env=env, start_new_session=True)
    base = f"http://127.0.0.1:{port}"
    try:
        deadline = time.monotonic() + SERVER_START_SECONDS
        while True:
            assert process.poll() is None, "the server exited while starting"
            assert time.monotonic() < deadline, "the server did not answer /health in time"
            try:
                if httpx.get(f"{base}/health", timeout=1.0).status_code == 200:
                    break
            except httpx.TransportError:
                time.sleep(0.1)
        yield base, process
    finally:
        if process.poll() is None:
            os.killpg(process.pid, signal.SIGTERM)
            try:
                process.wait(timeout=15)
            except subprocess.TimeoutExpired:
                os.killpg(process.pid, signal.SIGKILL)
                process.wait(timeout=15)


def _import_csv(rows: int) -> str:
    body = "\n".join(f"k{i},Imported item {i},2,5,candidate" for i in range(rows))
    return "capacity_days,100\n\nkey,title,likely,value,state\n" + body + "\n"


def _count_initiatives(path: Path) -> int:
    with sqlite3.connect(path) as conn:
        return int(conn.execute("SELECT count(*) FROM initiative").fetchone()[0])


def _integrity(path: Path) -> str:
    with sqlite3.connect(path) as conn:
        return str(conn.execute("PRAGMA integrity_check").fetchone()[0])


@sqlite_only
@pytest.mark.parametrize("delay", KILL_DELAYS_SECONDS)
def test_a_server_killed_during_a_bulk_import_leaves_all_or_nothing(
    database_template: str, tmp_path: Path, delay: float | None
) -> None:
    path = tmp_path / "killed.db"
    shutil.copyfile(database_template, path)
    with running_server(f"sqlite:///{path}") as (base, process):
        with httpx.Client(base_url=base, headers=bearer("admin"), timeout=30) as api:
            team = api.post("/api/v1/teams", json={"name": "Kiln"})
            period = api.post("/api/v1/periods", json=PERIOD)
            assert team.status_code == period.status_code == 201, (team.text, period.text)
        before = _count_initiatives(path)
        answers: list[int | str] = []

        def send_import() -> None:
            try:
                response = httpx.post(
                    f"{base}/api/v1/teams/{team.json()['id']}/plan-imports",
                    json={"period_id": period.json()["id"], "csv": _import_csv(IMPORT_ROWS)},
                    headers=bearer("admin"),
                    timeout=120,
                )
                answers.append(response.status_code)
            except httpx.TransportError as exc:  # the expected outcome of the kill
                answers.append(type(exc).__name__)

        sender = threading.Thread(target=send_import)
        sender.start()
        if delay is None:
            sender.join(timeout=120)
        else:
            time.sleep(delay)
        os.killpg(process.pid, signal.SIGKILL)
        process.wait(timeout=15)
        sender.join(timeout=30)
        assert not sender.is_alive()

    assert _integrity(path) == "ok"
    after = _count_initiatives(path)
    assert after in {before, before + IMPORT_ROWS}, (before, after, answers)
    if delay is None:
        assert answers == [201]
    if answers == [201]:  # the import finished before the kill: it must all be there
        assert after == before + IMPORT_ROWS


@pytest.fixture
def quick_busy_app(settings: Settings) -> Iterator[FastAPI]:
    application = create_app(dataclasses.replace(settings, sqlite_busy_timeout_ms=200))
    yield application
    application.state.engine.dispose()


def _sqlite_path(app: FastAPI) -> str:
    database = make_url(app.state.settings.database_url).database
    assert database
    return database


def _team_count(app: FastAPI) -> int:
    with Session(app.state.engine) as session:
        return int(session.execute(select(func.count()).select_from(Team)).scalar_one())


def _assert_plain_database_refusal(response: httpx.Response) -> None:
    assert response.status_code == 503, response.text
    message = response.json()["detail"]["message"]
    assert "database" in message.lower()
    assert "nothing was saved" in message.lower()
    assert "Traceback" not in response.text


@sqlite_only
def test_a_locked_database_answers_503_and_a_later_write_succeeds(
    quick_busy_app: FastAPI,
) -> None:
    with TestClient(quick_busy_app, headers=bearer("admin")) as api:
        locker = sqlite3.connect(_sqlite_path(quick_busy_app), isolation_level=None)
        try:
            locker.execute("BEGIN EXCLUSIVE")
            refused = api.post("/api/v1/teams", json={"name": "Locked out"})
        finally:
            locker.rollback()
            locker.close()
        _assert_plain_database_refusal(refused)
        assert "locked" in refused.json()["detail"]["message"]
        assert _team_count(quick_busy_app) == 0

        accepted = api.post("/api/v1/teams", json={"name": "Let in"})
        assert accepted.status_code == 201, accepted.text
        assert _team_count(quick_busy_app) == 1


@sqlite_only
def test_a_full_disk_answers_503_and_stores_nothing(app: FastAPI) -> None:
    engine = app.state.engine
    with TestClient(app, headers=bearer("admin")) as api:
        team = api.post("/api/v1/teams", json={"name": "Kiln"})
        period = api.post("/api/v1/periods", json=PERIOD)
        assert team.status_code == period.status_code == 201
        before = (_team_count(app), _count_initiatives(Path(_sqlite_path(app))))

        with engine.connect() as conn:
            pages = int(conn.exec_driver_sql("PRAGMA page_count").scalar_one())

        @event.listens_for(engine, "connect")
        def _cap_pages(dbapi_connection, _record) -> None:  # type: ignore[no-untyped-def]
            # No more room than one page: any write that needs to grow the file fails as a
            # full disk would (SQLITE_FULL).
            dbapi_connection.execute(f"PRAGMA max_page_count={pages + 1}")

        engine.dispose()  # new connections, so each one gets the cap
        # The WAL is checkpointed into the main file on close, so the cap now applies to growth.
        refused = api.post(
            f"/api/v1/teams/{team.json()['id']}/plan-imports",
            json={"period_id": period.json()["id"], "csv": _import_csv(300)},
        )
        _assert_plain_database_refusal(refused)
        assert "full" in refused.json()["detail"]["message"]
        event.remove(engine, "connect", _cap_pages)
        engine.dispose()

    after = (_team_count(app), _count_initiatives(Path(_sqlite_path(app))))
    assert after == before
    assert _integrity(Path(_sqlite_path(app))) == "ok"
