"""Live plans: a team's stored initiatives in a period, turned into a selector problem and solved.

The planning layer decides what the selector sees:
- the effort of each initiative: its likely estimate, or the chosen confidence-level quantile of
  its three-point estimate (single estimates get the team's default spread, if any);
- pinned and ruled-out marks, plus what a person forces in or out for a what-if;
- needs: a need on an initiative of this plan is passed through; a need on one planned in an
  earlier period, or pinned by another team in this period, counts as met; a need on one that
  is later, unscheduled, or not pinned by its team blocks the initiative (it cannot be chosen
  yet), with a warning saying so;
- either-or sets as stored (set names are per team).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from functools import lru_cache

from sqlmodel import Session, col, select

from server.capacity import CapacityBreakdown, MemberAvailability, team_capacity
from server.message_titles import with_titles
from server.models import Initiative, Period, Team
from server.planning.team_capacity import TeamCapacity, capacity_of
from server.selector import (
    Explanation,
    Item,
    Problem,
    Selection,
    SelectorInputError,
    chosen_at,
    default_curve_to,
    solve,
)
from server.selector.risk import (
    FitEstimate,
    ThreePoint,
    efforts_at_confidence,
    fit_probability,
    spread_contributors,
)
from server.store.initiatives import InitiativeRecord, list_initiatives
from server.store.periods import get_period
from server.store.teams import get_team
from server.wording import counted, days, in_days, possessive

FIT_DRAWS = 10_000
# In the warning about rounding; stored plans' pages find it by this and say it once, their way.
ROUNDING_WARNING_MARK = " rounded up to the "


@dataclass(frozen=True)
class PlanOptions:
    """What-if settings on top of the stored data; the defaults give the plain live plan."""

    resolution: float = 0.5
    confidence: float | None = None  # None: plan with likely estimates
    capacity_days: float | None = None  # replaces the computed capacity
    focus_factor: float | None = None
    reserve_pct: float | None = None
    days_off: Mapping[int, float] = field(default_factory=dict)  # member id -> days off
    forced_in: frozenset[int] = frozenset()
    forced_out: frozenset[int] = frozenset()
    explain: bool = True
    curve: bool = True


@dataclass(frozen=True)
class PlanRow:
    record: InitiativeRecord
    key: str
    effort_days: float  # the effort the selector planned with
    estimate: ThreePoint
    chosen: bool
    state: str  # stored state
    forced: str | None  # "in" / "out" when a what-if forces it
    blocked_by: tuple[str, ...]  # titles of needs that cannot be met in this plan
    other_teams: tuple[str, ...]  # names of other teams that also spend effort on it
    explanation: Explanation | None

    @property
    def id(self) -> int:
        return self.record.row.id or 0

    @property
    def title(self) -> str:
        return self.record.row.title

    @property
    def value(self) -> float:
        return self.record.row.value


@dataclass(frozen=True)
class LivePlan:
    team: Team
    period: Period
    capacity: CapacityBreakdown
    options: PlanOptions
    problem: Problem
    selection: Selection
    rows: tuple[PlanRow, ...]
    warnings: tuple[str, ...]
    fit: FitEstimate | None
    spread_leaders: tuple[tuple[str, float], ...]  # (title, share of variance)
    # With a confidence level other than P50: the value of the P50 plan, to show the price of
    # the extra certainty.
    p50_value: float | None = None

    def worded_selection(self) -> Selection:
        """The selection as a person reads it, as snapshots and the API give it: initiatives
        named by title in its infeasibility and reasons, blocked work said to be blocked."""
        titles = {row.key: row.title for row in self.rows}
        worded = {row.key: row.explanation for row in self.rows if row.explanation is not None}
        selection = self.selection
        explanations = selection.explanations
        if explanations is not None:
            explanations = tuple(
                replace(e, reason=with_titles(e.reason, titles, e.displaces, e.moves_with))
                for e in (worded.get(x.key, x) for x in explanations)
            )
        infeasibility = selection.infeasibility and with_titles(
            selection.infeasibility, titles, selection.forced_by_needs
        )
        return replace(selection, explanations=explanations, infeasibility=infeasibility)

    @property
    def chosen_rows(self) -> list[PlanRow]:
        return [row for row in self.rows if row.chosen]

    @property
    def left_out_rows(self) -> list[PlanRow]:
        return [row for row in self.rows if not row.chosen]

    @property
    def pinned_effort(self) -> float:
        return sum(row.effort_days for row in self.rows if row.chosen and row.state == "pinned")

    @property
    def utilisation(self) -> float | None:
        cap = self.selection.capacity
        return self.selection.effort / cap if cap > 0 else None


def _estimate(record: InitiativeRecord, team_id: int, default_spread: float) -> ThreePoint:
    line = record.efforts.get(team_id) or record.own_effort
    if line.low is not None and line.high is not None:
        return ThreePoint(line.low, line.likely, line.high)
    return ThreePoint.from_single(line.likely, default_spread)


def _planned_efforts(
    estimates: list[ThreePoint],
    records: list[InitiativeRecord],
    team_id: int,
    confidence: float | None,
) -> list[float]:
    if confidence is None:
        return [(r.efforts.get(team_id) or r.own_effort).likely for r in records]
    return [float(x) for x in efforts_at_confidence(estimates, confidence)]


def _apply_capacity_overrides(base: TeamCapacity, options: PlanOptions) -> CapacityBreakdown:
    breakdown = base.breakdown
    if options.days_off or options.focus_factor is not None or options.reserve_pct is not None:
        members = [
            MemberAvailability(
                name=m.name,
                days_off=options.days_off.get(mid, m.days_off),
                allocation=m.allocation,
            )
            for mid, m in zip(base.member_ids, breakdown.members, strict=True)
        ]
        breakdown = team_capacity(
            breakdown.working_days,
            members,
            options.focus_factor if options.focus_factor is not None else breakdown.focus_factor,
            options.reserve_pct if options.reserve_pct is not None else breakdown.reserve_pct,
        )
    if options.capacity_days is not None:
        breakdown = replace(breakdown, capacity_days=options.capacity_days)
    return breakdown


def _need_status(
    session: Session, records: list[InitiativeRecord], period: Period
) -> tuple[dict[int, list[int]], dict[int, list[str]], list[str]]:
    """Split each initiative's needs into ones inside the plan and ones that block it."""
    inside = {r.row.id for r in records}
    outside_ids = {n for r in records for n in r.needs if n not in inside}
    outside: dict[int, tuple[Initiative, Period | None]] = {}
    if outside_ids:
        rows = session.exec(select(Initiative).where(col(Initiative.id).in_(outside_ids)))
        for row in rows:
            outside[row.id or 0] = (
                row,
                session.get(Period, row.period_id) if row.period_id else None,
            )
    passed: dict[int, list[int]] = {}
    blocked: dict[int, list[str]] = {}
    warnings: list[str] = []
    for record in records:
        rid = record.row.id or 0
        for need in record.needs:
            if need in inside:
                passed.setdefault(rid, []).append(need)
                continue
            row, need_period = outside.get(need, (None, None))
            if (
                row is not None
                and need_period is not None
                and need_period.end_date < period.start_date
            ):
                continue  # planned in an earlier period: treated as delivered
            if row is not None and row.period_id == period.id and row.state == "pinned":
                continue  # another team has committed to it in this period
            title = row.title if row is not None else f"#{need}"
            blocked.setdefault(rid, []).append(title)
            if row is not None and row.period_id == period.id:
                warnings.append(
                    f"“{record.row.title}” needs “{title}”, which another team has not pinned in "
                    f"{period.name}; it cannot be chosen here until that team pins it (the "
                    "period overview plans both teams together)."
                )
            else:
                where = need_period.name if need_period is not None else "the backlog"
                warnings.append(
                    f"“{record.row.title}” needs “{title}”, which is in {where}, not earlier; "
                    "it cannot be chosen in this plan."
                )
    return passed, blocked, warnings


