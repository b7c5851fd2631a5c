"""Periods and each team's capacity settings in a period."""

from __future__ import annotations

import datetime as dt
from typing import Any

from pydantic import ValidationError
from sqlalchemy.exc import IntegrityError
from sqlmodel import Session, SQLModel, col, func, select

from server.capacity import (
    DEFAULT_FOCUS_FACTOR,
    DEFAULT_RESERVE_PCT,
    working_days,
)
from server.errors import ConflictError, InputError
from server.models import (
    Availability,
    CapacitySettings,
    Initiative,
    Member,
    Period,
    SavedPlan,
    Scenario,
    Team,
)
from server.schemas import CapacitySettingsIn, PeriodCreate, PeriodFields, PeriodUpdate
from server.store import audit
from server.store._common import (
    BasedOn,
    and_list,
    commit_or_conflict,
    fingerprint,
    first_named,
    flush_or_conflict,
    get_or_404,
    refuse_if_changed,
    same_name,
)
from server.validation import field_and_message
from server.wording import counted


def period_working_days(period: Period) -> int:
    closed = [dt.date.fromisoformat(day) for day in period.non_working_dates]
    return working_days(period.start_date, period.end_date, closed, period.weekmask)


def list_periods(session: Session) -> list[Period]:
    return list(session.exec(select(Period).order_by(Period.start_date, Period.id)))


def get_period(session: Session, *, period_id: int) -> Period:
    return get_or_404(session, Period, period_id, "period")


def _check_name_free(session: Session, name: str, period_id: int | None) -> None:
    clash = same_name(session.exec(select(Period)), name, period_id)
    if clash is not None:
        raise ConflictError(f"A period named “{clash.name}” already exists.", field="name")


def _apply(db_period: Period, fields: PeriodFields) -> None:
    db_period.name = fields.name
    db_period.kind = fields.kind
    db_period.start_date = fields.start_date
    db_period.end_date = fields.end_date
    db_period.weekmask = fields.weekmask
    db_period.non_working_dates = [day.isoformat() for day in fields.non_working_dates]


# Fields as the period form labels them, for audit summaries.
_FIELD_WORDS = {
    "start_date": "start date",
    "end_date": "end date",
    "weekmask": "working weekdays",
    "non_working_dates": "non-working dates",
}


def period_values(db_period: Period) -> dict[str, Any]:
    """A period's fields as plain JSON values (audit entries, forms)."""
    return {
        "name": db_period.name,
        "kind": db_period.kind,
        "start_date": db_period.start_date.isoformat(),
        "end_date": db_period.end_date.isoformat(),
        "weekmask": db_period.weekmask,
        "non_working_dates": list(db_period.non_working_dates),
    }


def create_period(session: Session, *, period_in: PeriodCreate, actor: str = "") -> Period:
    _check_name_free(session, period_in.name, None)
    db_period = Period(
        name=period_in.name,
        kind=period_in.kind,
        start_date=period_in.start_date,
        end_date=period_in.end_date,
    )
    _apply(db_period, period_in)
    session.add(db_period)
    message = f"A period named “{period_in.name}” already exists."
    flush_or_conflict(session, message, "name")
    audit.record(
        session,
        actor=actor,
        action="period.create",
        entity="period",
        entity_id=db_period.id,
        summary=f"Added {db_period.kind} “{db_period.name}” "
        f"({db_period.start_date.isoformat()} to {db_period.end_date.isoformat()})",
        after=period_values(db_period),
    )
    commit_or_conflict(session, message, "name")
    session.refresh(db_period)
    return db_period


def period_fingerprint(db_period: Period) -> str:
    """What the period edit form sends back as `based_on`."""
    return fingerprint(period_values(db_period))


def _refuse_if_period_changed(db_period: Period, based_on: BasedOn) -> None:
    refuse_if_changed(
        based_on,
        period_values(db_period),
        f"Period “{db_period.name}” was",
        f"{db_period.start_date} to {db_period.end_date}, "
        f"{counted(period_working_days(db_period), 'working day')}",
    )


