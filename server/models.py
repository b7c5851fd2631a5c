"""Database tables.

One row per thing a manager keeps: teams and their members, periods, each member's availability
in a period (days only, never a reason), each team's capacity settings per period, initiatives
with their effort lines (one per team that spends effort on it) and the needs between them.
Input validation lives in server/schemas.py; these classes only describe storage.
"""

from __future__ import annotations

import datetime as dt
from typing import Any

from sqlalchemy import JSON, Column, ForeignKey, Integer, UniqueConstraint
from sqlmodel import Field, SQLModel

NAME_MAX = 80
TITLE_MAX = 200
NOTES_MAX = 4000


def utcnow() -> dt.datetime:
    return dt.datetime.now(dt.UTC)


def _fk(target: str, ondelete: str, *, nullable: bool = False, index: bool = True) -> Any:
    return Field(
        default=None,
        sa_column=Column(
            Integer, ForeignKey(target, ondelete=ondelete), nullable=nullable, index=index
        ),
    )


class Team(SQLModel, table=True):
    id: int | None = Field(default=None, primary_key=True)
    name: str = Field(max_length=NAME_MAX, unique=True)
    # Default +/- spread applied to single-number efforts when judging risk (0 = certain).
    default_spread: float = Field(default=0.0)
    created_at: dt.datetime = Field(default_factory=utcnow)


class Member(SQLModel, table=True):
    __table_args__ = (UniqueConstraint("team_id", "name", name="uq_member_team_name"),)

    id: int | None = Field(default=None, primary_key=True)
    team_id: int = _fk("team.id", "CASCADE")
    name: str = Field(max_length=NAME_MAX)
    # Share of the member's working time that belongs to this team (0 < share <= 1).
    allocation: float = Field(default=1.0)


class Period(SQLModel, table=True):
    id: int | None = Field(default=None, primary_key=True)
    name: str = Field(max_length=NAME_MAX, unique=True)
    kind: str = Field(max_length=10)  # "sprint" or "quarter"
    start_date: dt.date
    end_date: dt.date
    # Working weekdays Monday..Sunday as 1/0 (numpy's weekmask form); local rules decide it.
    weekmask: str = Field(default="1111100", max_length=7)
    # ISO dates inside the period on which nobody works (public holidays, company days off).
    non_working_dates: list[str] = Field(
        default_factory=list, sa_column=Column(JSON, nullable=False)
    )


class Availability(SQLModel, table=True):
    """A member's availability in one period: days off and an optional allocation override."""

    __table_args__ = (UniqueConstraint("member_id", "period_id", name="uq_availability"),)

    id: int | None = Field(default=None, primary_key=True)
    member_id: int = _fk("member.id", "CASCADE")
    period_id: int = _fk("period.id", "CASCADE")
    days_off: float = Field(default=0.0)
    allocation: float | None = Field(default=None)


class CapacitySettings(SQLModel, table=True):
    """Focus factor and reserve of one team in one period."""

    __tablename__ = "capacity_settings"
    __table_args__ = (UniqueConstraint("team_id", "period_id", name="uq_capacity_settings"),)

    id: int | None = Field(default=None, primary_key=True)
    team_id: int = _fk("team.id", "CASCADE")
    period_id: int = _fk("period.id", "CASCADE")
    focus_factor: float = Field(default=0.7)
    reserve_pct: float = Field(default=15.0)


# SQLAlchemy checks and bumps this column in one UPDATE ... WHERE version = ?, so two writers
# that both read version n cannot both succeed (the second gets StaleDataError).
_initiative_version = Column("version", Integer, nullable=False, default=1)


class Initiative(SQLModel, table=True):
    __mapper_args__ = {"version_id_col": _initiative_version}

    id: int | None = Field(default=None, primary_key=True)
    # The team that owns the initiative; effort lines may name other teams too.
    team_id: int = _fk("team.id", "RESTRICT")
    # None: unscheduled backlog.
    period_id: int | None = _fk("period.id", "SET NULL", nullable=True)
    title: str = Field(max_length=TITLE_MAX)
    notes: str = Field(default="", max_length=NOTES_MAX)
    value: float
    confidence: float | None = Field(default=None)  # 0 < confidence <= 1, optional
    state: str = Field(default="candidate", max_length=12)  # candidate | pinned | ruled_out
    either_or: str | None = Field(default=None, max_length=NAME_MAX)
    position: int = Field(default=0)
    # Incremented on every change; an update based on an older version is refused.
    version: int = Field(default=1, sa_column=_initiative_version)
    created_at: dt.datetime = Field(default_factory=utcnow)
    updated_at: dt.datetime = Field(default_factory=utcnow)


class EffortLine(SQLModel, table=True):
    """Effort one team spends on an initiative: a single estimate or low / likely / high."""

    __tablename__ = "effort_line"
    __table_args__ = (UniqueConstraint("initiative_id", "team_id", name="uq_effort_line"),)

    id: int | None = Field(default=None, primary_key=True)
    initiative_id: int = _fk("initiative.id", "CASCADE")
    team_id: int = _fk("team.id", "CASCADE")
    likely: float
    low: float | None = Field(default=None)
    high: float | None = Field(default=None)


class Need(SQLModel, table=True):
    """Initiative `initiative_id` can be chosen only together with `needed_id`."""

    __tablename__ = "initiative_need"
    __table_args__ = (UniqueConstraint("initiative_id", "needed_id", name="uq_initiative_need"),)

    id: int | None = Field(default=None, primary_key=True)
    initiative_id: int = _fk("initiative.id", "CASCADE")
    needed_id: int = _fk("initiative.id", "CASCADE")
