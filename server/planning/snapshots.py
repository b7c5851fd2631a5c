"""Snapshots of plans: a live plan's inputs and result frozen as JSON-ready data.

A saved plan keeps two documents. `inputs` holds everything the plan was solved from (team,
period, capacity breakdown, every initiative's estimate, value and state, the what-if
options and the resolution); `result` holds what came out (chosen set, totals, curve,
explanations, warnings, fit probability). Both are built through the pydantic models below,
so the stored JSON always has the documented shape.

`inputs_digest` is the SHA-256 of the canonical inputs JSON (sorted keys, no spaces). Solving
the live data again with the same options and comparing digests tells cheaply whether live
data has moved on; `input_changes` then says what moved, per initiative and per capacity
figure.
"""

from __future__ import annotations

import hashlib
import json
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

from pydantic import BaseModel
from sqlmodel import Session

from server.capacity import CapacityBreakdown
from server.errors import InputError, NotFoundError
from server.message_titles import titled_refusal
from server.models import Period
from server.planning import curve_chart
from server.planning.plans import ROUNDING_WARNING_MARK, LivePlan, PlanOptions, plan_for
from server.planning.team_capacity import capacity_of, no_capacity_message
from server.selector import Rounding, SelectorInputError, default_curve_to
from server.selector.risk import EstimateError
from server.store.initiatives import list_initiatives
from server.store.periods import get_period, period_working_days
from server.store.teams import get_team, list_members
from server.wording import STATE_LABELS, in_days

SNAPSHOT_FORMAT = 1


# --- the stored shapes ---------------------------------------------------------------------


class TeamSnapshot(BaseModel):
    id: int
    name: str
    default_spread: float


class PeriodSnapshot(BaseModel):
    id: int
    name: str
    kind: str
    start_date: str
    end_date: str
    weekmask: str
    non_working_dates: list[str]
    working_days: int


class MemberSnapshot(BaseModel):
    member_id: int
    name: str
    working_days: int
    days_off: float
    available_days: float
    allocation: float
    contributed_days: float


class CapacitySnapshot(BaseModel):
    working_days: int
    members: list[MemberSnapshot]
    gross_days: float
    focus_factor: float
    focused_days: float
    reserve_pct: float
    reserve_days: float
    capacity_days: float


class StoredEffort(BaseModel):
    """The effort as typed: a single estimate (low and high empty) or three points."""

    likely: float
    low: float | None
    high: float | None


class Estimate(BaseModel):
    """The estimate the risk figures used (a single effort may carry the team's spread)."""

    low: float
    likely: float
    high: float


class InitiativeSnapshot(BaseModel):
    key: str
    id: int
    title: str
    owner_team_id: int
    effort: StoredEffort
    estimate: Estimate
    planned_effort: float  # what the selector planned with (likely, or the confidence quantile)
    value: float
    confidence: float | None
    state: str
    forced: str | None  # "in" / "out" when the plan forced it
    either_or: str | None
    needs: list[str]  # keys of initiatives of this plan it needs
    blocked_by: list[str]  # titles of needs outside the plan that block it
    other_teams: list[str]


class OptionsSnapshot(BaseModel):
    resolution: float
    confidence: float | None
    capacity_days: float | None
    focus_factor: float | None
    reserve_pct: float | None
    days_off: dict[str, float]  # member id -> days off
    forced_in: list[int]
    forced_out: list[int]


class PlanInputs(BaseModel):
    format: int = SNAPSHOT_FORMAT
    teams: list[TeamSnapshot]
    period: PeriodSnapshot
    capacity: CapacitySnapshot
    options: OptionsSnapshot
    initiatives: list[InitiativeSnapshot]


class RoundingSnapshot(BaseModel):
    resolution: float
    capacity_units: int
    capacity_days_used: float
    capacity_days_lost: float
    items_rounded_up: list[str]


class CurveSnapshot(BaseModel):
    capacity_days: list[float]
    values: list[float]
    # True: the values hold only at the listed capacities (too many steps to find them all);
    # between two the value lies between theirs. Snapshots older than the field are whole.
    sampled: bool = False


class ExplanationSnapshot(BaseModel):
    key: str
    chosen: bool
    value_if_in: float | None
    value_if_out: float | None
    regret: float
    threshold_value: float | None
    displaces: list[str]
    reason: str
    constraint_cost: float | None
    moves_with: list[str] = []  # absent from plans saved before it was recorded


