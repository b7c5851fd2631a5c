"""What a published link shows of a saved plan: the team's figures, never its members'.

A published link is read by people without an account (stakeholders, anyone it is forwarded
to), so it shows availability as team totals only: no member names, no per-member days off,
and a scenario's changes to days off as one change of the team's total. Availability is
personal data; the signed-in saved-plan page keeps the per-member breakdown for managers.

It also speaks to readers who cannot open the app: the method in plain words (the technical
note folded away), and warnings without advice that points to pages or settings they cannot
reach. Everything is read from the stored snapshot alone, so old snapshots are covered too.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from server.planning.snapshots import CapacitySnapshot, PlanView
from server.wording import in_days

# Advice in stored warnings that only someone signed in can follow, and what it becomes.
_FOR_READERS = (
    (" (the period overview plans both teams together).", "."),
    ("; this page plans ", "; this plan counts "),
    (" The period overview plans all teams together.", ""),
    (" A finer step (the LOADLINE_RESOLUTION setting) plans closer to the days entered.", ""),
)
_REMOVED_MEMBER = "A removed member (id "


@dataclass(frozen=True)
class TeamCapacity:
    """A team's capacity in a period as totals: nothing per member."""

    working_days: int
    full_time: float  # the members' shares added up: how many full-time people
    person_days: float  # working days at those shares, before days off
    days_off: float  # at the same shares, so that person_days - days_off = available_days
    available_days: float
    focus_factor: float
    focused_days: float
    reserve_pct: float
    reserve_days: float


@dataclass(frozen=True)
class PublishedPlan:
    capacity: TeamCapacity
    changes: list[str]  # the scenario's changes in team terms
    warnings: list[str]
    method: str  # in plain words
    technical_note: str


def team_capacity(capacity: CapacitySnapshot) -> TeamCapacity:
    person_days = math.fsum(m.working_days * m.allocation for m in capacity.members)
    return TeamCapacity(
        working_days=capacity.working_days,
        full_time=math.fsum(m.allocation for m in capacity.members),
        person_days=person_days,
        days_off=person_days - capacity.gross_days,
        available_days=capacity.gross_days,
        focus_factor=capacity.focus_factor,
        focused_days=capacity.focused_days,
        reserve_pct=capacity.reserve_pct,
        reserve_days=capacity.reserve_days,
    )


def _days_off_change(total: float, live: float | None) -> str:
    if live is None:  # saved before the live total was kept with the snapshot
        return f"Days off for the team: {in_days(total)} in total (changed by the scenario)"
    delta = round(total - live, 2)
    if delta == 0:
        return f"Days off for the team: {in_days(total)} in total, the same as live"
    more = "more" if delta > 0 else "fewer"
    return (
        f"Days off for the team: {in_days(total)} in total, {in_days(abs(delta))} {more} "
        f"(live: {in_days(live)})"
    )


def _is_member_change(text: str, names: list[str]) -> bool:
    """A stored change line about one member's days off ("Name: days off: ...")."""
    return text.startswith(_REMOVED_MEMBER) or any(
        text.startswith(f"{name}: days off: ") for name in names
    )


def team_changes(view: PlanView) -> list[str]:
    """The scenario's changed inputs, with the per-member days off as one team total."""
    names = [m.name for m in view.inputs.capacity.members]
    kept: list[str] = []
    days_off_at: int | None = None
    for text in view.result.changed_inputs:
        if _is_member_change(text, names):
            days_off_at = len(kept) if days_off_at is None else days_off_at
        else:
            kept.append(text)
    if days_off_at is not None:
        total = sum(m.days_off for m in view.inputs.capacity.members)
        kept.insert(days_off_at, _days_off_change(total, view.result.live_days_off))
    return kept


def for_readers(warning: str) -> str:
    """A stored warning without advice that points where a link's reader cannot go."""
    for old, new in _FOR_READERS:
        warning = warning.replace(old, new)
    return warning


def plain_method(view: PlanView) -> str:
    result, steps = view.result, view.inputs.options.resolution
    if result.method == "none":
        return "No plan was chosen: the pinned work alone is more than the capacity."
    return f"Exact best plan within the capacity, in {steps:g}-day steps."


def technical_note(view: PlanView) -> str:
    result, steps = view.result, view.inputs.options.resolution
    note = f" ({result.method_note})" if result.method_note else ""
    text = f"Solved at a {steps:g}-day resolution by {result.method}{note}."
    rounding = view.rounding_note
    return f"{text} {rounding}" if rounding else text


def published_view_of(view: PlanView) -> PublishedPlan:
    return PublishedPlan(
        capacity=team_capacity(view.inputs.capacity),
        changes=team_changes(view),
        warnings=[for_readers(w) for w in view.warnings],
        method=plain_method(view),
        technical_note=technical_note(view),
    )
