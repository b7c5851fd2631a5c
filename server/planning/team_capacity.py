"""A team's capacity in a period, computed from stored availability."""

from __future__ import annotations

from dataclasses import dataclass

from sqlmodel import Session

from server.capacity import CapacityBreakdown, MemberAvailability, team_capacity
from server.store.periods import get_capacity_settings, get_period, period_working_days
from server.store.teams import get_team, list_availability, list_members


@dataclass(frozen=True)
class TeamCapacity:
    team_id: int
    period_id: int
    member_ids: tuple[int, ...]
    breakdown: CapacityBreakdown


def capacity_of(session: Session, *, team_id: int, period_id: int) -> TeamCapacity:
    """Capacity of a team in a period; members without an availability row count as fully in."""
    get_team(session, team_id=team_id)
    period = get_period(session, period_id=period_id)
    members = list_members(session, team_id=team_id)
    by_member = {
        row.member_id: row
        for row in list_availability(session, team_id=team_id, period_id=period_id)
    }
    inputs = []
    for member in members:
        row = by_member.get(member.id or 0)
        allocation = (
            row.allocation if row is not None and row.allocation is not None else member.allocation
        )
        inputs.append(
            MemberAvailability(
                name=member.name,
                days_off=row.days_off if row is not None else 0.0,
                allocation=allocation,
            )
        )
    settings = get_capacity_settings(session, team_id=team_id, period_id=period_id)
    breakdown = team_capacity(
        period_working_days(period), inputs, settings.focus_factor, settings.reserve_pct
    )
    return TeamCapacity(
        team_id=team_id,
        period_id=period_id,
        member_ids=tuple(member.id or 0 for member in members),
        breakdown=breakdown,
    )


def no_capacity_message(session: Session, *, period_id: int) -> str:
    """Why a team has no capacity to plan with, and what to change (the selector's own words,
    "capacity must be greater than zero", say neither)."""
    period = get_period(session, period_id=period_id)
    if period_working_days(period) == 0:
        return (
            f"{period.name} has no working days: check its dates, non-working dates and "
            "working weekdays on the period's page."
        )
    return (
        "This team has no capacity in this period yet (no members, or everyone is away): "
        "add members and their availability on the team page to get a plan."
    )
