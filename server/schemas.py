"""Input and output shapes of the JSON API and the forms, with their validation.

Pages parse form fields into the same models as the API, so a value refused in one place is
refused, with the same message, in the other.
"""

from __future__ import annotations

import datetime as dt
from typing import Annotated, Any, Literal

from pydantic import (
    BaseModel,
    BeforeValidator,
    ConfigDict,
    Field,
    StringConstraints,
    field_validator,
    model_validator,
)

from server.capacity import working_days
from server.models import NAME_MAX, NOTES_MAX, TITLE_MAX
from server.text_rules import VISIBLE_TEXT, WEEKMASK

MAX_PERIOD_DAYS = 400
MAX_EFFORT_DAYS = 10_000.0
MAX_VALUE = 1_000_000.0


def _not_a_boolean(value: Any) -> Any:
    # JSON true/false would otherwise pass as 1 and 0 (days, shares, ids).
    if isinstance(value, bool):
        raise ValueError("Enter a number, not true or false.")
    return value


NUMBER = BeforeValidator(_not_a_boolean)
WholeNumber = Annotated[int, NUMBER]
# Ids are INTEGER columns (32-bit on PostgreSQL): a larger number can name no row, and is
# refused naming its field rather than looked up.
MAX_ID = 2**31 - 1
RowId = Annotated[int, NUMBER, Field(ge=1, le=MAX_ID)]
Name = Annotated[
    str,
    StringConstraints(
        strip_whitespace=True, min_length=1, max_length=NAME_MAX, pattern=VISIBLE_TEXT
    ),
]
Title = Annotated[
    str,
    StringConstraints(
        strip_whitespace=True, min_length=1, max_length=TITLE_MAX, pattern=VISIBLE_TEXT
    ),
]
Notes = Annotated[str, StringConstraints(max_length=NOTES_MAX)]
Share = Annotated[float, Field(gt=0, le=1, allow_inf_nan=False), NUMBER]
DaysOff = Annotated[float, Field(ge=0, le=MAX_PERIOD_DAYS, allow_inf_nan=False), NUMBER]
FocusFactor = Annotated[float, Field(gt=0, le=1, allow_inf_nan=False), NUMBER]
ReservePct = Annotated[float, Field(ge=0, lt=100, allow_inf_nan=False), NUMBER]
Spread = Annotated[float, Field(ge=0, lt=1, allow_inf_nan=False), NUMBER]
ValueScore = Annotated[float, Field(gt=0, le=MAX_VALUE, allow_inf_nan=False), NUMBER]
EffortDays = Annotated[float, Field(gt=0, le=MAX_EFFORT_DAYS, allow_inf_nan=False), NUMBER]
Weekmask = Annotated[str, StringConstraints(pattern=WEEKMASK)]
PeriodKind = Literal["sprint", "quarter"]
InitiativeState = Literal["candidate", "pinned", "ruled_out"]
INITIATIVE_STATES: tuple[str, ...] = ("candidate", "pinned", "ruled_out")
ETag = Annotated[
    str,
    Field(
        description="The row's entity tag, as the ETag header sends it (quotes included): "
        "send it back in If-Match so a write made on these values cannot undo a newer change."
    ),
]


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid")


# --- teams and members -------------------------------------------------------------------


class TeamCreate(_Strict):
    name: Name
    default_spread: Spread = 0.0


class TeamUpdate(_Strict):
    name: Name | None = None
    default_spread: Spread | None = None


class TeamPublic(BaseModel):
    id: int
    name: str
    default_spread: float
    created_at: dt.datetime
    etag: ETag


class MemberCreate(_Strict):
    team_id: RowId
    name: Name
    allocation: Share = 1.0


class MemberUpdate(_Strict):
    name: Name | None = None
    allocation: Share | None = None


class MemberPublic(BaseModel):
    id: int
    team_id: int
    name: str
    allocation: float
    etag: ETag


# --- periods and availability --------------------------------------------------------------


class PeriodFields(_Strict):
    """Shared checks of a complete period (create, or an update merged with what is stored)."""

    name: Name
    kind: PeriodKind
    start_date: dt.date
    end_date: dt.date
    weekmask: Weekmask = "1111100"
    non_working_dates: list[dt.date] = Field(default_factory=list, max_length=MAX_PERIOD_DAYS)

    @model_validator(mode="after")
    def _dates_make_sense(self) -> PeriodFields:
        if self.end_date < self.start_date:
            raise ValueError("end_date: The period ends before it starts.")
        if (self.end_date - self.start_date).days + 1 > MAX_PERIOD_DAYS:
            raise ValueError(f"end_date: A period may span at most {MAX_PERIOD_DAYS} days.")
        for day in self.non_working_dates:
            if not self.start_date <= day <= self.end_date:
                raise ValueError(f"non_working_dates: {day.isoformat()} is outside the period.")
        if "1" not in self.weekmask:
            raise ValueError("weekmask: At least one weekday must be a working day.")
        if not working_days(self.start_date, self.end_date, self.non_working_dates, self.weekmask):
            # No capacity can come of it: say which input took the last working day away.
            if working_days(self.start_date, self.end_date, (), self.weekmask):
                raise ValueError(
                    "non_working_dates: Every working day of the period is listed as a day "
                    "off; a period needs at least one working day."
                )
            raise ValueError(
                f"end_date: {self.start_date.isoformat()} to {self.end_date.isoformat()} has "
                "no working day in the working week; a period needs at least one."
            )
        self.non_working_dates = sorted(set(self.non_working_dates))
        return self


