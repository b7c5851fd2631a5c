"""Plans for several teams at once, where an initiative may spend several teams' capacity.

Each team's capacity is one knapsack constraint, so the problem is a multi-dimensional
knapsack; it is solved exactly as a binary program with HiGHS (see milp). When only one team
carries effort, the single-team DP runs instead.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence

import numpy as np

from .constraints import decide, raise_conflict
from .errors import SelectorInputError
from .milp import BinaryProgram, solve_binary_program
from .model import Item, JointItem, JointSelection, Problem
from .rounding import scale_values, units_down, units_up
from .solve import solve
from .validation import check_capacity_units, check_number, check_problem, check_resolution


def _check_efforts(item: JointItem, teams: Mapping[str, float]) -> dict[str, float]:
    efforts = item.efforts
    if not isinstance(efforts, Mapping):
        raise SelectorInputError.for_item(
            item.key, "efforts", f"must map team names to days, got {efforts!r}"
        )
    checked: dict[str, float] = {}
    for team, days in efforts.items():
        if team not in teams:
            raise SelectorInputError.for_item(
                item.key, "efforts", f"names team {team!r}, which has no capacity given"
            )
        if isinstance(days, int | float) and not isinstance(days, bool) and days == 0:
            continue
        checked[team] = check_number(days, key=item.key, field="efforts")
    if not checked:
        raise SelectorInputError.for_item(
            item.key, "efforts", "must give more than zero days for at least one team"
        )
    return checked


def solve_joint(
    items: Sequence[JointItem], capacities: Mapping[str, float], *, resolution: float = 0.5
) -> JointSelection:
    """Return the value-optimal set of initiatives that fits every team's capacity."""
    r = check_resolution(resolution)
    if not isinstance(capacities, Mapping) or not capacities:
        raise SelectorInputError.for_problem("capacity", "must give at least one team's capacity")
    team_capacity: dict[str, float] = {}
    for team, days in capacities.items():
        team_capacity[team] = check_number(days, key=None, field=f"capacity of team {team!r}")
        check_capacity_units(team_capacity[team], r, field=f"capacity of team {team!r}")
    for item in items:
        if not isinstance(item, JointItem):
            raise SelectorInputError(
                f"items must be JointItem objects, got {type(item).__name__}", field="items"
            )
    efforts = [_check_efforts(item, team_capacity) for item in items]
    # Check keys, values, marks, needs and sets through the single-team rules.
    as_items = tuple(
        Item(
            key=item.key,
            effort=math.fsum(effort.values()),
            value=item.value,
            pinned=item.pinned,
            ruled_out=item.ruled_out,
            needs=item.needs,
            either_or=item.either_or,
        )
        for item, effort in zip(items, efforts, strict=True)
    )
    checked = check_problem(Problem(as_items, math.fsum(team_capacity.values()), r))
    involved = sorted({team for effort in efforts for team in effort})
    if len(involved) == 1:
        return _single_team(as_items, involved[0], team_capacity, r)
    decided = decide(checked)
    raise_conflict(checked, decided)
    teams = list(team_capacity)
    units = {
        team: [units_up(effort[team], r) if team in effort else 0 for effort in efforts]
        for team in teams
    }
    capacity_units = {team: units_down(team_capacity[team], r) for team in teams}
    left = {
        team: capacity_units[team] - sum(units[team][i] for i in decided.in_plan) for team in teams
    }
    over = {team: -left[team] * r for team in teams if left[team] < 0}
    if over:
        chosen = decided.in_plan
        message = (
            "Pinned work overruns "
            + "; ".join(f"team {team!r} by {days:g} days" for team, days in over.items())
            + "."
        )
        return _result(
            items,
            efforts,
            chosen,
            team_capacity,
            False,
            "none",
            "no method ran: pinned work exceeds a team's capacity",
            message,
            over,
        )
    free = [i for i in decided.free if all(units[t][i] <= left[t] for t in teams)]
    position = {item: k for k, item in enumerate(free)}
    scaled_values = scale_values(checked.values)
    scaled = scaled_values.values
    needs = []
    upper = np.ones(len(free))
    for i in free:
        for parent in decided.free_needs.get(i, ()):
            if parent in position:
                needs.append((position[i], position[parent]))
            else:
                upper[position[i]] = 0.0
    sets = []
    for members in checked.groups.values():
        inside = [position[i] for i in members if i in position]
        if len(inside) > 1:
            sets.append(inside)
    program = BinaryProgram(
        values=scaled[free].astype(np.float64) if free else np.zeros(0),
        capacities=[
            (np.array([units[t][i] for i in free], dtype=np.float64), left[t]) for t in teams
        ],
        needs=needs,
        sets=sets,
        integral=scaled_values.exact,
        upper=upper,
    )
    picked = solve_binary_program(program)
    chosen = tuple(sorted([*decided.in_plan, *(free[k] for k in picked)]))
    note = (
        f"{len(involved)} teams share initiatives: exact binary program with one capacity "
        f"constraint per team over {len(free)} initiatives, solved by HiGHS"
    )
    return _result(items, efforts, chosen, team_capacity, True, "milp-highs", note, None, {})


def _single_team(
    items: tuple[Item, ...], team: str, capacities: dict[str, float], resolution: float
) -> JointSelection:
    selection = solve(Problem(items, capacities[team], resolution))
    effort = dict.fromkeys(capacities, 0.0)
    effort[team] = selection.effort
    return JointSelection(
        feasible=selection.feasible,
        chosen=selection.chosen,
        value=selection.value,
        effort=effort,
        capacity=dict(capacities),
        headroom={name: capacities[name] - effort[name] for name in capacities},
        method=selection.method,
        method_note=f"only team {team!r} carries effort: single-team selector; "
        + selection.method_note,
        infeasibility=selection.infeasibility,
        excess_days={team: selection.excess_days} if selection.excess_days is not None else {},
    )


def _result(
    items: Sequence[JointItem],
    efforts: list[dict[str, float]],
    chosen: tuple[int, ...],
    capacities: dict[str, float],
    feasible: bool,
    method: str,
    note: str,
    infeasibility: str | None,
    over: dict[str, float],
) -> JointSelection:
    effort = {team: math.fsum(efforts[i].get(team, 0.0) for i in chosen) for team in capacities}
    return JointSelection(
        feasible=feasible,
        chosen=tuple(items[i].key for i in chosen),
        value=math.fsum(float(items[i].value) for i in chosen),
        effort=effort,
        capacity=dict(capacities),
        headroom={team: capacities[team] - effort[team] for team in capacities},
        method=method,
        method_note=note,
        infeasibility=infeasibility,
        excess_days=over,
    )
