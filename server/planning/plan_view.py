"""What the plan page shows, built once for the HTML page, its fragments and its JSON twin.

The what-if settings (initiatives forced in or out, the confidence level, the curve readout
step, the row order) live in the URL, so a what-if is a link that can be shared; nothing of a
what-if is stored. Edits (effort, value, state) are real changes and go through the store.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field, replace
from typing import Any
from urllib.parse import urlencode

from sqlmodel import Session

from server.message_titles import titled_refusal, with_titles
from server.models import Period, Team
from server.planning import curve_chart
from server.planning.curve_chart import (
    CurveChart,
    Readout,
    build_chart,
    default_delta,
    probed_curve,
    readout,
)
from server.planning.paste import decimal_point
from server.planning.plans import LivePlan, PlanOptions, PlanRow, plan_for
from server.planning.team_capacity import no_capacity_message
from server.planning.undo import COVERS as UNDO_COVERS
from server.planning.undo import Offer, redo_offer, undo_offer
from server.selector import SelectorInputError, default_curve_to
from server.selector.risk import FitEstimate, pert_mean, pert_sd
from server.store.initiatives import InitiativeRecord, list_initiatives
from server.store.periods import get_period, list_periods
from server.store.teams import get_team
from server.wording import days

CONFIDENCE_PRESETS = (50.0, 80.0, 90.0)
# Up to this many initiatives every row carries its explanation in the page (readable without
# scripts); above it explanations are fetched when a row is opened, to keep each re-solve
# and its page small.
INLINE_EXPLANATIONS_UP_TO = 60
ORDERS = ("plan", "entry")
BAR_UNITS = 1000.0


def _plain(value: float | None) -> str:
    """A number as typed back into a field: no exponent for usual sizes, no precision lost."""
    return "" if value is None else f"{value:.12g}"


# --- what-if settings from the URL ---------------------------------------------------------


@dataclass(frozen=True)
class WhatIf:
    """Settings of one view of the plan; all of them travel in the query string."""

    period_id: int | None
    forced_in: tuple[int, ...] = ()
    forced_out: tuple[int, ...] = ()
    confidence_pct: float | None = None  # None: plan with the likely estimates
    delta_days: float | None = None  # curve readout step; None: about 10 % of capacity
    order: str = "plan"  # plan: chosen first; entry: the order they were added

    def params(self) -> list[tuple[str, str]]:
        out: list[tuple[str, str]] = []
        if self.period_id is not None:
            out.append(("period_id", str(self.period_id)))
        out += [("force_in", str(i)) for i in self.forced_in]
        out += [("force_out", str(i)) for i in self.forced_out]
        if self.confidence_pct is not None:
            out.append(("confidence", _plain(self.confidence_pct)))
        if self.delta_days is not None:
            out.append(("delta", _plain(self.delta_days)))
        if self.order != "plan":
            out.append(("order", self.order))
        return out

    def query(self) -> str:
        return urlencode(self.params())

    def scenario_query(self) -> str:
        """The period and the what-if as fields of the scenario form (see
        planning.scenarios.parse_changes_form), to start a scenario from this view."""
        out: list[tuple[str, str]] = []
        if self.period_id is not None:
            out.append(("period_id", str(self.period_id)))
        out += [(f"forced.{i}", "in") for i in self.forced_in]
        out += [(f"forced.{i}", "out") for i in self.forced_out]
        if self.confidence_pct is not None:
            out.append(("confidence", f"P{_plain(self.confidence_pct)}"))
        return urlencode(out)

    def force_in(self, initiative_id: int) -> WhatIf:
        return replace(
            self,
            forced_in=(*[i for i in self.forced_in if i != initiative_id], initiative_id),
            forced_out=tuple(i for i in self.forced_out if i != initiative_id),
        )

    def force_out(self, initiative_id: int) -> WhatIf:
        return replace(
            self,
            forced_in=tuple(i for i in self.forced_in if i != initiative_id),
            forced_out=(*[i for i in self.forced_out if i != initiative_id], initiative_id),
        )

    def clear(self, initiative_id: int) -> WhatIf:
        return replace(
            self,
            forced_in=tuple(i for i in self.forced_in if i != initiative_id),
            forced_out=tuple(i for i in self.forced_out if i != initiative_id),
        )

    def without_forcing(self) -> WhatIf:
        return replace(self, forced_in=(), forced_out=())

    def with_order(self, order: str) -> WhatIf:
        return replace(self, order=order)

    @property
    def forcing(self) -> bool:
        return bool(self.forced_in or self.forced_out)

    @property
    def confidence_choice(self) -> str:
        if self.confidence_pct is None:
            return "likely"
        if self.confidence_pct in CONFIDENCE_PRESETS:
            return _plain(self.confidence_pct)
        return "custom"

    @property
    def confidence_label(self) -> str:
        if self.confidence_pct is None:
            return "likely estimates"
        return f"P{_plain(self.confidence_pct)}"

    def options(self, resolution: float) -> PlanOptions:
        return PlanOptions(
            resolution=resolution,
            confidence=None if self.confidence_pct is None else self.confidence_pct / 100,
            forced_in=frozenset(self.forced_in),
            forced_out=frozenset(self.forced_out),
        )


def _ids(values: Sequence[str]) -> tuple[int, ...]:
    out: list[int] = []
    for value in values:
        for part in value.replace(" ", "").split(","):
            if part.isdigit() and int(part) not in out:
                out.append(int(part))
    return tuple(out)


def _first(params: Mapping[str, Sequence[str]], name: str) -> str:
    values = params.get(name) or [""]
    return values[0].strip()


def parse_whatif(params: Mapping[str, Sequence[str]]) -> tuple[WhatIf, dict[str, str]]:
    """Read the what-if settings; a refused value is named and left at its default."""
    errors: dict[str, str] = {}
    period_text = _first(params, "period_id")
    period_id = int(period_text) if period_text.isdigit() else None
    forced_out = _ids(params.get("force_out", []))
    forced_in = tuple(i for i in _ids(params.get("force_in", [])) if i not in forced_out)
    choice = _first(params, "confidence").lower().removeprefix("p")
    confidence: float | None = None
    if choice == "custom":
        choice = _first(params, "confidence_pct").rstrip("% ")
        if not choice:
            errors["confidence_pct"] = "Enter a confidence level between 1 and 99 %."
    if choice not in {"", "likely", "custom"}:
        try:
            confidence = float(decimal_point(choice))  # 85,5 as typed where a comma is decimal
        except ValueError:
            errors["confidence_pct"] = f"“{choice}” is not a number; enter a level such as 85."
        else:
            if not 1 <= confidence <= 99:
                errors["confidence_pct"] = "The confidence level must be between 1 and 99 %."
                confidence = None
    delta: float | None = None
    delta_text = _first(params, "delta")
    if delta_text:
        try:
            delta = float(decimal_point(delta_text))
        except ValueError:
            errors["delta"] = f"“{delta_text}” is not a number of days."
        else:
            if not 0 < delta <= 10_000:
                errors["delta"] = "Enter a number of days above 0 and at most 10,000."
                delta = None
    order = _first(params, "order") or "plan"
    if order not in ORDERS:
        order = "plan"
    whatif = WhatIf(
        period_id=period_id,
        forced_in=forced_in,
        forced_out=forced_out,
        confidence_pct=confidence,
        delta_days=delta,
        order=order,
    )
    return whatif, errors


# --- rows ----------------------------------------------------------------------------------


@dataclass(frozen=True)
class ExplanationView:
    chosen: bool
    reason: str
    plan_value: float
    value_if_in: float | None
    value_if_out: float | None
    regret: float
    threshold_value: float | None
    displaces: tuple[str, ...]  # titles
    constraint_cost: float | None
    moves_with: tuple[str, ...] = ()  # titles


@dataclass(frozen=True)
class RowEdit:
    """A row as the person left it after a refused edit: their values, why, and what is stored."""

    values: Mapping[str, str]
    errors: Mapping[str, str] = field(default_factory=dict)
    current: Mapping[str, Any] | None = None  # stored values after a clash (stale version)
    note: str = ""  # after a clash: which fields were kept as typed and which refreshed
    # The stored values the row showed when it was opened, carried over a refusal that is
    # not a clash (the version stays the one it showed too); None: as stored now.
    shown: Mapping[str, str] | None = None


@dataclass(frozen=True)
class RowView:
    id: int
    title: str
    version: int
    value: float
    state: str
    effort_text: str  # the stored estimate: "5" or "3/5/8"
    value_text: str  # the stored value score as text
    planned_effort: float | None  # days the selector planned with, when not the likely one
    pert: tuple[float, float] | None  # PERT mean and (high - low) / 6 of a three-point estimate
    decision: str | None  # "in", "out", or None when there is no plan
    forced: str | None  # "in" / "out" while a what-if forces it
    blocked_by: tuple[str, ...]
    needs: tuple[str, ...]  # titles of the initiatives it needs inside this plan
    either_or: str | None  # the either-or set it belongs to
    other_teams: tuple[str, ...]
    owner_team_id: int
    editable: bool  # only the owning team edits an initiative
    explanation: ExplanationView | None
    change: str | None  # "entered" / "left" the plan with the last edit
    form: Mapping[str, str]
    errors: Mapping[str, str]
    current: Mapping[str, Any] | None
    note: str  # see RowEdit
    shown: Mapping[str, str]  # the stored values the row's form is based on (`shown_<field>`)


def effort_text(record: InitiativeRecord, team_id: int) -> str:
    line = record.efforts.get(team_id) or record.own_effort
    if line.low is not None and line.high is not None:
        return f"{_plain(line.low)}/{_plain(line.likely)}/{_plain(line.high)}"
    return _plain(line.likely)


def _explanation(row: PlanRow, plan: LivePlan, titles: Mapping[str, str]) -> ExplanationView | None:
    e = row.explanation
    if e is None:
        return None
    return ExplanationView(
        chosen=e.chosen,
        reason=with_titles(e.reason, titles, e.displaces, e.moves_with),
        plan_value=plan.selection.value,
        value_if_in=e.value_if_in,
        value_if_out=e.value_if_out,
        regret=e.regret,
        threshold_value=e.threshold_value,
        displaces=tuple(titles.get(k, k) for k in e.displaces),
        constraint_cost=e.constraint_cost,
        moves_with=tuple(titles.get(k, k) for k in e.moves_with),
    )


def _row_view(
    record: InitiativeRecord,
    team_id: int,
    *,
    plan_row: PlanRow | None,
    plan: LivePlan | None,
    titles: Mapping[str, str],
    edit: RowEdit | None,
    previous: frozenset[int] | None,
    forced: str | None = None,
) -> RowView:
    """forced: what the what-if forces, for a row without a plan_row to say it."""
    rid = record.row.id or 0
    decision = None
    change = None
    planned = None
    pert = None
    if plan_row is not None and plan is not None:
        decision = "in" if plan_row.chosen else "out"
        if previous is not None:
            was_in = rid in previous
            if plan_row.chosen and not was_in:
                change = "entered"
            elif was_in and not plan_row.chosen:
                change = "left"
        likely = (record.efforts.get(team_id) or record.own_effort).likely
        if abs(plan_row.effort_days - likely) > 1e-9:
            planned = plan_row.effort_days
        if not plan_row.estimate.is_certain:
            pert = (pert_mean(plan_row.estimate), pert_sd(plan_row.estimate))
    stored = row_form(record, team_id)
    stored_effort = stored["effort"]
    value_text = stored["value"]
    form = stored | {"version": str(record.row.version)}
    if edit is not None:
        form |= dict(edit.values)
    return RowView(
        id=rid,
        title=record.row.title,
        version=record.row.version,
        value=record.row.value,
        state=record.row.state,
        effort_text=stored_effort,
        value_text=value_text,
        planned_effort=planned,
        pert=pert,
        decision=decision,
        forced=plan_row.forced if plan_row else forced,
        blocked_by=plan_row.blocked_by if plan_row else (),
        needs=tuple(titles[str(n)] for n in record.needs if str(n) in titles),
        either_or=record.row.either_or,
        other_teams=plan_row.other_teams if plan_row else (),
        owner_team_id=record.row.team_id,
        editable=record.row.team_id == team_id,
        explanation=_explanation(plan_row, plan, titles) if plan_row and plan else None,
        change=change,
        form=form,
        errors=dict(edit.errors) if edit else {},
        current=edit.current if edit else None,
        note=edit.note if edit else "",
        shown=dict(edit.shown) if edit and edit.shown is not None else stored,
    )


def row_form(record: InitiativeRecord, team_id: int) -> dict[str, str]:
    """The stored estimate, value score and state as a plan row's fields show them."""
    return {
        "effort": effort_text(record, team_id),
        "value": _plain(record.row.value),
        "state": record.row.state,
    }


