"""The demo workspace: what it contains, that it loads once, and the `loadline demo` command."""

from __future__ import annotations

from collections import Counter, defaultdict
from pathlib import Path

import pytest
from fastapi import FastAPI
from sqlalchemy import func
from sqlmodel import Session, SQLModel, select

from server import demo
from server.cli import main
from server.config import Settings
from server.db import make_engine
from server.models import EffortLine, Initiative, Need, Period, Team
from server.planning.team_capacity import capacity_of
from tests.factories import make_team


def _row_counts(session: Session) -> dict[str, int]:
    return {
        table.name: session.exec(select(func.count()).select_from(table)).one()
        for table in SQLModel.metadata.sorted_tables
    }


def test_demo_loads_into_an_empty_database(app: FastAPI, session: Session) -> None:
    assert demo.load_if_empty(app.state.engine) is True

    teams = list(session.exec(select(Team)))
    assert 3 <= len(teams) <= 4
    initiatives = list(session.exec(select(Initiative)))
    per_team = Counter(row.team_id for row in initiatives)
    for team in teams:
        assert 10 <= per_team[team.id] <= 30, team.name

    states = Counter(row.state for row in initiatives)
    assert states["pinned"] >= 2
    assert states["candidate"] > states["pinned"]
    assert session.exec(select(func.count()).select_from(Need)).one() >= 2

    either_or_sets: dict[tuple[int, str], int] = Counter(
        (row.team_id, row.either_or) for row in initiatives if row.either_or
    )
    assert len(either_or_sets) >= 2
    assert all(size >= 2 for size in either_or_sets.values()), either_or_sets

    lines = list(session.exec(select(EffortLine)))
    owner = {row.id: row.team_id for row in initiatives}
    cross_team = {line.initiative_id for line in lines if line.team_id != owner[line.initiative_id]}
    assert cross_team, "no initiative carries effort for a second team"

    kinds = Counter(period.kind for period in session.exec(select(Period)))
    assert kinds["quarter"] >= 1
    assert kinds["sprint"] >= 2


def test_demo_efforts_and_plans_are_plausible(app: FastAPI, session: Session) -> None:
    demo.load_if_empty(app.state.engine)
    quarter = session.exec(select(Period).where(Period.kind == "quarter")).one()
    initiatives = list(session.exec(select(Initiative)))
    owner = {row.id: row.team_id for row in initiatives}
    lines = list(session.exec(select(EffortLine)))
    for line in lines:
        assert 0 < line.likely <= 60
        if line.low is not None:
            assert line.high is not None
            assert line.low <= line.likely <= line.high
    assert any(line.low is not None for line in lines), "no three-point estimates"
    assert all(row.value > 0 for row in initiatives)

    # Every team's pinned work fits its quarter capacity, so the demo plans are feasible.
    pinned_days: dict[int, float] = defaultdict(float)
    for line in lines:
        if next(r for r in initiatives if r.id == line.initiative_id).state == "pinned":
            pinned_days[line.team_id] += line.likely
    for team in session.exec(select(Team)):
        capacity = capacity_of(session, team_id=team.id or 0, period_id=quarter.id or 0)
        assert capacity.breakdown.capacity_days > 0
        assert pinned_days[team.id or 0] <= capacity.breakdown.capacity_days, team.name

    # Needs form no cycle (the selector needs an acyclic graph).
    graph: dict[int, list[int]] = defaultdict(list)
    for need in session.exec(select(Need)):
        assert need.initiative_id in owner
        assert need.needed_id in owner
        graph[need.initiative_id].append(need.needed_id)
    done: set[int] = set()

    def visit(node: int, path: frozenset[int]) -> None:
        assert node not in path, "needs cycle in the demo"
        if node in done:
            return
        for nxt in graph[node]:
            visit(nxt, path | {node})
        done.add(node)

    for start in list(graph):
        visit(start, frozenset())


def test_demo_refuses_to_load_twice(app: FastAPI, session: Session) -> None:
    assert demo.load_if_empty(app.state.engine) is True
    before = _row_counts(session)
    assert demo.load_if_empty(app.state.engine) is False
    assert _row_counts(session) == before


def test_demo_refuses_a_database_that_already_has_a_team(app: FastAPI, session: Session) -> None:
    make_team(session, name="Ours")
    assert demo.load_if_empty(app.state.engine) is False
    assert [team.name for team in session.exec(select(Team))] == ["Ours"]


def test_loadline_demo_command(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> None:
    database = tmp_path / "cli.db"
    monkeypatch.setenv("DATABASE_URL", f"sqlite:///{database}")
    monkeypatch.delenv("LOADLINE_ENV", raising=False)
    monkeypatch.setenv("LOADLINE_SECRET_KEY", "test-secret-key-not-for-production")

    assert main(["demo"]) == 0  # migrates the new file, then loads
    assert "Loaded the demo workspace" in capsys.readouterr().out
    assert database.is_file()

    assert main(["demo"]) == 1  # the second time the database is not empty
    assert "only into an empty" in capsys.readouterr().out

    engine = make_engine(Settings.from_env())
    with Session(engine) as session:
        assert len(list(session.exec(select(Team)))) == len(demo.TEAMS)
    engine.dispose()