class FitSnapshot(BaseModel):
    probability: float
    standard_error: float
    draws: int
    seed: int
    exact: bool
    label: str


class SpreadLeader(BaseModel):
    title: str
    share: float


class PlanResult(BaseModel):
    feasible: bool
    chosen: list[str]
    value: float
    effort: float
    capacity: float
    headroom: float
    utilisation: float | None
    method: str
    method_note: str
    infeasibility: str | None
    excess_days: float | None
    forced_by_needs: list[str]
    rounding: RoundingSnapshot
    curve: CurveSnapshot | None
    explanations: list[ExplanationSnapshot]
    warnings: list[str]
    fit: FitSnapshot | None
    spread_leaders: list[SpreadLeader]
    confidence: float | None
    p50_value: float | None
    scenario_name: str | None
    changed_inputs: list[str]  # the scenario's changes in words, as they were at saving
    # The team's total days off in the live data, kept when a scenario changes days off, so a
    # published link can state the change as a team total. Older snapshots lack it.
    live_days_off: float | None = None


@dataclass(frozen=True)
class Snapshot:
    inputs: PlanInputs
    result: PlanResult
    digest: str

    def inputs_json(self) -> dict[str, Any]:
        return self.inputs.model_dump(mode="json")

    def result_json(self) -> dict[str, Any]:
        return self.result.model_dump(mode="json")


# --- building snapshots --------------------------------------------------------------------


def canonical_json(document: Mapping[str, Any]) -> str:
    """One fixed text for a JSON document: sorted keys, no spaces, no NaN."""
    return json.dumps(
        document, sort_keys=True, separators=(",", ":"), ensure_ascii=False, allow_nan=False
    )


def inputs_digest(inputs: Mapping[str, Any]) -> str:
    return hashlib.sha256(canonical_json(inputs).encode("utf-8")).hexdigest()


def solve_live(session: Session, *, team_id: int, period_id: int, options: PlanOptions) -> LivePlan:
    """Solve a live plan; input the selector refuses becomes a field-named InputError."""
    try:
        return plan_for(session, team_id=team_id, period_id=period_id, options=options)
    except SelectorInputError as exc:  # named by title: the selector names initiatives by key
        if exc.field == "capacity":
            message = no_capacity_message(session, period_id=period_id)
            raise InputError(message, field="capacity") from exc
        records = list_initiatives(
            session, team_id=team_id, period_id=period_id, involving_team=True
        )
        titles = {str(r.row.id): r.row.title for r in records}
        raise InputError(titled_refusal(exc.message, exc.field, titles), field=exc.field) from exc
    except EstimateError as exc:
        raise InputError(str(exc), field=exc.field) from exc
    except ValueError as exc:  # capacity arithmetic refuses a focus factor or reserve
        raise InputError(str(exc), field="capacity") from exc


def _options_snapshot(options: PlanOptions) -> OptionsSnapshot:
    return OptionsSnapshot(
        resolution=options.resolution,
        confidence=options.confidence,
        capacity_days=options.capacity_days,
        focus_factor=options.focus_factor,
        reserve_pct=options.reserve_pct,
        days_off={str(k): float(v) for k, v in sorted(options.days_off.items())},
        forced_in=sorted(options.forced_in),
        forced_out=sorted(options.forced_out),
    )


def capacity_snapshot(breakdown: CapacityBreakdown, member_ids: Sequence[int]) -> CapacitySnapshot:
    members = [
        MemberSnapshot(
            member_id=member_id,
            name=m.name,
            working_days=m.working_days,
            days_off=m.days_off,
            available_days=m.available_days,
            allocation=m.allocation,
            contributed_days=m.contributed_days,
        )
        for member_id, m in zip(member_ids, breakdown.members, strict=True)
    ]
    return CapacitySnapshot(
        working_days=breakdown.working_days,
        members=members,
        gross_days=breakdown.gross_days,
        focus_factor=breakdown.focus_factor,
        focused_days=breakdown.focused_days,
        reserve_pct=breakdown.reserve_pct,
        reserve_days=breakdown.reserve_days,
        capacity_days=breakdown.capacity_days,
    )