# --- totals, capacity bar, risk --------------------------------------------------------------


@dataclass(frozen=True)
class Totals:
    feasible: bool
    value: float
    effort: float
    capacity: float
    headroom: float
    utilisation: float | None
    chosen_count: int
    left_out_count: int
    method: str
    method_note: str
    infeasibility: str | None
    excess_days: float | None


@dataclass(frozen=True)
class BarSegment:
    kind: str  # committed | chosen | headroom | over
    label: str
    days: float
    x: float
    width: float


@dataclass(frozen=True)
class CapacityBar:
    segments: tuple[BarSegment, ...]
    capacity_x: float  # where the capacity line falls (BAR_UNITS wide bar)
    committed: float
    chosen: float
    headroom: float
    over: float

    @property
    def description(self) -> str:
        # The legend's figures (wording.days), so that a screen reader hears the same ones.
        parts = [
            f"committed (pinned) work {days(self.committed)} days",
            f"other chosen work {days(self.chosen)} days",
        ]
        if self.over > 0:
            parts.append(f"over capacity by {days(self.over)} days")
        else:
            parts.append(f"headroom {days(self.headroom)} days")
        return "Capacity use: " + ", ".join(parts) + "."


def capacity_bar(plan: LivePlan) -> CapacityBar:
    """Split the capacity into committed work, other chosen work and headroom (or overrun)."""
    selection = plan.selection
    forced_by_needs = set(selection.forced_by_needs)
    committed = sum(
        row.effort_days
        for row in plan.rows
        if row.chosen
        and (row.state == "pinned" or row.forced == "in" or row.key in forced_by_needs)
    )
    chosen = max(0.0, selection.effort - committed)
    capacity = selection.capacity
    # Pinned work that does not fit leaves no headroom, even where it fits unrounded.
    headroom = max(0.0, capacity - selection.effort) if selection.feasible else 0.0
    over = max(0.0, selection.effort - capacity)
    if not selection.feasible and over <= 1e-9 and selection.excess_days is not None:
        # Over only once efforts are rounded up to the resolution: show that overrun. Otherwise
        # the estimated one, which the headroom beside it says too.
        over = selection.excess_days
    # Wide enough for the capacity and its overrun: an overrun drawn from the capacity line
    # must end inside the bar.
    scale = BAR_UNITS / max(capacity + over, selection.effort, 1e-9)
    segments = []
    x = 0.0
    for kind, label, length in (
        ("committed", "Committed (pinned)", committed),
        ("chosen", "Chosen", chosen),
        ("headroom", "Headroom", headroom),
    ):
        if length > 1e-9:
            width = length * scale
            segments.append(BarSegment(kind, label, length, round(x, 2), round(width, 2)))
            x += width
    if over > 1e-9:
        segments.append(
            BarSegment("over", "Over capacity", over, round(capacity * scale, 2), over * scale)
        )
    return CapacityBar(
        segments=tuple(segments),
        capacity_x=round(capacity * scale, 2),
        committed=committed,
        chosen=chosen,
        headroom=headroom,
        over=over,
    )


