"""From availability to capacity: working days, each member's available days, team capacity.

capacity = sum(available days x allocation) x focus factor x (1 - reserve / 100)

Pure arithmetic on plain values; the planning layer feeds it rows from the database.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Iterable, Sequence
from dataclasses import dataclass

DEFAULT_WEEKMASK = "1111100"
# Share of an available day that goes to planned work: common practice 0.6-0.8, no source.
DEFAULT_FOCUS_FACTOR = 0.7
# Capacity held back for support and unplanned work: common practice, no source.
DEFAULT_RESERVE_PCT = 15.0


def working_days(
    start: dt.date,
    end: dt.date,
    non_working: Iterable[dt.date] = (),
    weekmask: str = DEFAULT_WEEKMASK,
) -> int:
    """Count working days from start to end inclusive, skipping non-working dates."""
    if end < start:
        return 0
    if len(weekmask) != 7 or set(weekmask) - {"0", "1"}:
        raise ValueError("weekmask must be seven characters of 0 and 1, Monday first")
    total_days = (end - start).days + 1
    full_weeks, rest = divmod(total_days, 7)
    count = full_weeks * weekmask.count("1")
    first = start.weekday()
    count += sum(1 for offset in range(rest) if weekmask[(first + offset) % 7] == "1")
    skipped = {day for day in non_working if start <= day <= end and weekmask[day.weekday()] == "1"}
    return count - len(skipped)


@dataclass(frozen=True)
class MemberAvailability:
    name: str
    days_off: float
    allocation: float


@dataclass(frozen=True)
class MemberCapacity:
    name: str
    working_days: int
    days_off: float
    available_days: float
    allocation: float
    contributed_days: float


@dataclass(frozen=True)
class CapacityBreakdown:
    working_days: int
    members: tuple[MemberCapacity, ...]
    gross_days: float
    focus_factor: float
    focused_days: float
    reserve_pct: float
    reserve_days: float
    capacity_days: float


def team_capacity(
    period_working_days: int,
    members: Sequence[MemberAvailability],
    focus_factor: float = DEFAULT_FOCUS_FACTOR,
    reserve_pct: float = DEFAULT_RESERVE_PCT,
) -> CapacityBreakdown:
    """Compute the capacity of a team in a period, with every intermediate figure."""
    if not 0 < focus_factor <= 1:
        raise ValueError("focus factor must be in (0, 1]")
    if not 0 <= reserve_pct < 100:
        raise ValueError("reserve must be in [0, 100) percent")
    rows = []
    for member in members:
        available = max(0.0, period_working_days - member.days_off)
        rows.append(
            MemberCapacity(
                name=member.name,
                working_days=period_working_days,
                days_off=member.days_off,
                available_days=available,
                allocation=member.allocation,
                contributed_days=available * member.allocation,
            )
        )
    gross = sum(row.contributed_days for row in rows)
    focused = gross * focus_factor
    reserve = focused * reserve_pct / 100
    return CapacityBreakdown(
        working_days=period_working_days,
        members=tuple(rows),
        gross_days=gross,
        focus_factor=focus_factor,
        focused_days=focused,
        reserve_pct=reserve_pct,
        reserve_days=reserve,
        capacity_days=focused - reserve,
    )