def _period_snapshot(period: Period) -> PeriodSnapshot:
    return PeriodSnapshot(
        id=period.id or 0,
        name=period.name,
        kind=period.kind,
        start_date=period.start_date.isoformat(),
        end_date=period.end_date.isoformat(),
        weekmask=period.weekmask,
        non_working_dates=list(period.non_working_dates),
        working_days=period_working_days(period),
    )


def _inputs_of(plan: LivePlan, member_ids: list[int]) -> PlanInputs:
    team, period, breakdown = plan.team, plan.period, plan.capacity
    keys = {row.key for row in plan.rows}
    initiatives = []
    for row in plan.rows:
        line = row.record.efforts.get(team.id or 0) or row.record.own_effort
        initiatives.append(
            InitiativeSnapshot(
                key=row.key,
                id=row.id,
                title=row.title,
                owner_team_id=row.record.row.team_id,
                effort=StoredEffort(likely=line.likely, low=line.low, high=line.high),
                estimate=Estimate(
                    low=row.estimate.low, likely=row.estimate.likely, high=row.estimate.high
                ),
                planned_effort=row.effort_days,
                value=row.value,
                confidence=row.record.row.confidence,
                state=row.state,
                forced=row.forced,
                either_or=row.record.row.either_or,
                needs=[str(n) for n in row.record.needs if str(n) in keys],
                blocked_by=list(row.blocked_by),
                other_teams=list(row.other_teams),
            )
        )
    return PlanInputs(
        teams=[TeamSnapshot(id=team.id or 0, name=team.name, default_spread=team.default_spread)],
        period=_period_snapshot(period),
        capacity=capacity_snapshot(breakdown, member_ids),
        options=_options_snapshot(plan.options),
        initiatives=initiatives,
    )


def _finite(value: float | None) -> float | None:
    """A ratio over a vanishing capacity is no figure at all (and not valid JSON)."""
    return value if value is not None and math.isfinite(value) else None


def _curve_of(plan: LivePlan) -> CurveSnapshot | None:
    """The curve the live plan page shows: the DP's own, or found by solving again (HiGHS)."""
    selection = plan.selection
    if selection.curve is not None:
        curve = selection.curve
        return CurveSnapshot(capacity_days=list(curve.capacity_days), values=list(curve.values))
    if not (plan.options.curve and selection.feasible and selection.capacity > 0):
        return None
    probed = curve_chart.probed_curve(
        plan.problem, default_curve_to(selection.capacity), curve_chart.MAX_CURVE_SOLVES
    )
    if not probed.curve.capacity_days:
        return None
    return CurveSnapshot(
        capacity_days=list(probed.curve.capacity_days),
        values=list(probed.curve.values),
        sampled=not probed.complete,
    )


def _result_of(
    plan: LivePlan,
    scenario_name: str | None,
    changed_inputs: list[str],
    live_days_off: float | None = None,
) -> PlanResult:
    selection = plan.worded_selection()
    rounding = selection.rounding
    fit = plan.fit
    return PlanResult(
        feasible=selection.feasible,
        chosen=list(selection.chosen),
        value=selection.value,
        effort=selection.effort,
        capacity=selection.capacity,
        headroom=selection.headroom,
        utilisation=_finite(plan.utilisation),
        method=selection.method,
        method_note=selection.method_note,
        infeasibility=selection.infeasibility,
        excess_days=selection.excess_days,
        forced_by_needs=list(selection.forced_by_needs),
        rounding=RoundingSnapshot(
            resolution=rounding.resolution,
            capacity_units=rounding.capacity_units,
            capacity_days_used=rounding.capacity_days_used,
            capacity_days_lost=rounding.capacity_days_lost,
            items_rounded_up=list(rounding.items_rounded_up),
        ),
        curve=_curve_of(plan),
        explanations=[
            ExplanationSnapshot(
                key=e.key,
                chosen=e.chosen,
                value_if_in=e.value_if_in,
                value_if_out=e.value_if_out,
                regret=e.regret,
                threshold_value=e.threshold_value,
                displaces=list(e.displaces),
                reason=e.reason,
                constraint_cost=e.constraint_cost,
                moves_with=list(e.moves_with),
            )
            for e in selection.explanations or ()
        ],
        warnings=list(plan.warnings),
        fit=FitSnapshot(
            probability=fit.probability,
            standard_error=fit.standard_error,
            draws=fit.draws,
            seed=fit.seed,
            exact=fit.exact,
            label=fit.label(),
        )
        if fit is not None
        else None,
        spread_leaders=[SpreadLeader(title=t, share=s) for t, s in plan.spread_leaders],
        confidence=plan.options.confidence,
        p50_value=plan.p50_value,
        scenario_name=scenario_name,
        changed_inputs=changed_inputs,
        live_days_off=live_days_off,
    )