@dataclass(frozen=True)
class RiskView:
    fit: FitEstimate | None
    fit_label: str | None
    leaders: tuple[tuple[str, float], ...]
    confidence_label: str
    p50_value: float | None
    value_given_up: float | None  # against the P50 plan


def _risk(plan: LivePlan, whatif: WhatIf) -> RiskView:
    given_up = None
    if plan.p50_value is not None and plan.selection.feasible:
        given_up = plan.p50_value - plan.selection.value
    return RiskView(
        fit=plan.fit,
        fit_label=plan.fit.label() if plan.fit is not None else None,
        leaders=plan.spread_leaders,
        confidence_label=whatif.confidence_label,
        p50_value=plan.p50_value,
        value_given_up=given_up,
    )


# --- the whole view --------------------------------------------------------------------------


@dataclass(frozen=True)
class PlanView:
    team: Team
    period: Period | None
    periods: list[Period]
    whatif: WhatIf
    whatif_errors: Mapping[str, str]
    plan: LivePlan | None
    message: str | None  # why there is no plan to show
    rows: tuple[RowView, ...]
    totals: Totals | None
    bar: CapacityBar | None
    warnings: tuple[str, ...]
    chart: CurveChart | None
    readouts: tuple[Readout, ...]
    delta_days: float | None
    curve_sampled: bool  # True: the curve holds only sample capacities, not every breakpoint
    curve_probed: bool  # True: found by solving at capacities (binary program), not the DP
    risk: RiskView | None
    undo: Offer | None  # what the undo button reverts, None: nothing
    redo: Offer | None  # the undo the redo button reverts
    titles: Mapping[str, str]
    explained: bool  # explanations are in the page (else fetched per row)

    @property
    def undo_covers(self) -> str:
        """The one line beside undo that says what it reverts (and so what it does not)."""
        return UNDO_COVERS

    @property
    def groups(self) -> list[tuple[str, str, list[RowView]]]:
        """(key, heading, rows): chosen first, or one list in the order of entry."""
        if self.whatif.order == "entry" or self.plan is None:
            return [("all", "Initiatives", list(self.rows))]
        chosen = [r for r in self.rows if r.decision == "in"]
        left_out = [r for r in self.rows if r.decision != "in"]
        return [("in", "In the plan", chosen), ("out", "Left out", left_out)]

    @property
    def chosen_ids(self) -> list[int]:
        return [r.id for r in self.rows if r.decision == "in"]