class PeriodCreate(PeriodFields):
    pass


class PeriodUpdate(_Strict):
    name: Name | None = None
    kind: PeriodKind | None = None
    start_date: dt.date | None = None
    end_date: dt.date | None = None
    weekmask: Weekmask | None = None
    non_working_dates: list[dt.date] | None = Field(default=None, max_length=MAX_PERIOD_DAYS)


class PeriodPublic(BaseModel):
    id: int
    name: str
    kind: str
    start_date: dt.date
    end_date: dt.date
    weekmask: str
    non_working_dates: list[dt.date]
    working_days: int
    etag: ETag


class AvailabilityCreate(_Strict):
    member_id: RowId
    period_id: RowId
    days_off: DaysOff = 0.0
    allocation: Share | None = None


class AvailabilityUpdate(_Strict):
    days_off: DaysOff | None = None
    allocation: Share | None = None


class AvailabilityPublic(BaseModel):
    id: int
    member_id: int
    period_id: int
    days_off: float
    allocation: float | None
    etag: ETag


class CapacitySettingsIn(_Strict):
    """Both settings, always: a PUT replaces them, and one left out must not fall back to a
    default in silence."""

    focus_factor: FocusFactor
    reserve_pct: ReservePct


class MemberCapacityPublic(BaseModel):
    member_id: int
    name: str
    working_days: int
    days_off: float
    available_days: float
    allocation: float
    contributed_days: float


class CapacityPublic(BaseModel):
    team_id: int
    period_id: int
    working_days: int
    members: list[MemberCapacityPublic]
    gross_days: float
    focus_factor: float
    focused_days: float
    reserve_pct: float
    reserve_days: float
    capacity_days: float
    etag: ETag


# --- initiatives ---------------------------------------------------------------------------


class EffortIn(_Strict):
    """One estimate (likely only) or a three-point estimate (low, likely, high), in days."""

    likely: EffortDays
    low: EffortDays | None = None
    high: EffortDays | None = None
    # Reads show an initiative's own effort with its team; a write may send that back, so a
    # read-change-write round trip works, but only with the owning team (the store checks).
    team_id: RowId | None = Field(
        default=None,
        description="Optional on an initiative's own effort: the owning team, as reads show "
        "it. Other teams' effort goes in other_efforts.",
    )

    @model_validator(mode="before")
    @classmethod
    def _bare_number(cls, data: Any) -> Any:
        if isinstance(data, int | float) and not isinstance(data, bool):
            return {"likely": data}
        return data

    @model_validator(mode="after")
    def _ordered(self) -> EffortIn:
        if (self.low is None) != (self.high is None):
            missing = "high" if self.high is None else "low"
            raise ValueError(f"{missing}: Give low and high together, or neither.")
        if self.low is not None and self.high is not None:
            if self.low > self.likely:
                raise ValueError("low: The low estimate is above the likely one.")
            if self.likely > self.high:
                raise ValueError("high: The high estimate is below the likely one.")
        return self


class TeamEffortIn(EffortIn):
    team_id: RowId


def own_effort_refusal(given: int, owner: int) -> str:
    """Why an initiative's own effort may not name another team (field effort.team_id)."""
    return (
        f"The effort is the owning team's, so its team_id is {owner} or left out; give team "
        f"{given}'s effort in other_efforts."
    )


class EffortPublic(BaseModel):
    team_id: int
    likely: float
    low: float | None
    high: float | None


class InitiativeCreate(_Strict):
    team_id: RowId
    period_id: RowId | None = None
    title: Title
    notes: Notes = ""
    effort: EffortIn
    other_efforts: list[TeamEffortIn] = Field(default_factory=list, max_length=20)
    value: ValueScore
    confidence: Share | None = None
    state: InitiativeState = "candidate"
    either_or: Name | None = None
    needs: list[RowId] = Field(default_factory=list, max_length=50)

    @field_validator("either_or", mode="before")
    @classmethod
    def _blank_is_none(cls, value: Any) -> Any:
        return None if isinstance(value, str) and not value.strip() else value

    @model_validator(mode="after")
    def _own_effort(self) -> InitiativeCreate:
        if self.effort.team_id not in (None, self.team_id):
            given = self.effort.team_id
            raise ValueError(f"effort.team_id: {own_effort_refusal(given, self.team_id)}")
        return self


class InitiativeUpdate(_Strict):
    version: WholeNumber = Field(
        ge=1, le=MAX_ID, description="The version this change is based on (from the last read)."
    )
    period_id: RowId | None = None
    title: Title | None = None
    notes: Notes | None = None
    effort: EffortIn | None = None
    other_efforts: list[TeamEffortIn] | None = Field(default=None, max_length=20)
    value: ValueScore | None = None
    confidence: Share | None = None
    state: InitiativeState | None = None
    either_or: Name | None = None
    needs: list[RowId] | None = Field(default=None, max_length=50)

    @field_validator("either_or", mode="before")
    @classmethod
    def _blank_is_none(cls, value: Any) -> Any:
        return None if isinstance(value, str) and not value.strip() else value


class InitiativePublic(BaseModel):
    id: int
    team_id: int
    period_id: int | None
    title: str
    notes: str
    effort: EffortPublic
    other_efforts: list[EffortPublic]
    value: float
    confidence: float | None
    state: str
    either_or: str | None
    needs: list[int]
    version: int
    created_at: dt.datetime
    updated_at: dt.datetime
