"""Periods and each team's capacity settings in a period."""

from __future__ import annotations

import datetime as dt

from pydantic import ValidationError
from sqlmodel import Session, func, select

from server.capacity import (
    DEFAULT_FOCUS_FACTOR,
    DEFAULT_RESERVE_PCT,
    working_days,
)
from server.errors import ConflictError, InputError
from server.models import CapacitySettings, Period, Team
from server.schemas import CapacitySettingsIn, PeriodCreate, PeriodFields, PeriodUpdate
from server.store._common import commit_or_conflict, get_or_404
from server.validation import field_and_message


def period_working_days(period: Period) -> int:
    closed = [dt.date.fromisoformat(day) for day in period.non_working_dates]
    return working_days(period.start_date, period.end_date, closed, period.weekmask)


def list_periods(session: Session) -> list[Period]:
    return list(session.exec(select(Period).order_by(Period.start_date, Period.id)))


def get_period(session: Session, *, period_id: int) -> Period:
    return get_or_404(session, Period, period_id, "period")


def _check_name_free(session: Session, name: str, period_id: int | None) -> None:
    clash = session.exec(select(Period).where(func.lower(Period.name) == name.lower())).first()
    if clash is not None and clash.id != period_id:
        raise ConflictError(f"A period named {clash.name!r} already exists.", field="name")


def _apply(db_period: Period, fields: PeriodFields) -> None:
    db_period.name = fields.name
    db_period.kind = fields.kind
    db_period.start_date = fields.start_date
    db_period.end_date = fields.end_date
    db_period.weekmask = fields.weekmask
    db_period.non_working_dates = [day.isoformat() for day in fields.non_working_dates]


def create_period(session: Session, *, period_in: PeriodCreate) -> Period:
    _check_name_free(session, period_in.name, None)
    db_period = Period(
        name=period_in.name,
        kind=period_in.kind,
        start_date=period_in.start_date,
        end_date=period_in.end_date,
    )
    _apply(db_period, period_in)
    session.add(db_period)
    commit_or_conflict(session, f"A period named {period_in.name!r} already exists.", "name")
    session.refresh(db_period)
    return db_period


def update_period(session: Session, *, period_id: int, period_in: PeriodUpdate) -> Period:
    """Merge the change with the stored period and check the whole again."""
    db_period = get_period(session, period_id=period_id)
    merged = {
        "name": db_period.name,
        "kind": db_period.kind,
        "start_date": db_period.start_date,
        "end_date": db_period.end_date,
        "weekmask": db_period.weekmask,
        "non_working_dates": list(db_period.non_working_dates),
    }
    merged.update(period_in.model_dump(exclude_unset=True, exclude_none=True))
    try:
        fields = PeriodFields.model_validate(merged)
    except ValidationError as exc:  # name the field the merged period fails on
        field, message = field_and_message(exc.errors()[0])
        field = field.split(".")[0]
        raise InputError(f"{field}: {message}", field=field) from exc
    _check_name_free(session, fields.name, period_id)
    _apply(db_period, fields)
    session.add(db_period)
    commit_or_conflict(session, "A period with that name already exists.", "name")
    session.refresh(db_period)
    return db_period


def delete_period(session: Session, *, period_id: int) -> None:
    session.delete(get_period(session, period_id=period_id))
    session.commit()


def get_capacity_settings(session: Session, *, team_id: int, period_id: int) -> CapacitySettings:
    """The team's settings for the period, or the defaults (not stored until changed)."""
    query = select(CapacitySettings).where(
        CapacitySettings.team_id == team_id, CapacitySettings.period_id == period_id
    )
    return session.exec(query).first() or CapacitySettings(
        team_id=team_id,
        period_id=period_id,
        focus_factor=DEFAULT_FOCUS_FACTOR,
        reserve_pct=DEFAULT_RESERVE_PCT,
    )


def set_capacity_settings(
    session: Session, *, team_id: int, period_id: int, settings_in: CapacitySettingsIn
) -> CapacitySettings:
    # Unknown ids are a 404, not a foreign-key clash reported as a conflict.
    get_or_404(session, Team, team_id, "team")
    get_period(session, period_id=period_id)
    db_row = get_capacity_settings(session, team_id=team_id, period_id=period_id)
    db_row.focus_factor = settings_in.focus_factor
    db_row.reserve_pct = settings_in.reserve_pct
    session.add(db_row)
    commit_or_conflict(session, "Capacity settings changed at the same time; try again.", "team_id")
    session.refresh(db_row)
    return db_row