def build_plan_view(
    session: Session,
    *,
    team_id: int,
    whatif: WhatIf,
    whatif_errors: Mapping[str, str] | None = None,
    resolution: float = 0.5,
    edits: Mapping[int, RowEdit] | None = None,
    previous_chosen: frozenset[int] | None = None,
    explain: bool | None = None,
) -> PlanView:
    """Solve the team's plan for the what-if and shape everything the page shows.

    explain None: explanations inline for DP-solved plans of up to INLINE_EXPLANATIONS_UP_TO
    initiatives, on demand per row otherwise.
    """
    team = get_team(session, team_id=team_id)
    periods = list_periods(session)
    period = get_period(session, period_id=whatif.period_id) if whatif.period_id else None
    edits = edits or {}
    plan: LivePlan | None = None
    message = None
    if period is not None:
        try:
            if explain is None:
                # Inline only where explanations are cheap: small plans solved by a DP (prefix
                # and suffix rows). Plans that need the binary program explain a row on demand,
                # since each explanation there is two more solves.
                plan = plan_for(
                    session,
                    team_id=team_id,
                    period_id=period.id or 0,
                    options=replace(whatif.options(resolution), explain=False),
                )
                explain = (
                    plan.selection.method.startswith("dp")
                    and len(plan.rows) <= INLINE_EXPLANATIONS_UP_TO
                )
            if explain:
                plan = plan_for(
                    session,
                    team_id=team_id,
                    period_id=period.id or 0,
                    options=replace(whatif.options(resolution), explain=True),
                )
        except SelectorInputError as exc:
            message = no_plan_message(session, exc, team_id, period.id or 0, whatif)
    records = (
        [row.record for row in plan.rows]
        if plan is not None
        else (
            list_initiatives(session, team_id=team_id, period_id=period.id, involving_team=True)
            if period is not None
            else []
        )
    )
    titles = {str(r.row.id): r.row.title for r in records}
    plan_rows = {row.id: row for row in plan.rows} if plan is not None else {}
    # A what-if the selector refused (both members of an either-or set forced in) leaves no
    # plan: the rows still say what the what-if forces, so each forcing can be cleared alone.
    unsolved_forcing = (
        dict.fromkeys(whatif.forced_in, "in") | dict.fromkeys(whatif.forced_out, "out")
        if plan is None
        else {}
    )
    rows = tuple(
        _row_view(
            record,
            team_id,
            plan_row=plan_rows.get(record.row.id or 0),
            plan=plan,
            titles=titles,
            edit=edits.get(record.row.id or 0),
            previous=previous_chosen,
            forced=unsolved_forcing.get(record.row.id or 0),
        )
        for record in records
    )
    period_id = period.id if period else None
    undo = undo_offer(session, team_id=team_id, period_id=period_id)
    redo = redo_offer(session, team_id=team_id, period_id=period_id)
    totals = bar = chart = risk = None
    readouts: tuple[Readout, ...] = ()
    delta = None
    curve_sampled = curve_probed = False
    warnings: tuple[str, ...] = ()
    if plan is not None:
        selection = plan.selection
        totals = Totals(
            feasible=selection.feasible,
            value=selection.value,
            effort=selection.effort,
            capacity=selection.capacity,
            headroom=selection.headroom,
            utilisation=plan.utilisation,
            chosen_count=len(plan.chosen_rows),
            left_out_count=len(plan.left_out_rows),
            method=selection.method,
            method_note=selection.method_note,
            infeasibility=with_titles(selection.infeasibility, titles, selection.forced_by_needs)
            if selection.infeasibility
            else None,
            excess_days=selection.excess_days,
        )
        bar = capacity_bar(plan)
        warnings = tuple(with_titles(w, titles) for w in plan.warnings)
        risk = _risk(plan, whatif)
        curve = selection.curve
        if curve is None and selection.feasible and selection.capacity > 0:
            probed = probed_curve(
                plan.problem,
                default_curve_to(selection.capacity),
                curve_chart.MAX_CURVE_SOLVES,  # read here, so a test can lower it
            )
            curve = probed.curve
            curve_probed = True
            curve_sampled = not probed.complete
        if selection.feasible and curve is not None and curve.values:
            delta = whatif.delta_days or default_delta(selection.capacity, resolution)
            readouts = (
                readout(plan.problem, selection, delta, titles),
                readout(plan.problem, selection, -delta, titles),
            )
            chart = build_chart(curve, selection.capacity, (delta, -delta), sampled=curve_sampled)
    return PlanView(
        team=team,
        period=period,
        periods=periods,
        whatif=whatif,
        whatif_errors=whatif_errors or {},
        plan=plan,
        message=message,
        rows=rows,
        totals=totals,
        bar=bar,
        warnings=warnings,
        chart=chart,
        readouts=readouts,
        delta_days=delta,
        curve_sampled=curve_sampled,
        curve_probed=curve_probed,
        risk=risk,
        undo=undo,
        redo=redo,
        titles=titles,
        explained=bool(explain),
    )


