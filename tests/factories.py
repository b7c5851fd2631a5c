"""Test data made through the persistence layer, with fixed values."""

from __future__ import annotations

import datetime as dt

from sqlmodel import Session

from server.models import Member, Period, Team
from server.schemas import (
    AvailabilityCreate,
    EffortIn,
    InitiativeCreate,
    MemberCreate,
    PeriodCreate,
    TeamCreate,
)
from server.store.initiatives import InitiativeRecord, create_initiative
from server.store.periods import create_period
from server.store.teams import create_member, create_team, set_availability


def make_team(session: Session, name: str = "Harbour") -> Team:
    return create_team(session, team_in=TeamCreate(name=name))


def make_member(session: Session, team: Team, name: str = "Ola", allocation: float = 1.0) -> Member:
    return create_member(
        session, member_in=MemberCreate(team_id=team.id or 0, name=name, allocation=allocation)
    )


def make_period(
    session: Session,
    name: str = "Sprint 1",
    start: dt.date = dt.date(2027, 3, 1),  # a Monday
    end: dt.date = dt.date(2027, 3, 12),  # the Friday of the next week: 10 working days
    kind: str = "sprint",
    non_working: list[dt.date] | None = None,
) -> Period:
    return create_period(
        session,
        period_in=PeriodCreate(
            name=name,
            kind=kind,  # type: ignore[arg-type]
            start_date=start,
            end_date=end,
            non_working_dates=non_working or [],
        ),
    )


def set_days_off(session: Session, member: Member, period: Period, days_off: float) -> None:
    set_availability(
        session,
        availability_in=AvailabilityCreate(
            member_id=member.id or 0, period_id=period.id or 0, days_off=days_off
        ),
    )


def make_initiative(
    session: Session,
    team: Team,
    period: Period | None,
    title: str = "Initiative",
    effort: float = 3.0,
    value: float = 10.0,
    **fields: object,
) -> InitiativeRecord:
    return create_initiative(
        session,
        initiative_in=InitiativeCreate(
            team_id=team.id or 0,
            period_id=period.id if period else None,
            title=title,
            effort=EffortIn(likely=effort),
            value=value,
            **fields,  # type: ignore[arg-type]
        ),
    )
