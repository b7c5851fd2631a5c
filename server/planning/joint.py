"""All teams of a period planned together, when some initiatives spend several teams' effort.

Each team's own plan (server.planning.plans) sees only its share of a cross-team initiative and
cannot count on another team choosing its part. Here every initiative of the period goes into
one problem with one capacity per team, solved exactly by server.selector.solve_joint (HiGHS).

Rules, matching the single-team plans where they can:
- efforts are the likely estimates, capacities the teams' computed capacities;
- pinned and ruled-out marks are kept; either-or sets are per team (names are a team's own);
- a need on another initiative of the period is passed through (any team: that is the point),
  a need on one planned in an earlier period counts as met, any other need blocks;
- a team without capacity (no members yet) cannot take work: initiatives that need its effort
  are left out and listed.
"""

from __future__ import annotations

import re
from collections.abc import Mapping
from dataclasses import dataclass, field, replace

from sqlmodel import Session, col, select

from server.message_titles import titled_refusal, with_titles
from server.models import Initiative, Period
from server.planning.team_capacity import capacity_of
from server.selector import JointItem, JointSelection, SelectorInputError, solve_joint
from server.store.initiatives import InitiativeRecord, list_initiatives
from server.store.periods import get_period
from server.store.teams import list_teams

_TEAM_KEY = re.compile(r"team '(\d+)'")


@dataclass(frozen=True)
class SharedInitiative:
    """A cross-team initiative as the overview shows it."""

    id: int
    title: str
    owner: str
    value: float
    efforts: tuple[tuple[str, float], ...]  # (team name, likely days), owner first
    chosen: bool  # in the joint plan
    state: str


@dataclass(frozen=True)
class TeamLoad:
    team_id: int
    name: str
    capacity: float
    effort: float
    headroom: float


@dataclass(frozen=True)
class JointPlan:
    period: Period
    items: tuple[JointItem, ...]
    capacities: dict[str, float]  # team id (as text) -> days
    selection: JointSelection | None
    shared: tuple[SharedInitiative, ...]
    loads: tuple[TeamLoad, ...]  # teams that carry effort on some initiative of the period
    unplannable: tuple[str, ...]  # titles left out because a team has no capacity
    blocked: tuple[str, ...]  # titles left out because a need lies outside the period
    message: str | None  # why no joint plan could be made
    titles: dict[int, str] = field(default_factory=dict)  # every initiative of the period


def _joint_needs(
    session: Session, records: list[InitiativeRecord], period: Period
) -> tuple[dict[int, list[int]], set[int]]:
    inside = {r.row.id for r in records}
    outside_ids = {n for r in records for n in r.needs if n not in inside}
    earlier: set[int] = set()
    if outside_ids:
        rows = session.exec(select(Initiative).where(col(Initiative.id).in_(outside_ids)))
        for row in rows:
            need_period = session.get(Period, row.period_id) if row.period_id else None
            if need_period is not None and need_period.end_date < period.start_date:
                earlier.add(row.id or 0)
    passed: dict[int, list[int]] = {}
    blocked: set[int] = set()
    for record in records:
        rid = record.row.id or 0
        for need in record.needs:
            if need in inside:
                passed.setdefault(rid, []).append(need)
            elif need not in earlier:
                blocked.add(rid)
    return passed, blocked


def joint_plan_for(session: Session, *, period_id: int, resolution: float = 0.5) -> JointPlan:
    """Plan every team of the period together; solve only when cross-team work exists."""
    period = get_period(session, period_id=period_id)
    teams = list_teams(session)
    names = {t.id or 0: t.name for t in teams}
    records = list_initiatives(session, period_id=period_id)
    capacities: dict[str, float] = {}
    for team in teams:
        days = capacity_of(session, team_id=team.id or 0, period_id=period_id)
        if days.breakdown.capacity_days > 0:
            capacities[str(team.id)] = days.breakdown.capacity_days
    passed, blocked = _joint_needs(session, records, period)
    items: list[JointItem] = []
    unplannable: list[str] = []
    for record in records:
        efforts = {str(t): line.likely for t, line in record.efforts.items()}
        if any(team not in capacities for team in efforts):
            unplannable.append(record.row.title)
            continue
        rid = record.row.id or 0
        state = record.row.state
        items.append(
            JointItem(
                key=str(rid),
                efforts=efforts,
                value=record.row.value,
                pinned=state == "pinned" and rid not in blocked,
                ruled_out=state == "ruled_out" or rid in blocked,
                needs=tuple(str(n) for n in passed.get(rid, [])),
                either_or=(
                    f"{record.row.team_id}:{record.row.either_or}" if record.row.either_or else None
                ),
            )
        )
    planned = {item.key for item in items}
    # A need on an initiative that could not be planned cannot be met either.
    items = [_without_unmet_needs(item, planned) for item in items]
    cross = [r for r in records if len(r.efforts) > 1]
    selection = None
    message = None
    titles = {str(r.row.id): r.row.title for r in records}
    if cross and capacities and items:
        try:
            selection = solve_joint(items, capacities, resolution=resolution)
        except SelectorInputError as exc:
            message = titled_refusal(_teams_named(exc.message, names), exc.field, titles)
        if selection is not None and selection.infeasibility:
            worded = with_titles(_teams_named(selection.infeasibility, names), titles)
            selection = replace(selection, infeasibility=worded)
    elif cross:
        message = "No team with capacity takes part, so there is nothing to plan jointly."
    chosen = set(selection.chosen) if selection is not None else set()
    shared = tuple(
        SharedInitiative(
            id=r.row.id or 0,
            title=r.row.title,
            owner=names.get(r.row.team_id, "?"),
            value=r.row.value,
            efforts=tuple(
                (names.get(t, "?"), line.likely)
                for t, line in sorted(r.efforts.items(), key=lambda kv: kv[0] != r.row.team_id)
            ),
            chosen=str(r.row.id) in chosen,
            state=r.row.state,
        )
        for r in cross
    )
    loads = ()
    if selection is not None:
        loads = tuple(
            TeamLoad(
                team_id=int(key),
                name=names.get(int(key), "?"),
                capacity=selection.capacity[key],
                effort=selection.effort[key],
                headroom=selection.headroom[key],
            )
            for key in capacities
            if any(key in item.efforts for item in items)
        )
    return JointPlan(
        period=period,
        items=tuple(items),
        capacities=capacities,
        selection=selection,
        shared=shared,
        loads=loads,
        unplannable=tuple(unplannable),
        blocked=tuple(r.row.title for r in records if (r.row.id or 0) in blocked),
        message=message,
        titles={r.row.id or 0: r.row.title for r in records},
    )


def _teams_named(text: str, names: Mapping[int, str]) -> str:
    """The selector names a team by its key (the id as text): name it as pages do."""
    return _TEAM_KEY.sub(lambda m: f"team {names.get(int(m[1]), m[1])}", text)


def _without_unmet_needs(item: JointItem, planned: set[str]) -> JointItem:
    if all(need in planned for need in item.needs):
        return item
    return JointItem(
        key=item.key,
        efforts=item.efforts,
        value=item.value,
        pinned=False,
        ruled_out=True,
        needs=tuple(n for n in item.needs if n in planned),
        either_or=item.either_or,
    )