_FORCED_WORDS = (
    ("Pinned “", "Pinned or forced-in “"),
    ("pinned “", "pinned or forced-in “"),
    ("ruled-out “", "ruled-out or forced-out “"),
    ("is pinned, but so is", "is pinned or forced in, but so is"),
)


def no_plan_message(
    session: Session, exc: SelectorInputError, team_id: int, period_id: int, whatif: WhatIf
) -> str:
    """Why there is no plan, naming initiatives by title and saying what to change."""
    records = list_initiatives(session, team_id=team_id, period_id=period_id, involving_team=True)
    titles = {str(r.row.id): r.row.title for r in records}
    if exc.field == "capacity":
        return no_capacity_message(session, period_id=period_id)
    text = titled_refusal(exc.message, exc.field, titles)
    if whatif.forcing:
        # The selector plans forced-in work as pinned and forced-out work as ruled out.
        for mark, either in _FORCED_WORDS:
            text = text.replace(mark, either)
        return f"This what-if cannot be planned: {text} Clear the forcing to see the plan."
    return f"These initiatives cannot be planned as they stand: {text}"


# --- the JSON twin -------------------------------------------------------------------------


def plan_json(view: PlanView) -> dict[str, Any]:
    """The same figures as the page, as plain JSON types."""
    totals = view.totals
    return {
        "team": {"id": view.team.id, "name": view.team.name},
        "period": (
            {"id": view.period.id, "name": view.period.name} if view.period is not None else None
        ),
        "what_if": {
            "force_in": list(view.whatif.forced_in),
            "force_out": list(view.whatif.forced_out),
            "confidence_pct": view.whatif.confidence_pct,
            "query": view.whatif.query(),
        },
        "message": view.message,
        "totals": None
        if totals is None
        else {
            "feasible": totals.feasible,
            "value": totals.value,
            "effort_days": totals.effort,
            "capacity_days": totals.capacity,
            "headroom_days": totals.headroom,
            "utilisation": totals.utilisation,
            "chosen": totals.chosen_count,
            "left_out": totals.left_out_count,
            "method": totals.method,
            "method_note": totals.method_note,
            "infeasibility": totals.infeasibility,
            "excess_days": totals.excess_days,
        },
        "capacity_bar": None
        if view.bar is None
        else {
            "committed_days": view.bar.committed,
            "chosen_days": view.bar.chosen,
            "headroom_days": view.bar.headroom,
            "over_days": view.bar.over,
        },
        "warnings": list(view.warnings),
        "rows": [_row_json(row) for row in view.rows],
        "curve": _curve_json(view),
        "risk": None
        if view.risk is None
        else {
            "fit_probability": view.risk.fit.probability if view.risk.fit else None,
            "fit_standard_error": view.risk.fit.standard_error if view.risk.fit else None,
            "fit_label": view.risk.fit_label,
            "spread_leaders": [{"title": t, "share": s} for t, s in view.risk.leaders],
            "confidence": view.risk.confidence_label,
            "p50_value": view.risk.p50_value,
            "value_given_up": view.risk.value_given_up,
        },
        "undo": view.undo.text if view.undo else None,
        "redo": view.redo.text if view.redo else None,
    }