def update_period(
    session: Session,
    *,
    period_id: int,
    period_in: PeriodUpdate,
    actor: str = "",
    based_on: BasedOn = None,
) -> Period:
    """Merge the change with the stored period and check the whole again; `based_on`: see
    `refuse_if_changed`."""
    db_period = get_period(session, period_id=period_id)
    _refuse_if_period_changed(db_period, based_on)
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
    _check_days_off_fit(session, db_period, fields, period_in.model_fields_set)
    old_name = db_period.name
    before = period_values(db_period)
    _apply(db_period, fields)
    old, new = audit.changed(before, period_values(db_period))
    if new:
        changed_words = ", ".join(_FIELD_WORDS.get(k, k) for k in new)
        audit.record(
            session,
            actor=actor,
            action="period.update",
            entity="period",
            entity_id=period_id,
            summary=f"Changed {changed_words} of period “{old_name}”",
            before=old,
            after=new,
        )
    session.add(db_period)
    commit_or_conflict(session, "A period with that name already exists.", "name")
    session.refresh(db_period)
    return db_period


def _check_days_off_fit(
    session: Session, db_period: Period, fields: PeriodFields, changed: set[str]
) -> None:
    """Refuse a change that leaves someone more days off than the period has working days.

    The availability form refuses such days off; a shorter period would otherwise keep them
    and show a member with fewer than zero days (counted as zero) without a word.
    """
    closed = list(fields.non_working_dates)
    limit = working_days(fields.start_date, fields.end_date, closed, fields.weekmask)
    query = (
        select(Member.name, Availability.days_off)
        .join(Member, col(Member.id) == Availability.member_id)
        .where(Availability.period_id == db_period.id, Availability.days_off > limit)
        .order_by(func.lower(Member.name))
    )
    over = [f"{name} ({days_off:g})" for name, days_off in session.exec(query)]
    if over:
        dated = ("end_date", "start_date", "weekmask", "non_working_dates")
        field = next((name for name in dated if name in changed), "end_date")
        raise InputError(
            f"{field}: After this change {db_period.name} has "
            f"{counted(limit, 'working day')}, fewer than the days off of "
            f"{and_list(first_named(over))}; lower those days off on the team page first.",
            field=field,
        )


def _count(session: Session, model: type[SQLModel], column: Any, period_id: int) -> int:
    query = select(func.count()).select_from(model).where(column == period_id)
    return int(session.exec(query).one())


def _uses_message(session: Session, db_period: Period) -> str | None:
    """What still refers to the period, in words, or None when nothing does."""
    period_id = db_period.id or 0
    per_team = session.exec(
        select(Team.name, func.count())
        .join(Initiative, col(Initiative.team_id) == Team.id)
        .where(Initiative.period_id == period_id)
        .group_by(Team.name)
        .order_by(Team.name)
    ).all()
    initiatives = sum(int(count) for _, count in per_team)
    availability = _count(session, Availability, Availability.period_id, period_id)
    scenarios = _count(session, Scenario, Scenario.period_id, period_id)
    plans = _count(session, SavedPlan, SavedPlan.period_id, period_id)
    if not (initiatives or availability or scenarios or plans):
        return None
    uses, steps = [], []
    if initiatives:
        teams = ", ".join(f"{name} {count}" for name, count in per_team)
        uses.append(f"{counted(initiatives, 'initiative')} ({teams})")
        steps.append("move the initiatives to another period or to the backlog")
    if availability:
        uses.append(counted(availability, "availability entry", "availability entries"))
        steps.append("delete the availability entries")
    if scenarios:
        uses.append(counted(scenarios, "scenario"))
        steps.append("delete the scenarios")
    if plans:
        uses.append(counted(plans, "saved plan"))
        steps.append("delete the saved plans (each on its own page)")
    message = f"Period “{db_period.name}” still has {and_list(uses)}."
    if steps:
        message += f" To delete it, {and_list(steps)} first."
    return message


def period_delete_refusal(session: Session, db_period: Period) -> ConflictError | None:
    """Why the period cannot be deleted (what still refers to it), or None."""
    message = _uses_message(session, db_period)
    return None if message is None else ConflictError(message, field="period_id")


def _refuse_period_delete(session: Session, db_period: Period) -> None:
    """The check before deleting: raise `period_delete_refusal`'s refusal, if any."""
    refusal = period_delete_refusal(session, db_period)
    if refusal is not None:
        raise refusal


