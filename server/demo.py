"""The demo workspace: an invented organisation to try Loadline on.

Brightwater Transit is a fictional city transit operator whose software group plans a quarter.
All names, numbers and initiatives are made up for the demo.
"""

from __future__ import annotations

import datetime as dt

from sqlalchemy.engine import Engine
from sqlmodel import Session, func, select

from server.actor import DEMO_ACTOR
from server.db import one_transaction
from server.models import Need, Period, Team
from server.schemas import (
    AvailabilityCreate,
    CapacitySettingsIn,
    EffortIn,
    InitiativeCreate,
    MemberCreate,
    PeriodCreate,
    TeamCreate,
    TeamEffortIn,
)
from server.store.initiatives import create_initiative
from server.store.periods import create_period, set_capacity_settings
from server.store.teams import create_member, create_team, set_availability

QUARTER = "Q1 2027"
QUARTER_START = dt.date(2027, 1, 4)
QUARTER_END = dt.date(2027, 4, 2)
# Invented company-wide days off inside the quarter.
COMPANY_DAYS_OFF = [dt.date(2027, 2, 15), dt.date(2027, 3, 29)]

# team -> members (name, share of time on the team, days off in the quarter)
TEAMS: dict[str, list[tuple[str, float, float]]] = {
    "Journey Planner": [
        ("Imani", 1.0, 5),
        ("Tomasz", 1.0, 0),
        ("Rosa", 0.8, 3),
        ("Kenji", 1.0, 10),
        ("Lior", 0.5, 0),
    ],
    "Fares and Payments": [
        ("Amara", 1.0, 2),
        ("Bjorn", 1.0, 8),
        ("Chidi", 1.0, 0),
        ("Dana", 0.6, 4),
    ],
    "Depot Systems": [
        ("Esme", 1.0, 0),
        ("Farid", 1.0, 6),
        ("Gwen", 1.0, 3),
    ],
    "Platform": [
        ("Hana", 1.0, 4),
        ("Ivo", 1.0, 0),
        ("Jules", 0.5, 2),
        ("Kofi", 1.0, 12),
    ],
}

# (title, effort or (low, likely, high), value, state, either-or set, needs by title)
Initiative = tuple[str, float | tuple[float, float, float], float, str, str | None, list[str]]
INITIATIVES: dict[str, list[Initiative]] = {
    "Journey Planner": [
        ("Step-free route option", (16, 24, 40), 80, "pinned", None, []),
        (
            "Live crowding on bus stops",
            (20, 30, 60),
            70,
            "candidate",
            None,
            ["Vehicle position feed v2"],
        ),
        ("Vehicle position feed v2", (12, 18, 30), 30, "candidate", None, []),
        ("Saved journeys sync across devices", 24, 45, "candidate", None, []),
        ("Disruption alerts: push", (10, 16, 28), 60, "candidate", "Disruption alerts", []),
        ("Disruption alerts: email digest", (6, 8, 12), 35, "candidate", "Disruption alerts", []),
        ("Night bus timetable import", 12, 25, "candidate", None, []),
        ("Accessibility audit fixes", (12, 20, 32), 55, "pinned", None, []),
        ("Map tiles self-hosting", 40, 20, "candidate", None, []),
        ("Bike share docks on map", 14, 30, "candidate", None, []),
        ("Trip planner latency budget", (8, 12, 24), 40, "candidate", None, []),
        ("Offline timetable packs", (20, 36, 56), 50, "candidate", None, []),
        ("Old widget retirement", 6, 10, "ruled_out", None, []),
        ("Fare estimate in results", 10, 35, "candidate", None, ["Fare rules API"]),
        ("Onboarding tour", 8, 12, "candidate", None, []),
    ],
    "Fares and Payments": [
        ("Fare rules API", (16, 20, 32), 50, "candidate", None, []),
        ("Contactless capping", (30, 40, 70), 90, "pinned", None, []),
        ("Refund requests self-service", 24, 45, "candidate", None, []),
        ("Concession card renewal online", (16, 24, 36), 55, "candidate", None, []),
        ("Payment provider: build adapter", (30, 50, 80), 40, "candidate", "Provider switch", []),
        ("Payment provider: buy gateway", (12, 16, 24), 32, "candidate", "Provider switch", []),
        ("Receipts in PDF", 8, 15, "candidate", None, []),
        ("Chargeback dashboard", 18, 25, "candidate", None, []),
        ("Ticket machine firmware reports", 12, 18, "candidate", None, []),
        ("Group tickets", (20, 28, 44), 38, "candidate", None, ["Fare rules API"]),
        ("Fraud rules review", 10, 30, "candidate", None, []),
        ("Legacy fare tables clean-up", 14, 12, "candidate", None, []),
    ],
    "Depot Systems": [
        ("Work order mobile app", (30, 40, 64), 75, "candidate", None, []),
        ("Tyre wear tracking", 16, 30, "candidate", None, []),
        ("Parts stock alerts", (8, 12, 20), 35, "pinned", None, []),
        ("Shift handover notes", 10, 22, "candidate", None, []),
        ("Brake test records digitised", (16, 20, 32), 50, "candidate", None, []),
        ("Depot yard map", 24, 28, "candidate", "Yard view", []),
        ("Depot yard list view", 8, 18, "candidate", "Yard view", []),
        ("Supplier portal sign-in", 12, 15, "candidate", None, []),
        ("Vehicle history export", 6, 12, "candidate", None, ["Brake test records digitised"]),
        ("Inspection checklist editor", (12, 18, 28), 26, "candidate", None, []),
        ("Old reports server shutdown", 10, 20, "candidate", None, []),
    ],
    "Platform": [
        ("Database upgrade", (20, 28, 50), 70, "pinned", None, []),
        ("Single sign-on for staff tools", (16, 24, 40), 55, "candidate", None, []),
        ("Log retention policy", 8, 25, "candidate", None, []),
        ("Build pipeline caching", 12, 30, "candidate", None, []),
        ("Secrets rotation", (10, 14, 24), 45, "candidate", None, []),
        ("Staging environment refresh", 16, 20, "candidate", None, []),
        ("Cost report per team", 10, 15, "candidate", None, []),
        ("Message queue migration", (30, 44, 80), 40, "candidate", None, ["Database upgrade"]),
        ("On-call runbook review", 6, 18, "candidate", None, []),
        ("Uptime status page", 12, 22, "candidate", "Status page", []),
        ("Uptime status via vendor", 4, 14, "candidate", "Status page", []),
        ("Certificate automation", 8, 28, "candidate", None, []),
    ],
}

