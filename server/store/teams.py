"""Teams, members and their availability."""

from __future__ import annotations

from sqlmodel import Session, col, func, select

from server.errors import ConflictError, InputError
from server.models import Availability, Initiative, Member, Period, Team
from server.schemas import (
    AvailabilityCreate,
    AvailabilityUpdate,
    MemberCreate,
    MemberUpdate,
    TeamCreate,
    TeamUpdate,
)
from server.store._common import commit_or_conflict, get_or_404
from server.store.periods import period_working_days


def list_teams(session: Session) -> list[Team]:
    return list(session.exec(select(Team).order_by(func.lower(Team.name))))


def get_team(session: Session, *, team_id: int) -> Team:
    return get_or_404(session, Team, team_id, "team")


def _check_name_free(session: Session, name: str, team_id: int | None = None) -> None:
    clash = session.exec(select(Team).where(func.lower(Team.name) == name.lower())).first()
    if clash is not None and clash.id != team_id:
        raise ConflictError(f"A team named {clash.name!r} already exists.", field="name")


def create_team(session: Session, *, team_in: TeamCreate) -> Team:
    _check_name_free(session, team_in.name)
    db_team = Team(name=team_in.name, default_spread=team_in.default_spread)
    session.add(db_team)
    commit_or_conflict(session, f"A team named {team_in.name!r} already exists.", "name")
    session.refresh(db_team)
    return db_team


def update_team(session: Session, *, team_id: int, team_in: TeamUpdate) -> Team:
    db_team = get_team(session, team_id=team_id)
    changes = team_in.model_dump(exclude_unset=True, exclude_none=True)
    if "name" in changes:
        _check_name_free(session, changes["name"], team_id)
    for key, value in changes.items():
        setattr(db_team, key, value)
    session.add(db_team)
    commit_or_conflict(session, "A team with that name already exists.", "name")
    session.refresh(db_team)
    return db_team


def count_team_initiatives(session: Session, *, team_id: int) -> int:
    query = select(func.count()).select_from(Initiative).where(Initiative.team_id == team_id)
    return int(session.exec(query).one())


def delete_team(session: Session, *, team_id: int, with_initiatives: bool = False) -> None:
    """Delete a team; refuse while it owns initiatives unless asked to delete those too."""
    db_team = get_team(session, team_id=team_id)
    owned = list(session.exec(select(Initiative).where(Initiative.team_id == team_id)))
    if owned and not with_initiatives:
        raise ConflictError(
            f"Team {db_team.name!r} still has {len(owned)} initiative(s); delete them first "
            "or ask to delete them with the team.",
            field="team_id",
        )
    for db_initiative in owned:
        session.delete(db_initiative)
    session.flush()
    session.delete(db_team)
    session.commit()


def list_members(session: Session, *, team_id: int | None = None) -> list[Member]:
    query = select(Member).order_by(Member.team_id, func.lower(Member.name), Member.id)
    if team_id is not None:
        query = query.where(Member.team_id == team_id)
    return list(session.exec(query))


def get_member(session: Session, *, member_id: int) -> Member:
    return get_or_404(session, Member, member_id, "member")


def _check_member_name_free(
    session: Session, team_id: int, name: str, member_id: int | None
) -> None:
    query = select(Member).where(Member.team_id == team_id, func.lower(Member.name) == name.lower())
    clash = session.exec(query).first()
    if clash is not None and clash.id != member_id:
        raise ConflictError(f"This team already has a member named {clash.name!r}.", field="name")


def create_member(session: Session, *, member_in: MemberCreate) -> Member:
    get_team(session, team_id=member_in.team_id)
    _check_member_name_free(session, member_in.team_id, member_in.name, None)
    db_member = Member(**member_in.model_dump())
    session.add(db_member)
    commit_or_conflict(session, "This team already has a member with that name.", "name")
    session.refresh(db_member)
    return db_member


def update_member(session: Session, *, member_id: int, member_in: MemberUpdate) -> Member:
    db_member = get_member(session, member_id=member_id)
    changes = member_in.model_dump(exclude_unset=True, exclude_none=True)
    if "name" in changes:
        _check_member_name_free(session, db_member.team_id, changes["name"], member_id)
    for key, value in changes.items():
        setattr(db_member, key, value)
    session.add(db_member)
    commit_or_conflict(session, "This team already has a member with that name.", "name")
    session.refresh(db_member)
    return db_member


def delete_member(session: Session, *, member_id: int) -> None:
    session.delete(get_member(session, member_id=member_id))
    session.commit()


def list_availability(
    session: Session, *, team_id: int | None = None, period_id: int | None = None
) -> list[Availability]:
    query = select(Availability).order_by(Availability.period_id, Availability.member_id)
    if team_id is not None:
        query = query.join(Member, col(Member.id) == Availability.member_id).where(
            Member.team_id == team_id
        )
    if period_id is not None:
        query = query.where(Availability.period_id == period_id)
    return list(session.exec(query))


def get_availability(session: Session, *, availability_id: int) -> Availability:
    return get_or_404(session, Availability, availability_id, "availability")


def check_days_off(session: Session, *, period_id: int, days_off: float) -> None:
    """Refuse more days off than the period has working days (InputError on days_off)."""
    _check_days_off(get_or_404(session, Period, period_id, "period"), days_off)


def _check_days_off(period: Period, days_off: float) -> None:
    limit = period_working_days(period)
    if days_off > limit:
        raise InputError(
            f"days_off: {days_off:g} days off is more than the {limit} working days of "
            f"{period.name}.",
            field="days_off",
        )


def set_availability(session: Session, *, availability_in: AvailabilityCreate) -> Availability:
    """Create or replace a member's availability in a period (one row per member and period)."""
    get_member(session, member_id=availability_in.member_id)
    period = get_or_404(session, Period, availability_in.period_id, "period")
    _check_days_off(period, availability_in.days_off)
    query = select(Availability).where(
        Availability.member_id == availability_in.member_id,
        Availability.period_id == availability_in.period_id,
    )
    db_row = session.exec(query).first() or Availability(
        member_id=availability_in.member_id, period_id=availability_in.period_id
    )
    db_row.days_off = availability_in.days_off
    db_row.allocation = availability_in.allocation
    session.add(db_row)
    commit_or_conflict(
        session, "Availability for this member and period already exists.", "member_id"
    )
    session.refresh(db_row)
    return db_row


def update_availability(
    session: Session, *, availability_id: int, availability_in: AvailabilityUpdate
) -> Availability:
    db_row = get_availability(session, availability_id=availability_id)
    changes = availability_in.model_dump(exclude_unset=True)
    if changes.get("days_off") is not None:
        _check_days_off(
            get_or_404(session, Period, db_row.period_id, "period"), changes["days_off"]
        )
    for key, value in changes.items():
        if key == "days_off" and value is None:
            continue
        setattr(db_row, key, value)
    session.add(db_row)
    session.commit()
    session.refresh(db_row)
    return db_row


def delete_availability(session: Session, *, availability_id: int) -> None:
    session.delete(get_availability(session, availability_id=availability_id))
    session.commit()