def _block_pinned_dependents(
    records: list[InitiativeRecord], passed: dict[int, list[int]], blocked: dict[int, list[str]]
) -> None:
    """Block pinned work that needs, inside this plan, something blocked.

    The selector leaves out candidates that need what cannot be chosen, but a pin on such work
    would contradict the block; so the block reaches pinned dependents here, with the title of
    the need that carries it.
    """
    titles = {r.row.id or 0: r.row.title for r in records}
    pinned = {r.row.id or 0 for r in records if r.row.state == "pinned"}
    changed = True
    while changed:
        changed = False
        for rid in sorted(pinned - blocked.keys()):
            stuck = [n for n in passed.get(rid, []) if n in blocked]
            if stuck:
                blocked[rid] = [titles[n] for n in stuck]
                changed = True


def blocked_needs(
    session: Session, records: list[InitiativeRecord], period: Period
) -> tuple[dict[int, list[int]], dict[int, list[str]], list[str]]:
    """Needs met inside the plan, the blocked initiatives (id -> titles of what blocks them)
    and the warnings about needs, for the initiatives of one plan."""
    passed, blocked, warnings = _need_status(session, records, period)
    _block_pinned_dependents(records, passed, blocked)
    return passed, blocked, warnings


def _blocked_explanation(
    explanation: Explanation | None, needs: tuple[str, ...]
) -> Explanation | None:
    """A blocked initiative goes to the selector as ruled out: say it is blocked, and why."""
    prefix = "Ruled out: never in the plan;"
    if explanation is None or not needs or not explanation.reason.startswith(prefix):
        return explanation
    named = ", ".join(f"“{t}”" for t in needs)
    reason = f"Blocked: it needs {named}, which cannot be chosen in this plan;" + (
        explanation.reason[len(prefix) :].replace("allowed in,", "were it free,")
    )
    return replace(explanation, reason=reason)