def member_ids_of(session: Session, *, team_id: int) -> list[int]:
    """Member ids in the order of a team's capacity breakdown (the order list_members gives)."""
    return [m.id or 0 for m in list_members(session, team_id=team_id)]


def inputs_of(session: Session, plan: LivePlan) -> PlanInputs:
    """The inputs document of a live plan."""
    return _inputs_of(plan, member_ids_of(session, team_id=plan.team.id or 0))


def unsolved_inputs(
    session: Session, *, team_id: int, period_id: int, resolution: float
) -> PlanInputs:
    """Live inputs read without solving, for when the live plan cannot be solved (no capacity).

    Efforts are as typed (a single estimate counts as certain here).
    """
    team = get_team(session, team_id=team_id)
    period = get_period(session, period_id=period_id)
    capacity = capacity_of(session, team_id=team_id, period_id=period_id)
    records = list_initiatives(session, team_id=team_id, period_id=period_id, involving_team=True)
    keys = {str(r.row.id) for r in records}
    initiatives = []
    for record in records:
        line = record.efforts.get(team_id) or record.own_effort
        initiatives.append(
            InitiativeSnapshot(
                key=str(record.row.id),
                id=record.row.id or 0,
                title=record.row.title,
                owner_team_id=record.row.team_id,
                effort=StoredEffort(likely=line.likely, low=line.low, high=line.high),
                estimate=Estimate(
                    low=line.low if line.low is not None else line.likely,
                    likely=line.likely,
                    high=line.high if line.high is not None else line.likely,
                ),
                planned_effort=line.likely,
                value=record.row.value,
                confidence=record.row.confidence,
                state=record.row.state,
                forced=None,
                either_or=record.row.either_or,
                needs=[str(n) for n in record.needs if str(n) in keys],
                blocked_by=[],
                other_teams=[],
            )
        )
    return PlanInputs(
        teams=[TeamSnapshot(id=team.id or 0, name=team.name, default_spread=team.default_spread)],
        period=_period_snapshot(period),
        capacity=capacity_snapshot(capacity.breakdown, capacity.member_ids),
        options=_options_snapshot(PlanOptions(resolution=resolution)),
        initiatives=initiatives,
    )


def snapshot_of(
    session: Session,
    plan: LivePlan,
    *,
    scenario_name: str | None = None,
    changed_inputs: list[str] | None = None,
    live_days_off: float | None = None,
) -> Snapshot:
    """Freeze a live plan into its inputs and result documents and the inputs digest."""
    inputs = inputs_of(session, plan)
    result = _result_of(plan, scenario_name, list(changed_inputs or []), live_days_off)
    return Snapshot(
        inputs=inputs, result=result, digest=inputs_digest(inputs.model_dump(mode="json"))
    )


# --- reading snapshots back ----------------------------------------------------------------


@dataclass(frozen=True)
class PlanView:
    """A stored snapshot ready for pages and exports: rows split into chosen and left out."""

    inputs: PlanInputs
    result: PlanResult
    chosen: list[InitiativeSnapshot]
    left_out: list[InitiativeSnapshot]
    explanations: dict[str, ExplanationSnapshot]
    titles: dict[str, str]

    @property
    def team_names(self) -> str:
        return ", ".join(t.name for t in self.inputs.teams)

    @property
    def pinned_effort(self) -> float:
        return sum(i.planned_effort for i in self.chosen if i.state == "pinned")

    @property
    def warnings(self) -> list[str]:
        """The stored warnings but the one on rounding: pages state it once, from `rounding`."""
        return [w for w in self.result.warnings if ROUNDING_WARNING_MARK not in w]

    @property
    def rounding_note(self) -> str | None:
        return rounding_note(self.result.rounding)


