"""Fixtures of the API tests: a small stored workspace and a snapshot of every table."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import pytest
from fastapi import FastAPI
from sqlalchemy.engine import Engine
from sqlmodel import Session, SQLModel, select

from server.models import Availability
from server.schemas import CapacitySettingsIn
from server.store.periods import set_capacity_settings
from tests.factories import make_initiative, make_member, make_period, make_team, set_days_off

Snapshot = dict[str, list[tuple[Any, ...]]]


@dataclass(frozen=True)
class Workspace:
    """Ids of the stored rows the tests refer to."""

    team: int
    other_team: int
    member: int
    period: int
    availability: int
    initiative: int
    dependant: int  # needs `initiative`


def build_workspace(session: Session) -> Workspace:
    """Team Harbour (Ola, 2 days off) and team Lighthouse; Sprint 1 of 10 working days;
    initiative "Quay wall" and "Crane rail", which needs it."""
    harbour = make_team(session, "Harbour")
    lighthouse = make_team(session, "Lighthouse")
    ola = make_member(session, harbour, "Ola")
    sprint = make_period(session, "Sprint 1")
    set_days_off(session, ola, sprint, 2)
    set_capacity_settings(
        session,
        team_id=harbour.id or 0,
        period_id=sprint.id or 0,
        settings_in=CapacitySettingsIn(focus_factor=0.7, reserve_pct=15),
    )
    quay = make_initiative(session, harbour, sprint, "Quay wall", effort=3, value=10)
    crane = make_initiative(
        session, harbour, sprint, "Crane rail", effort=2, value=8, needs=[quay.row.id]
    )
    availability = session.exec(select(Availability)).one()
    return Workspace(
        team=harbour.id or 0,
        other_team=lighthouse.id or 0,
        member=ola.id or 0,
        period=sprint.id or 0,
        availability=availability.id or 0,
        initiative=quay.row.id or 0,
        dependant=crane.row.id or 0,
    )


def read_snapshot(engine: Engine) -> Snapshot:
    """Every row of every table, to show that a refused request changed nothing."""
    with engine.connect() as conn:
        return {
            table.name: [
                tuple(row)
                for row in conn.execute(table.select().order_by(*table.primary_key.columns))
            ]
            for table in SQLModel.metadata.sorted_tables
        }


@pytest.fixture
def workspace(session: Session) -> Workspace:
    return build_workspace(session)


@pytest.fixture
def snapshot(app: FastAPI) -> Callable[[], Snapshot]:
    return lambda: read_snapshot(app.state.engine)