# A forced row goes to the selector pinned (in) or ruled out (out): its reason says forced.
_FORCED_REASONS = {
    "in": (
        ("Pinned: always in the plan;", "Forced in: in this plan by the what-if;"),
        ("without the pin", "without the forcing"),
        ("the pin costs no value", "the forcing costs no value"),
    ),
    "out": (
        ("Ruled out: never in the plan;", "Forced out: kept out of this plan by the what-if;"),
    ),
}


def _forced_explanation(explanation: Explanation | None, forced: str | None) -> Explanation | None:
    """Forced work explained as forced by the what-if, not as pinned or ruled out for good."""
    if explanation is None or forced is None:
        return explanation
    reason = explanation.reason
    for before, after in _FORCED_REASONS[forced]:
        reason = reason.replace(before, after)
    return replace(explanation, reason=reason)


def _refuse_forcing_in_blocked(
    records: list[InitiativeRecord], blocked: dict[int, list[str]], options: PlanOptions
) -> None:
    """Forcing in blocked work would plan it without what it needs: refuse, naming the need.

    A pin waits for its need (a warning); a what-if that forces the work in asks for a plan
    that cannot be carried out, and its value would count work that cannot start.
    """
    for record in records:
        rid = record.row.id or 0
        if rid in options.forced_in and rid in blocked:
            named = ", ".join(f"“{t}”" for t in blocked[rid])
            raise SelectorInputError(
                f"initiative '{rid}' is blocked: it needs {named}, which cannot be chosen in "
                "this plan, so it cannot be forced in.",
                field="forced_in",
                key=str(rid),
            )


def _problem(
    records: list[InitiativeRecord],
    estimates: list[ThreePoint],
    passed: dict[int, list[int]],
    blocked: dict[int, list[str]],
    options: PlanOptions,
    capacity_days: float,
    team_id: int,
) -> tuple[Problem, list[float]]:
    """The selector's problem for these rows, and each row's planned effort in days."""
    efforts = _planned_efforts(estimates, records, team_id, options.confidence)
    # A blocked member of an either-or set that holds a pin is kept out by the pin; marking
    # it ruled out as well would contradict the pin.
    pinned_sets = {
        r.row.either_or
        for r in records
        if r.row.either_or is not None
        and (r.row.state == "pinned" or (r.row.id or 0) in options.forced_in)
        and (r.row.id or 0) not in blocked
        and (r.row.id or 0) not in options.forced_out
    }
    items = []
    for record, effort in zip(records, efforts, strict=True):
        rid = record.row.id or 0
        forced_in = rid in options.forced_in
        kept_out_by_pin = rid in blocked and record.row.either_or in pinned_sets
        forced_out = rid in options.forced_out or (rid in blocked and not kept_out_by_pin)
        state = record.row.state
        items.append(
            Item(
                key=str(rid),
                effort=effort,
                value=record.row.value,
                pinned=(state == "pinned" or forced_in) and not forced_out,
                ruled_out=(state == "ruled_out" or forced_out) and not forced_in,
                needs=tuple(str(n) for n in passed.get(rid, [])),
                either_or=record.row.either_or,
            )
        )
    problem = Problem(
        items=tuple(items), capacity=max(capacity_days, 0.0), resolution=options.resolution
    )
    return problem, efforts