def rounding_note(rounding: RoundingSnapshot | Rounding) -> str | None:
    """One sentence on rounding to the resolution, when it changed what the selector planned.

    Capacity and headroom stay in days as entered (capacity minus the chosen efforts); the
    selector plans with the capacity rounded down and each effort rounded up to the resolution.
    """
    rounded = len(rounding.items_rounded_up)
    lost = rounding.capacity_days_lost > 1e-9
    if not rounded and not lost:
        return None
    steps = f"The selector plans in {rounding.resolution:g}-day steps"
    parts = []
    if lost:
        parts.append(f"counts {round(rounding.capacity_days_used, 2):g} days of the capacity")
    if rounded:
        parts.append(f"rounds {rounded} effort{'s' if rounded != 1 else ''} up")
    return (
        f"{steps}: it {' and '.join(parts)}. Capacity, effort and headroom are shown in days "
        "as entered."
    )


def view_of(inputs: Mapping[str, Any], result: Mapping[str, Any]) -> PlanView:
    """Read a stored snapshot (the JSON documents of a saved plan) for display."""
    plan_inputs = PlanInputs.model_validate(inputs)
    plan_result = PlanResult.model_validate(result)
    chosen = set(plan_result.chosen)
    return PlanView(
        inputs=plan_inputs,
        result=plan_result,
        chosen=[i for i in plan_inputs.initiatives if i.key in chosen],
        left_out=[i for i in plan_inputs.initiatives if i.key not in chosen],
        explanations={e.key: e for e in plan_result.explanations},
        titles={i.key: i.title for i in plan_inputs.initiatives},
    )


def view_from_snapshot(snapshot: Snapshot) -> PlanView:
    """Display a snapshot that is not stored (a scenario being looked at)."""
    return view_of(snapshot.inputs_json(), snapshot.result_json())


# --- what changed since a snapshot ---------------------------------------------------------


@dataclass(frozen=True)
class InputChange:
    """One difference between saved and live inputs, with a sentence for people."""

    area: str  # team | period | capacity | member | initiative | order | options
    subject: str
    field: str | None
    before: Any
    after: Any
    text: str


def _said(field: str, value: Any) -> str:
    """An initiative's field value in a sentence: states as the pages name them."""
    return STATE_LABELS.get(value, value) if field == "state" else _n(value)


def _n(value: Any) -> str:
    if value is None:
        return "none"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int | float):
        return f"{round(float(value), 2):g}"
    if isinstance(value, list):
        return ", ".join(str(v) for v in value) or "none"
    return str(value)


def _pct(share: Any) -> str:
    """A share (0.5) as the pages write it (50 %)."""
    return "none" if share is None else f"{round(float(share) * 100, 2):g} %"


_CAPACITY_FIELDS = (
    ("working_days", "Working days"),
    ("gross_days", "Available person-days"),
    ("focus_factor", "Focus factor"),
    ("focused_days", "Focused days"),
    ("reserve_pct", "Reserve (%)"),
    ("reserve_days", "Reserve (days)"),
    ("capacity_days", "Capacity (days)"),
)
_MEMBER_FIELDS = (
    ("days_off", "days off"),
    ("allocation", "share on team"),
    ("contributed_days", "days contributed"),
)
_EFFORT_FIELDS = ("low", "likely", "high")
_INITIATIVE_FIELDS = (
    ("planned_effort", "planned effort (days)"),
    ("value", "value score"),
    ("state", "state"),
    ("either_or", "either-or set"),
    ("confidence", "confidence"),
    ("blocked_by", "blocked by"),
    ("other_teams", "other teams"),
)


def _close(a: Any, b: Any) -> bool:
    if isinstance(a, float | int) and isinstance(b, float | int):
        return abs(float(a) - float(b)) <= 1e-9 * max(1.0, abs(float(a)), abs(float(b)))
    return bool(a == b)