def _row_json(row: RowView) -> dict[str, Any]:
    e = row.explanation
    return {
        "id": row.id,
        "title": row.title,
        "version": row.version,
        "decision": row.decision,
        "forced": row.forced,
        "state": row.state,
        "effort": row.effort_text,
        "planned_effort_days": row.planned_effort,
        "value": row.value,
        "blocked_by": list(row.blocked_by),
        "other_teams": list(row.other_teams),
        "explanation": None
        if e is None
        else {
            "reason": e.reason,
            "value_if_in": e.value_if_in,
            "value_if_out": e.value_if_out,
            "regret": e.regret,
            "threshold_value": e.threshold_value,
            "displaces": list(e.displaces),
            "moves_with": list(e.moves_with),
            "constraint_cost": e.constraint_cost,
        },
    }


def _curve_json(view: PlanView) -> dict[str, Any] | None:
    if view.plan is None or view.chart is None:
        return None
    return {
        # From each step's capacity on, until the next step, the best value is its value;
        # when "sampled", the steps are sample capacities only, each exact.
        "steps": [
            {"capacity_days": step.capacity_days, "value": step.value} for step in view.chart.steps
        ],
        "sampled": view.curve_sampled,
        "today_days": view.plan.selection.capacity,
        "readouts": [
            {
                "delta_days": r.delta_days,
                "feasible": r.feasible,
                "value": r.value,
                "value_change": r.value_change,
                "entering": list(r.entering),
                "leaving": list(r.leaving),
            }
            for r in view.readouts
        ],
    }