def _kept_out_by_rounding(
    rows: list[PlanRow], passed: dict[int, list[int]], selection: Selection, resolution: float
) -> list[str]:
    """Warn where rounding, not room, kept work out: an initiative left out whose real effort
    fits the real headroom and that the marks allow beside the chosen set.

    The selector counts efforts rounded up to the resolution and capacity rounded down, so
    such an initiative does not fit in its units although the days say it would.
    """
    if not selection.feasible or not selection.rounding.items_rounded_up:
        return []
    chosen_ids = {row.record.row.id for row in rows if row.chosen}
    taken_sets = {row.record.row.either_or for row in rows if row.chosen}
    fitting = [
        row
        for row in rows
        if not row.chosen
        and row.state != "ruled_out"
        and row.forced != "out"
        and not row.blocked_by
        and (row.record.row.either_or is None or row.record.row.either_or not in taken_sets)
        and all(n in chosen_ids for n in passed.get(row.record.row.id or 0, []))
        and row.effort_days <= selection.headroom + 1e-9
    ]
    return [
        f"“{row.title}” ({in_days(row.effort_days)}) would fit in the "
        f"{in_days(selection.headroom)} of headroom, but the plan counts in whole "
        f"{resolution:g}-day steps (each effort rounded up, the capacity down), so it does not "
        "fit there. A finer step (the "
        "LOADLINE_RESOLUTION setting) plans closer to the days entered."
        for row in fitting
    ]


def stated_headroom(*, feasible: bool, headroom: float, excess_days: float | None) -> float:
    """The headroom a page or download states: as estimated, except where pinned work fits
    as estimated but overruns once efforts are rounded up to the resolution; then the rounded
    overrun, below zero, so that no figure shows room beside "pinned work does not fit"."""
    if not feasible and headroom > 0 and excess_days:
        return -excess_days
    return headroom