def _capacity_changes(saved: PlanInputs, live: PlanInputs) -> list[InputChange]:
    out = []
    for name, label in _CAPACITY_FIELDS:
        before, after = getattr(saved.capacity, name), getattr(live.capacity, name)
        if not _close(before, after):
            out.append(
                InputChange(
                    "capacity",
                    "capacity",
                    name,
                    before,
                    after,
                    f"{label}: {_n(before)} → {_n(after)}",
                )
            )
    saved_members = {m.member_id: m for m in saved.capacity.members}
    live_members = {m.member_id: m for m in live.capacity.members}
    for member_id, m in saved_members.items():
        now = live_members.get(member_id)
        if now is None:
            out.append(
                InputChange("member", m.name, None, m.name, None, f"Member {m.name} left the team")
            )
            continue
        if now.name != m.name:
            out.append(
                InputChange(
                    "member", now.name, "name", m.name, now.name, f"Renamed {m.name} to {now.name}"
                )
            )
        for name, label in _MEMBER_FIELDS:
            before, after = getattr(m, name), getattr(now, name)
            if not _close(before, after):
                # A share is a percentage on every page that shows one.
                said = _pct if name == "allocation" else _n
                out.append(
                    InputChange(
                        "member",
                        now.name,
                        name,
                        before,
                        after,
                        f"{now.name}: {label} {said(before)} → {said(after)}",
                    )
                )
    for member_id, m in live_members.items():
        if member_id not in saved_members:
            out.append(
                InputChange(
                    "member",
                    m.name,
                    None,
                    None,
                    m.name,
                    f"Member {m.name} joined ({in_days(m.contributed_days)})",
                )
            )
    return out


def _initiative_changes(saved: PlanInputs, live: PlanInputs) -> list[InputChange]:
    out = []
    saved_rows = {i.key: i for i in saved.initiatives}
    live_rows = {i.key: i for i in live.initiatives}
    for key, before in saved_rows.items():
        after = live_rows.get(key)
        if after is None:
            out.append(
                InputChange(
                    "initiative",
                    before.title,
                    None,
                    before.title,
                    None,
                    f"“{before.title}” is no longer among the candidates (deleted or moved to "
                    "another period)",
                )
            )
            continue
        subject = after.title
        if before.title != after.title:
            out.append(
                InputChange(
                    "initiative",
                    subject,
                    "title",
                    before.title,
                    after.title,
                    f"“{before.title}” was renamed “{after.title}”",
                )
            )
        for name in _EFFORT_FIELDS:
            old, new = getattr(before.effort, name), getattr(after.effort, name)
            if not _close(old, new):
                out.append(
                    InputChange(
                        "initiative",
                        subject,
                        f"effort.{name}",
                        old,
                        new,
                        f"“{subject}”: effort ({name}) {_n(old)} → {_n(new)} days",
                    )
                )
        for name, label in _INITIATIVE_FIELDS:
            old, new = getattr(before, name), getattr(after, name)
            if name == "planned_effort" and not _close(old, new):
                # Only worth saying when the typed effort did not already say it.
                if before.effort == after.effort:
                    out.append(
                        InputChange(
                            "initiative",
                            subject,
                            name,
                            old,
                            new,
                            f"“{subject}”: {label} {_n(old)} → {_n(new)}",
                        )
                    )
                continue
            if name != "planned_effort" and not _close(old, new):
                out.append(
                    InputChange(
                        "initiative",
                        subject,
                        name,
                        old,
                        new,
                        f"“{subject}”: {label} {_said(name, old)} → {_said(name, new)}",
                    )
                )
        old_needs = sorted(saved_rows[k].title if k in saved_rows else k for k in before.needs)
        new_needs = sorted(live_rows[k].title if k in live_rows else k for k in after.needs)
        if old_needs != new_needs:
            out.append(
                InputChange(
                    "initiative",
                    subject,
                    "needs",
                    old_needs,
                    new_needs,
                    f"“{subject}”: needs {_n(old_needs)} → {_n(new_needs)}",
                )
            )
    for key, after in live_rows.items():
        if key not in saved_rows:
            out.append(
                InputChange(
                    "initiative",
                    after.title,
                    None,
                    None,
                    after.title,
                    f"“{after.title}” was added ({in_days(after.planned_effort)}, value "
                    f"{_n(after.value)})",
                )
            )
    common = [k for k in saved_rows if k in live_rows]
    if common != [k for k in live_rows if k in saved_rows]:
        out.append(
            InputChange(
                "order",
                "initiatives",
                "order",
                None,
                None,
                "The order of the initiatives changed (it decides between equally good plans)",
            )
        )
    return out


