"""Database tables.

One row per thing a manager keeps: teams and their members, periods, each member's availability
in a period (days only, never a reason), each team's capacity settings per period, initiatives
with their effort lines (one per team that spends effort on it) and the needs between them.
Input validation lives in server/schemas.py; these classes only describe storage.
"""

from __future__ import annotations

import datetime as dt
from typing import Any

from sqlalchemy import (
    JSON,
    Column,
    ForeignKey,
    Index,
    Integer,
    UniqueConstraint,
    event,
    false,
    text,
)
from sqlmodel import Field, SQLModel

from server.selector.set_names import KEY_MAX, name_key

NAME_MAX = 80
TITLE_MAX = 200
# Case folding can lengthen a title ("ß" -> "ss", at most three characters for one).
TITLE_KEY_MAX = KEY_MAX  # name_key's bound: 3 x TITLE_MAX
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


# SQLite reuses the largest id of a deleted row unless a table is AUTOINCREMENT. Ids of these
# tables are named inside scenarios, saved plans, undo and audit entries and API URLs: they
# must never come back for another row (migrations 0005, 0008). PostgreSQL's sequences never
# reuse an id.
NEVER_REUSED_IDS = {"sqlite_autoincrement": True}


class Team(SQLModel, table=True):
    __table_args__ = (NEVER_REUSED_IDS,)

    id: int | None = Field(default=None, primary_key=True)
    name: str = Field(max_length=NAME_MAX, unique=True)
    # Default +/- spread applied to single-number efforts when judging risk (0 = certain).
    default_spread: float = Field(default=0.0)
    created_at: dt.datetime = Field(default_factory=utcnow)


class Member(SQLModel, table=True):
    __table_args__ = (
        UniqueConstraint("team_id", "name", name="uq_member_team_name"),
        NEVER_REUSED_IDS,
    )

    id: int | None = Field(default=None, primary_key=True)
    # RESTRICT, as for every row below that goes with its team, member or period: the store
    # deletes it itself after listing it in the audit entry (migration 0006).
    team_id: int = _fk("team.id", "RESTRICT")
    name: str = Field(max_length=NAME_MAX)
    # Share of the member's working time that belongs to this team (0 < share <= 1).
    allocation: float = Field(default=1.0)


class Period(SQLModel, table=True):
    __table_args__ = (NEVER_REUSED_IDS,)

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

    __table_args__ = (
        UniqueConstraint("member_id", "period_id", name="uq_availability"),
        NEVER_REUSED_IDS,
    )

    id: int | None = Field(default=None, primary_key=True)
    member_id: int = _fk("member.id", "RESTRICT")
    # RESTRICT: a period is deleted only once nothing refers to it (store.periods.delete_period).
    period_id: int = _fk("period.id", "RESTRICT")
    days_off: float = Field(default=0.0)
    allocation: float | None = Field(default=None)


class CapacitySettings(SQLModel, table=True):
    """Focus factor and reserve of one team in one period."""

    __tablename__ = "capacity_settings"
    __table_args__ = (UniqueConstraint("team_id", "period_id", name="uq_capacity_settings"),)

    id: int | None = Field(default=None, primary_key=True)
    team_id: int = _fk("team.id", "RESTRICT")
    period_id: int = _fk("period.id", "RESTRICT")
    focus_factor: float = Field(default=0.7)
    reserve_pct: float = Field(default=15.0)


# SQLAlchemy checks and bumps this column in one UPDATE ... WHERE version = ?, so two writers
# that both read version n cannot both succeed (the second gets StaleDataError).
_initiative_version = Column("version", Integer, nullable=False, default=1)


# No scheduled or backlog row of a team repeats a title_key in its period: the database
# refuses the second of two writers that both passed the store's check. A NULL period_id
# (the backlog) never equals another in a unique index, so the backlog has its own index.
_BACKLOG_ONLY = text("period_id IS NULL")


class Initiative(SQLModel, table=True):
    __mapper_args__ = {"version_id_col": _initiative_version}
    __table_args__ = (
        Index("uq_initiative_title_key", "team_id", "period_id", "title_key", unique=True),
        Index(
            "uq_initiative_backlog_title_key",
            "team_id",
            "title_key",
            unique=True,
            sqlite_where=_BACKLOG_ONLY,
            postgresql_where=_BACKLOG_ONLY,
        ),
        NEVER_REUSED_IDS,
    )

    id: int | None = Field(default=None, primary_key=True)
    # The team that owns the initiative; effort lines may name other teams too.
    team_id: int = _fk("team.id", "RESTRICT")
    # None: unscheduled backlog. RESTRICT: a period with initiatives is not deleted.
    period_id: int | None = _fk("period.id", "RESTRICT", nullable=True)
    title: str = Field(max_length=TITLE_MAX)
    # name_key(title), kept by the listener below whenever title is set (no default, so the
    # constructor does not overwrite it after setting title); rows written past the ORM
    # (workspace restore) compute it themselves.
    title_key: str = Field(max_length=TITLE_KEY_MAX)
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


@event.listens_for(Initiative.title, "set")
def _keep_title_key(target: Initiative, value: str, _old: object, _initiator: object) -> None:
    target.title_key = name_key(value)


class EffortLine(SQLModel, table=True):
    """Effort one team spends on an initiative: a single estimate or low / likely / high."""

    __tablename__ = "effort_line"
    __table_args__ = (UniqueConstraint("initiative_id", "team_id", name="uq_effort_line"),)

    id: int | None = Field(default=None, primary_key=True)
    initiative_id: int = _fk("initiative.id", "CASCADE")
    # RESTRICT: a team is not deleted while another team's initiative carries effort for it.
    team_id: int = _fk("team.id", "RESTRICT")
    likely: float
    low: float | None = Field(default=None)
    high: float | None = Field(default=None)