def plan_for(
    session: Session, *, team_id: int, period_id: int, options: PlanOptions | None = None
) -> LivePlan:
    """Solve the live plan of a team in a period, with explanations, curve and fit."""
    options = options or PlanOptions()
    team = get_team(session, team_id=team_id)
    period = get_period(session, period_id=period_id)
    breakdown = _apply_capacity_overrides(
        capacity_of(session, team_id=team_id, period_id=period_id), options
    )
    records = list_initiatives(session, team_id=team_id, period_id=period_id, involving_team=True)
    passed, blocked, warnings = blocked_needs(session, records, period)
    warnings.extend(
        f"“{r.row.title}” is pinned but cannot be in this plan: it needs "
        + ", ".join(f"“{t}”" for t in blocked[r.row.id or 0])
        + ", which cannot be chosen here. The pin stays; it counts once that need is met."
        for r in records
        if r.row.state == "pinned" and (r.row.id or 0) in blocked
    )
    _refuse_forcing_in_blocked(records, blocked, options)
    estimates = [_estimate(r, team_id, team.default_spread) for r in records]
    problem, efforts = _problem(
        records, estimates, passed, blocked, options, breakdown.capacity_days, team_id
    )
    selection = _solve(
        problem,
        curve_to=default_curve_to(problem.capacity)
        if options.curve and problem.capacity > 0
        else None,
        explain=options.explain,
    )
    chosen = set(selection.chosen)
    explanations = {e.key: e for e in selection.explanations or ()}
    team_names = _team_names(session)
    rows = []
    for record, effort, estimate in zip(records, efforts, estimates, strict=True):
        rid = record.row.id or 0
        forced = "in" if rid in options.forced_in else "out" if rid in options.forced_out else None
        others = tuple(team_names.get(t, "?") for t in record.efforts if t != team_id)
        if record.row.team_id != team_id:
            others = tuple(dict.fromkeys((team_names.get(record.row.team_id, "?"), *others)))
        rows.append(
            PlanRow(
                record=record,
                key=str(rid),
                effort_days=effort,
                estimate=estimate,
                chosen=str(rid) in chosen,
                state=record.row.state,
                forced=forced,
                blocked_by=tuple(blocked.get(rid, [])),
                other_teams=others,
                explanation=_forced_explanation(
                    _blocked_explanation(explanations.get(str(rid)), tuple(blocked.get(rid, []))),
                    forced,
                ),
            )
        )
    cross = [row for row in rows if row.other_teams]
    if cross:
        need = "needs" if len(cross) == 1 else "need"
        warnings.append(
            f"{counted(len(cross), 'initiative')} also {need} effort from other teams; this page "
            f"plans {possessive(team.name)} share only. The period overview plans all teams "
            "together."
        )
    if selection.rounding.items_rounded_up:
        rounded = len(selection.rounding.items_rounded_up)
        lost = selection.rounding.capacity_days_lost
        # Said only when it happened: "rounded down by 0 days" read as a fault.
        capacity_too = f"; capacity was rounded down by {days(lost)} days" if lost > 1e-9 else ""
        warnings.append(
            f"{counted(rounded, 'effort')} {'was' if rounded == 1 else 'were'}"
            f"{ROUNDING_WARNING_MARK}"
            f"{options.resolution:g}-day resolution{capacity_too}."
        )
    warnings.extend(_kept_out_by_rounding(rows, passed, selection, options.resolution))
    if selection.forced_by_needs:
        titles = [r.title for r in rows if r.key in selection.forced_by_needs]
        warnings.append(
            "Pinned work needs these, so they are in the plan too: " + ", ".join(titles) + "."
        )
    chosen_estimates = [row.estimate for row in rows if row.chosen]
    fit = None
    leaders: tuple[tuple[str, float], ...] = ()
    if (
        chosen_estimates
        and problem.capacity > 0
        and any(not e.is_certain for e in chosen_estimates)
    ):
        fit = _fit(tuple(chosen_estimates), problem.capacity)
        chosen_rows = [row for row in rows if row.chosen]
        leaders = tuple(
            spread_contributors([row.title for row in chosen_rows], chosen_estimates, top=3)
        )
    p50_value = None
    if options.confidence is not None and options.confidence != 0.5:
        # The same rows at P50 efforts: what planning at this confidence gives up.
        p50_problem, _ = _problem(
            records,
            estimates,
            passed,
            blocked,
            replace(options, confidence=0.5),
            breakdown.capacity_days,
            team_id,
        )
        p50 = _solve(p50_problem, curve_to=None, explain=False)
        p50_value = p50.value if p50.feasible else None
    return LivePlan(
        p50_value=p50_value,
        team=team,
        period=period,
        capacity=breakdown,
        options=options,
        problem=problem,
        selection=selection,
        rows=tuple(rows),
        warnings=tuple(warnings),
        fit=fit,
        spread_leaders=leaders,
    )


# The selector and the Monte Carlo are pure functions of their (immutable, hashable) inputs, so
# their answers can be reused while the stored data is unchanged: every viewer of a plan in a
# meeting, and every worker process, gets the same answer it would compute. Bounded per process.
@lru_cache(maxsize=128)
def _solve(problem: Problem, *, curve_to: float | None, explain: bool) -> Selection:
    return solve(problem, curve_to=curve_to, explain=explain)


@lru_cache(maxsize=512)
def selection_at(problem: Problem, capacity_days: float) -> Selection:
    """The chosen set at one point of the capacity curve (cached like the plan itself)."""
    return chosen_at(problem, capacity_days)


@lru_cache(maxsize=256)
def _fit(estimates: tuple[ThreePoint, ...], capacity: float) -> FitEstimate:
    return fit_probability(estimates, capacity, draws=FIT_DRAWS)


def _team_names(session: Session) -> dict[int, str]:
    return {t.id or 0: t.name for t in session.exec(select(Team))}