def input_changes(saved: PlanInputs, live: PlanInputs) -> list[InputChange]:
    """Every difference between saved and live inputs: team, period, capacity, initiatives."""
    out: list[InputChange] = []
    saved_teams = {t.id: t for t in saved.teams}
    for team in live.teams:
        before = saved_teams.get(team.id)
        if before is None:
            continue
        if before.name != team.name:
            out.append(
                InputChange(
                    "team",
                    team.name,
                    "name",
                    before.name,
                    team.name,
                    f"Team {before.name} was renamed {team.name}",
                )
            )
        if not _close(before.default_spread, team.default_spread):
            out.append(
                InputChange(
                    "team",
                    team.name,
                    "default_spread",
                    before.default_spread,
                    team.default_spread,
                    f"{team.name}: default spread of single estimates "
                    f"{_pct(before.default_spread)} → {_pct(team.default_spread)}",
                )
            )
    period_fields = ("name", "start_date", "end_date", "weekmask", "non_working_dates")
    for name in period_fields:
        before, after = getattr(saved.period, name), getattr(live.period, name)
        if before != after:
            out.append(
                InputChange(
                    "period",
                    live.period.name,
                    name,
                    before,
                    after,
                    f"Period {name.replace('_', ' ')}: {_n(before)} → {_n(after)}",
                )
            )
    if saved.options != live.options:
        out.append(
            InputChange(
                "options",
                "options",
                None,
                None,
                None,
                "The planning options differ (resolution or what-if settings)",
            )
        )
    return [*out, *_capacity_changes(saved, live), *_initiative_changes(saved, live)]


@dataclass(frozen=True)
class Drift:
    """How live data compares with a saved plan."""

    available: bool  # False when the team or period no longer exists
    moved_on: bool
    message: str
    changes: list[InputChange]
    live_value: float | None = None
    live_entered: list[str] | None = None  # titles the live plan chooses that the saved did not
    live_left: list[str] | None = None  # titles the saved plan chose that live no longer does


def options_of(inputs: PlanInputs) -> PlanOptions:
    """The PlanOptions a snapshot was solved with."""
    o = inputs.options
    return PlanOptions(
        resolution=o.resolution,
        confidence=o.confidence,
        capacity_days=o.capacity_days,
        focus_factor=o.focus_factor,
        reserve_pct=o.reserve_pct,
        days_off={int(k): v for k, v in o.days_off.items()},
        forced_in=frozenset(o.forced_in),
        forced_out=frozenset(o.forced_out),
    )


def drift_of(
    session: Session, *, inputs: Mapping[str, Any], result: Mapping[str, Any], digest: str
) -> Drift:
    """Solve the live data with the saved plan's options and say what has moved on."""
    view = view_of(inputs, result)
    saved = view.inputs
    team_id = saved.teams[0].id
    try:
        live_plan = solve_live(
            session,
            team_id=team_id,
            period_id=saved.period.id,
            # Solved exactly as when saved, so the chosen sets compare like with like.
            options=options_of(saved),
        )
    except NotFoundError:
        return Drift(
            available=False,
            moved_on=True,
            message="The team or period of this plan no longer exists; live data cannot be "
            "compared.",
            changes=[],
        )
    except InputError as exc:
        return Drift(
            available=False,
            moved_on=True,
            message=f"Live data cannot be planned at the moment: {exc.message}",
            changes=[],
        )
    live = inputs_of(session, live_plan)
    if inputs_digest(live.model_dump(mode="json")) == digest:
        return Drift(
            available=True,
            moved_on=False,
            message="Live data is as it was when this plan was saved.",
            changes=[],
            live_value=live_plan.selection.value,
            live_entered=[],
            live_left=[],
        )
    live_titles = {row.key: row.title for row in live_plan.rows}
    live_chosen = set(live_plan.selection.chosen)
    saved_chosen = set(view.result.chosen)
    return Drift(
        available=True,
        moved_on=True,
        message="Live data has moved on since this plan was saved.",
        changes=input_changes(saved, live),
        live_value=live_plan.selection.value,
        live_entered=[live_titles[k] for k in live_plan.selection.chosen if k not in saved_chosen],
        live_left=[view.titles.get(k, k) for k in view.result.chosen if k not in live_chosen],
    )