class Need(SQLModel, table=True):
    """Initiative `initiative_id` can be chosen only together with `needed_id`."""

    __tablename__ = "initiative_need"
    __table_args__ = (UniqueConstraint("initiative_id", "needed_id", name="uq_initiative_need"),)

    id: int | None = Field(default=None, primary_key=True)
    initiative_id: int = _fk("initiative.id", "CASCADE")
    # RESTRICT: a needed initiative is not deleted while its dependant stays (needs among
    # initiatives deleted together are deleted first, by the store).
    needed_id: int = _fk("initiative.id", "RESTRICT")


# --- saved plans, scenarios and published links -------------------------------------------


class Scenario(SQLModel, table=True):
    """A named variation of a team's live plan inputs (capacity, focus, confidence, forcing)."""

    __table_args__ = (NEVER_REUSED_IDS,)

    id: int | None = Field(default=None, primary_key=True)
    name: str = Field(max_length=TITLE_MAX)
    team_id: int = _fk("team.id", "RESTRICT")
    period_id: int = _fk("period.id", "RESTRICT")
    # The what-if settings, as planning.plans.PlanOptions fields (JSON-ready).
    changes: dict[str, Any] = Field(default_factory=dict, sa_column=Column(JSON, nullable=False))
    created_at: dt.datetime = Field(default_factory=utcnow)
    created_by: str = Field(default="", max_length=NAME_MAX)


class SavedPlan(SQLModel, table=True):
    """An immutable snapshot of a plan's inputs and result; never updated after insert."""

    __tablename__ = "saved_plan"

    id: int | None = Field(default=None, primary_key=True)
    name: str = Field(max_length=TITLE_MAX)
    # Kept for listing; the snapshot itself holds names, so deleting a team keeps the plan.
    # RESTRICT: saved plans are never changed, so the period they refer to is kept.
    period_id: int | None = _fk("period.id", "RESTRICT", nullable=True)
    team_ids: list[int] = Field(default_factory=list, sa_column=Column(JSON, nullable=False))
    scenario_changes: dict[str, Any] = Field(
        default_factory=dict, sa_column=Column(JSON, nullable=False)
    )
    inputs: dict[str, Any] = Field(default_factory=dict, sa_column=Column(JSON, nullable=False))
    result: dict[str, Any] = Field(default_factory=dict, sa_column=Column(JSON, nullable=False))
    # Digest of the inputs, to tell cheaply whether live data has moved on since the save.
    inputs_digest: str = Field(max_length=64)
    created_at: dt.datetime = Field(default_factory=utcnow)
    created_by: str = Field(default="", max_length=NAME_MAX)


class Publication(SQLModel, table=True):
    """A read-only link to a saved plan; the token is random and revocable."""

    id: int | None = Field(default=None, primary_key=True)
    plan_id: int = _fk("saved_plan.id", "CASCADE")
    token: str = Field(max_length=64, unique=True)
    created_at: dt.datetime = Field(default_factory=utcnow)
    created_by: str = Field(default="", max_length=NAME_MAX)
    revoked_at: dt.datetime | None = Field(default=None)


# --- accounts and the audit trail ----------------------------------------------------------


class UserAccount(SQLModel, table=True):
    __tablename__ = "user_account"

    id: int | None = Field(default=None, primary_key=True)
    username: str = Field(max_length=NAME_MAX, unique=True)
    password_hash: str = Field(max_length=200)
    role: str = Field(max_length=10)  # admin | editor | viewer
    disabled: bool = Field(default=False, sa_column_kwargs={"server_default": false()})
    created_at: dt.datetime = Field(default_factory=utcnow)


class UserSession(SQLModel, table=True):
    """A signed-in browser; only a digest of its cookie is stored."""

    __tablename__ = "user_session"

    id: int | None = Field(default=None, primary_key=True)
    token_digest: str = Field(max_length=64, unique=True)
    user_id: int = _fk("user_account.id", "CASCADE")
    created_at: dt.datetime = Field(default_factory=utcnow)
    expires_at: dt.datetime


class LoginFailure(SQLModel, table=True):
    """A failed sign-in, kept briefly to slow down guessing per account and per address."""

    __tablename__ = "login_failure"

    id: int | None = Field(default=None, primary_key=True)
    username: str = Field(max_length=NAME_MAX, index=True)
    address: str = Field(max_length=64, index=True)
    at: dt.datetime = Field(default_factory=utcnow, index=True)


class AuditEntry(SQLModel, table=True):
    """Who changed what and when; `before`/`after` hold the changed fields (also for undo)."""

    __tablename__ = "audit_entry"

    id: int | None = Field(default=None, primary_key=True)
    at: dt.datetime = Field(default_factory=utcnow, index=True)
    actor: str = Field(default="", max_length=NAME_MAX)
    action: str = Field(max_length=40)  # e.g. initiative.update, plan.save, plan.publish
    entity: str = Field(max_length=40)
    entity_id: int | None = Field(default=None)
    team_id: int | None = Field(default=None, index=True)
    summary: str = Field(default="", max_length=300)
    before: dict[str, Any] | None = Field(default=None, sa_column=Column(JSON, nullable=True))
    after: dict[str, Any] | None = Field(default=None, sa_column=Column(JSON, nullable=True))
    undone_at: dt.datetime | None = Field(default=None)