# A cross-team initiative: owned by one team, with effort lines for others.
CROSS_TEAM_TITLE = "Real-time fares in journey results"
CROSS_TEAM_OWNER = "Journey Planner"
CROSS_TEAM_EFFORT = (12.0, 16.0, 24.0)
CROSS_TEAM_OTHERS = {"Fares and Payments": (8.0, 12.0, 20.0)}
CROSS_TEAM_VALUE = 65.0
CROSS_TEAM_NEEDS = ["Fare rules API"]


def _effort(raw: float | tuple[float, float, float]) -> EffortIn:
    if isinstance(raw, tuple):
        low, likely, high = raw
        return EffortIn(low=low, likely=likely, high=high)
    return EffortIn(likely=raw)


def is_empty(session: Session) -> bool:
    teams = session.exec(select(func.count()).select_from(Team)).one()
    periods = session.exec(select(func.count()).select_from(Period)).one()
    return teams == 0 and periods == 0


def load(session: Session) -> None:
    """Create the demo teams, members, periods, availability and initiatives."""
    quarter = create_period(
        session,
        period_in=PeriodCreate(
            name=QUARTER,
            kind="quarter",
            start_date=QUARTER_START,
            end_date=QUARTER_END,
            non_working_dates=COMPANY_DAYS_OFF,
        ),
        actor=DEMO_ACTOR,
    )
    for number in range(6):
        start = QUARTER_START + dt.timedelta(days=14 * number)
        end = start + dt.timedelta(days=11)
        create_period(
            session,
            period_in=PeriodCreate(
                name=f"Sprint 27.{number + 1}",
                kind="sprint",
                start_date=start,
                end_date=end,
                non_working_dates=[d for d in COMPANY_DAYS_OFF if start <= d <= end],
            ),
            actor=DEMO_ACTOR,
        )
    team_ids: dict[str, int] = {}
    for team_name, members in TEAMS.items():
        team = create_team(
            session, team_in=TeamCreate(name=team_name, default_spread=0.2), actor=DEMO_ACTOR
        )
        team_ids[team_name] = team.id or 0
        for member_name, share, days_off in members:
            member = create_member(
                session,
                member_in=MemberCreate(team_id=team.id or 0, name=member_name, allocation=share),
                actor=DEMO_ACTOR,
            )
            if days_off:
                set_availability(
                    session,
                    availability_in=AvailabilityCreate(
                        member_id=member.id or 0, period_id=quarter.id or 0, days_off=days_off
                    ),
                    actor=DEMO_ACTOR,
                )
        set_capacity_settings(
            session,
            team_id=team.id or 0,
            period_id=quarter.id or 0,
            settings_in=CapacitySettingsIn(focus_factor=0.7, reserve_pct=15),
            actor=DEMO_ACTOR,
        )

    ids_by_title: dict[str, int] = {}
    pending_needs: list[tuple[int, list[str]]] = []
    for team_name, items in INITIATIVES.items():
        for title, effort, value, state, either_or, needs in items:
            record = create_initiative(
                session,
                initiative_in=InitiativeCreate(
                    team_id=team_ids[team_name],
                    period_id=quarter.id,
                    title=title,
                    effort=_effort(effort),
                    value=value,
                    state=state,  # type: ignore[arg-type]
                    either_or=either_or,
                ),
                commit=False,
                actor=DEMO_ACTOR,
            )
            ids_by_title[title] = record.row.id or 0
            if needs:
                pending_needs.append((record.row.id or 0, needs))
    cross = create_initiative(
        session,
        initiative_in=InitiativeCreate(
            team_id=team_ids[CROSS_TEAM_OWNER],
            period_id=quarter.id,
            title=CROSS_TEAM_TITLE,
            effort=_effort(CROSS_TEAM_EFFORT),
            other_efforts=[
                TeamEffortIn(team_id=team_ids[name], **_effort(raw).model_dump(exclude={"team_id"}))
                for name, raw in CROSS_TEAM_OTHERS.items()
            ],
            value=CROSS_TEAM_VALUE,
        ),
        commit=False,
        actor=DEMO_ACTOR,
    )
    pending_needs.append((cross.row.id or 0, CROSS_TEAM_NEEDS))
    for initiative_id, needed in pending_needs:
        for title in needed:
            session.add(Need(initiative_id=initiative_id, needed_id=ids_by_title[title]))
    session.commit()


def load_if_empty(engine: Engine) -> bool:
    """Load the demo into an empty database, all or nothing; return whether it was loaded."""
    with one_transaction(engine) as session:
        if not is_empty(session):
            return False
        load(session)
        return True