def _settings_in(session: Session, period_id: int) -> list[CapacitySettings]:
    return list(
        session.exec(select(CapacitySettings).where(CapacitySettings.period_id == period_id))
    )


def delete_period(
    session: Session, *, period_id: int, actor: str = "", based_on: BasedOn = None
) -> None:
    """Delete a period that nothing refers to any more; refuse (ConflictError) otherwise.

    Initiatives, availability entries, scenarios and saved plans refer to it through foreign
    keys ON DELETE RESTRICT, so the database refuses too when another writer adds one between
    the check and the commit; the refusal is the same. The teams' capacity settings of the
    period go with it; the audit entry keeps them (settings stored meanwhile are refused the
    same way: that key is RESTRICT too). `based_on`: see `refuse_if_changed`.
    """
    db_period = get_period(session, period_id=period_id)
    _refuse_if_period_changed(db_period, based_on)
    _refuse_period_delete(session, db_period)
    settings = _settings_in(session, period_id)
    audit.record(
        session,
        actor=actor,
        action="period.delete",
        entity="period",
        entity_id=period_id,
        summary=f"Deleted period “{db_period.name}”",
        before=period_values(db_period)
        | {
            "capacity_settings": [
                {
                    "team_id": row.team_id,
                    "focus_factor": row.focus_factor,
                    "reserve_pct": row.reserve_pct,
                }
                for row in settings
            ],
        },
    )
    try:
        for row in settings:
            session.delete(row)
        session.flush()  # before the period: its key is RESTRICT
        session.delete(db_period)
        session.commit()
    except IntegrityError as exc:  # another writer made a row that refers to the period
        session.rollback()
        db_period = get_period(session, period_id=period_id)
        refusal = period_delete_refusal(session, db_period)
        if refusal is None:  # capacity settings stored since they were listed (RESTRICT)
            refusal = ConflictError(
                f"Period “{db_period.name}” was changed while it was being deleted: a team's "
                "focus factor and reserve were set for it. Nothing was deleted; look at the "
                "period again and delete it again if it should still go.",
                field="period_id",
            )
        raise refusal from exc


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


def _settings_values(db_row: CapacitySettings) -> dict[str, Any]:
    return {"focus_factor": db_row.focus_factor, "reserve_pct": db_row.reserve_pct}


def settings_fingerprint(db_row: CapacitySettings) -> str:
    """What a capacity settings form sends back as `based_on`."""
    return fingerprint(_settings_values(db_row))


def _settings_words(values: dict[str, Any]) -> str:
    return f"focus factor {values['focus_factor']:g}, reserve {values['reserve_pct']:g} %"


def set_capacity_settings(
    session: Session,
    *,
    team_id: int,
    period_id: int,
    settings_in: CapacitySettingsIn,
    actor: str = "",
    based_on: BasedOn = None,
) -> CapacitySettings:
    """Store the focus factor and reserve; `based_on`: see `refuse_if_changed`."""
    # Unknown ids are a 404, not a foreign-key clash reported as a conflict.
    db_team = get_or_404(session, Team, team_id, "team")
    db_period = get_period(session, period_id=period_id)
    db_row = get_capacity_settings(session, team_id=team_id, period_id=period_id)
    # Settings never stored are the defaults: the entry's "before" says so in numbers.
    before = _settings_values(db_row)
    refuse_if_changed(
        based_on, before, "The focus factor and reserve were", _settings_words(before)
    )
    db_row.focus_factor = settings_in.focus_factor
    db_row.reserve_pct = settings_in.reserve_pct
    after = _settings_values(db_row)
    session.add(db_row)
    message = "Capacity settings changed at the same time; try again."

    def team_and_period_still_there(again: Session) -> None:
        get_or_404(again, Team, team_id, "team")
        get_period(again, period_id=period_id)

    flush_or_conflict(session, message, "team_id", team_and_period_still_there)
    if before != after:
        audit.record(
            session,
            actor=actor,
            action="capacity.update",
            entity="capacity_settings",
            entity_id=db_row.id,
            team_id=team_id,
            summary=f"Changed capacity settings of team “{db_team.name}” in “{db_period.name}”: "
            f"{_settings_words(before)} → {_settings_words(after)}",
            before=before,
            after=after,
        )
    commit_or_conflict(session, message, "team_id", team_and_period_still_there)
    session.refresh(db_row)
    return db_row
