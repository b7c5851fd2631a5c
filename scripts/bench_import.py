"""Time and SQL statements of bulk entry: the plan CSV import API and the paste commit.

Each run starts a fresh SQLite database (migrated by the app's own `migrate.upgrade`) with an
editor account, one team, one period and --existing initiatives already in it, then imports N
rows through `POST /api/v1/teams/{id}/plan-imports` (bearer token) and pastes N rows through
`POST /teams/{id}/plan/paste` (session cookie and CSRF token, as a browser sends it; the paste
takes at most 500 rows, so larger N are skipped there). A quarter of the imported rows have
three-point efforts, and every fifth row needs the row before it.

SQL statements are counted with a SQLAlchemy `before_cursor_execute` listener on the app's
engine (an executemany counts once: that is one round trip to the database). The time is
the wall clock of the whole request, parsing and validation included; the paste request also
builds the plan view before it parses, so it has a fixed cost on top.

    .venv/bin/python scripts/bench_import.py [--sizes 100 500 2000] [--existing 50]
"""

from __future__ import annotations

import argparse
import datetime as dt
import os
import re
import tempfile
import time
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

from fastapi.testclient import TestClient
from sqlalchemy import event
from sqlalchemy.engine import Engine
from sqlmodel import Session

from server import migrate
from server.access import SESSION_COOKIE
from server.app import create_app
from server.config import Settings
from server.planning.paste import MAX_ROWS as MAX_PASTE_ROWS
from server.schemas import EffortIn, InitiativeCreate, PeriodCreate, TeamCreate
from server.store.initiatives import create_initiative
from server.store.periods import create_period
from server.store.teams import create_team
from server.store.users import create_user, start_session

_CSRF = re.compile(r'<meta name="csrf-token" content="([0-9a-f]+)">')


@dataclass(frozen=True)
class Measure:
    seconds: float
    statements: int


class StatementCounter:
    """Counts statements sent on an engine while `active` is set."""

    def __init__(self, engine: Engine) -> None:
        self.count = 0
        self.active = False
        event.listen(engine, "before_cursor_execute", self._seen)

    def _seen(self, *_args: Any) -> None:
        if self.active:
            self.count += 1

    def measure(self, action: Callable[[], None]) -> Measure:
        self.count, self.active = 0, True
        start = time.perf_counter()
        try:
            action()
        finally:
            self.active = False
        return Measure(time.perf_counter() - start, self.count)


def import_csv(rows: int) -> str:
    lines = ["capacity_days,400", "", "key,title,low,likely,high,value,state,needs"]
    for k in range(rows):
        three_point = k % 4 == 0
        low, high = ("2", "6") if three_point else ("", "")
        needs = f"k{k - 1}" if k % 5 == 4 else ""
        lines.append(f"k{k},Imported item {k},{low},3,{high},{5 + k % 40},candidate,{needs}")
    return "\n".join(lines) + "\n"


def paste_text(rows: int) -> str:
    return "\n".join(f"Pasted item {k}\t{1 + k % 8}\t{5 + k % 40}" for k in range(rows))


def setup(folder: str, existing: int) -> tuple[Any, int, int, str, str]:
    settings = Settings.from_env(
        {}, database_url=f"sqlite:///{folder}/bench.db", secret_key="bench-secret-key-local"
    )
    migrate.upgrade(settings)
    app = create_app(settings)
    with Session(app.state.engine) as session:
        period = create_period(
            session,
            period_in=PeriodCreate(
                name="Bench quarter",
                kind="quarter",
                start_date=dt.date(2027, 1, 4),
                end_date=dt.date(2027, 3, 26),
            ),
        )
        team = create_team(session, team_in=TeamCreate(name="Bench team"))
        for k in range(existing):
            create_initiative(
                session,
                initiative_in=InitiativeCreate(
                    team_id=team.id or 0,
                    period_id=period.id,
                    title=f"Existing {k}",
                    effort=EffortIn(likely=2),
                    value=10,
                ),
                commit=False,
            )
        session.commit()
        editor = create_user(
            session, username="bench", password="bench-password-long", role="editor"
        )
        token = start_session(session, user=editor, api_token=True)
        cookie = start_session(session, user=editor)
        return app, team.id or 0, period.id or 0, token, cookie


def run_import(folder: str, rows: int, existing: int) -> Measure:
    app, team_id, period_id, token, _ = setup(folder, existing)
    counter = StatementCounter(app.state.engine)
    body = {"period_id": period_id, "csv": import_csv(rows)}
    with TestClient(app, headers={"Authorization": f"Bearer {token}"}) as client:

        def send() -> None:
            response = client.post(f"/api/v1/teams/{team_id}/plan-imports", json=body)
            assert response.status_code == 201, response.text[:300]
            assert len(response.json()["initiative_ids"]) == rows

        result = counter.measure(send)
    app.state.engine.dispose()
    return result


def run_paste(folder: str, rows: int, existing: int) -> Measure:
    app, team_id, period_id, _, cookie = setup(folder, existing)
    counter = StatementCounter(app.state.engine)
    with TestClient(app, cookies={SESSION_COOKIE: cookie}) as client:
        page = client.get(f"/teams/{team_id}/plan", params={"period_id": str(period_id)})
        match = _CSRF.search(page.text)
        assert page.status_code == 200, "the plan page did not render"
        assert match, "the plan page carries no CSRF token"
        fields = {"csrf_token": match.group(1), "period_id": str(period_id)}
        fields["text"] = paste_text(rows)

        def send() -> None:
            response = client.post(
                f"/teams/{team_id}/plan/paste", data=fields, follow_redirects=False
            )
            assert response.status_code == 303, response.text[:300]

        result = counter.measure(send)
    app.state.engine.dispose()
    return result


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=[100, 500, 2000])
    parser.add_argument("--existing", type=int, default=50, help="initiatives already there")
    args = parser.parse_args()
    print(f"load average before: {os.getloadavg()[0]:.1f} (2 CPUs)")
    print("| path | rows | seconds | statements | statements/row | ms/row |")
    print("| --- | --- | --- | --- | --- | --- |")
    for path, runner, limit in (
        ("import API", run_import, None),
        ("paste commit", run_paste, MAX_PASTE_ROWS),
    ):
        for rows in args.sizes:
            if limit is not None and rows > limit:
                print(f"| {path} | {rows:,} | - | - | - | - (over the {limit}-row limit) |")
                continue
            with tempfile.TemporaryDirectory() as folder:
                m = runner(folder, rows, args.existing)
            print(
                f"| {path} | {rows:,} | {m.seconds:.2f} | {m.statements:,} | "
                f"{m.statements / rows:.2f} | {m.seconds * 1000 / rows:.2f} |"
            )
    print(f"load average after: {os.getloadavg()[0]:.1f}")


if __name__ == "__main__":
    main()
