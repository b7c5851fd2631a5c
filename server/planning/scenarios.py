"""Scenarios: named what-if changes on top of a team's live plan.

A scenario stores only what it changes (`ScenarioChanges`, JSON-ready): capacity in days,
members' days off, focus factor, reserve, the confidence level, and initiatives forced in or
out. `options_for` turns the changes into the planning layer's PlanOptions; `describe`
lists the changed inputs in words against the live values.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, replace
from typing import Annotated, Any

from pydantic import BaseModel, ConfigDict, Field, field_validator, model_validator
from sqlmodel import Session

from server.errors import InputError
from server.planning.plans import LivePlan, PlanOptions, blocked_needs
from server.planning.snapshots import (
    PlanInputs,
    Snapshot,
    inputs_of,
    snapshot_of,
    solve_live,
    unsolved_inputs,
)
from server.schemas import NUMBER, DaysOff, FocusFactor, ReservePct, RowId
from server.selector.risk import EstimateError, validate_confidence
from server.store._common import and_list
from server.store.initiatives import list_initiatives
from server.store.periods import get_period, period_working_days
from server.store.teams import get_team, list_members
from server.validation import parse_form
from server.wording import in_days

MAX_CAPACITY_DAYS = 100_000.0
MAX_FORCED = 500
Confidence = Annotated[float, Field(gt=0, lt=1, allow_inf_nan=False), NUMBER]
# Below a hundredth of a day a capacity plans nothing at any resolution.
MIN_CAPACITY_DAYS = 0.01
CapacityDays = Annotated[
    float, Field(ge=MIN_CAPACITY_DAYS, le=MAX_CAPACITY_DAYS, allow_inf_nan=False), NUMBER
]


class ScenarioChanges(BaseModel):
    """What a scenario changes; a field left out keeps the live value."""

    model_config = ConfigDict(extra="forbid")

    capacity_days: CapacityDays | None = Field(
        default=None, description="Replaces the computed capacity (person-days)."
    )
    focus_factor: FocusFactor | None = Field(
        default=None, description="Share of an available day that goes to planned work."
    )
    reserve_pct: ReservePct | None = Field(
        default=None, description="Capacity held back, in percent."
    )
    confidence: Confidence | None = Field(
        default=None,
        description="Plan each initiative at this quantile of its estimate (0.8 = P80).",
    )
    days_off: dict[RowId, DaysOff] = Field(
        default_factory=dict, description="Member id -> days off in the period."
    )
    forced_in: list[RowId] = Field(default_factory=list, max_length=MAX_FORCED)
    forced_out: list[RowId] = Field(default_factory=list, max_length=MAX_FORCED)

    @field_validator("forced_in", "forced_out")
    @classmethod
    def _unique(cls, ids: list[int]) -> list[int]:
        return sorted(set(ids))

    @model_validator(mode="after")
    def _not_both(self) -> ScenarioChanges:
        both = set(self.forced_in) & set(self.forced_out)
        if both:
            listed = ", ".join(str(i) for i in sorted(both))
            are = "Initiative {} is" if len(both) == 1 else "Initiatives {} are"
            raise ValueError(f"forced_out: {are.format(listed)} also forced in.")
        return self

    def to_json(self) -> dict[str, Any]:
        """Only the changed fields, with string member ids (JSON object keys)."""
        data = self.model_dump(mode="json", exclude_defaults=True)
        if "days_off" in data:
            data["days_off"] = {str(k): v for k, v in sorted(self.days_off.items())}
        return data

    @property
    def is_empty(self) -> bool:
        return not self.to_json()


def changes_from_json(data: Mapping[str, Any]) -> ScenarioChanges:
    """Read stored changes (trusted: they were validated when stored)."""
    return ScenarioChanges.model_validate(dict(data))


def parse_changes_form(
    fields: Mapping[str, str],
) -> tuple[ScenarioChanges | None, dict[str, str]]:
    """Read the scenario form: blank fields keep the live value.

    Fields: capacity_days, focus_factor, reserve_pct, confidence (0.8, P80 or 80 %),
    days_off.<member id> and forced.<initiative id> (in, out or blank).
    """
    data: dict[str, Any] = {}
    errors: dict[str, str] = {}
    for name in ("capacity_days", "focus_factor", "reserve_pct"):
        raw = fields.get(name, "").strip()
        if raw:
            data[name] = raw
    raw_level = fields.get("confidence", "").strip()
    if raw_level:
        try:
            data["confidence"] = validate_confidence(raw_level)
        except EstimateError as exc:
            # The form shows its label beside the message: a sentence of its own.
            errors["confidence"] = f"{exc.problem[:1].upper()}{exc.problem[1:]}."
    days_off: dict[str, str] = {}
    forced_in: list[int] = []
    forced_out: list[int] = []
    for key, raw in fields.items():
        value = raw.strip()
        head, _, tail = key.partition(".")
        if not value or not tail.isdigit():
            continue
        if head == "days_off":
            days_off[tail] = value
        elif head == "forced" and value in ("in", "out"):
            (forced_in if value == "in" else forced_out).append(int(tail))
        elif head == "forced":
            errors[key] = "Choose in, out or leave it as it is."
    data |= {"days_off": days_off, "forced_in": forced_in, "forced_out": forced_out}
    changes, problems = parse_form(ScenarioChanges, data)
    errors = problems | errors
    return (changes if not errors else None), errors


def options_for(changes: ScenarioChanges, *, resolution: float) -> PlanOptions:
    return PlanOptions(
        resolution=resolution,
        confidence=changes.confidence,
        capacity_days=changes.capacity_days,
        focus_factor=changes.focus_factor,
        reserve_pct=changes.reserve_pct,
        days_off=dict(changes.days_off),
        forced_in=frozenset(changes.forced_in),
        forced_out=frozenset(changes.forced_out),
    )


def changes_from_options(options: PlanOptions) -> ScenarioChanges:
    return ScenarioChanges(
        capacity_days=options.capacity_days,
        focus_factor=options.focus_factor,
        reserve_pct=options.reserve_pct,
        confidence=options.confidence,
        days_off=dict(options.days_off),
        forced_in=sorted(options.forced_in),
        forced_out=sorted(options.forced_out),
    )


def check_for_team(
    session: Session, *, team_id: int, period_id: int, changes: ScenarioChanges
) -> None:
    """Refuse changes that name members or initiatives outside the team's plan, and a set
    capacity beside changes it would make count for nothing."""
    overridden = [
        label
        for label, changed in (
            ("focus factor", changes.focus_factor is not None),
            ("reserve", changes.reserve_pct is not None),
            ("days off", bool(changes.days_off)),
        )
        if changed
    ]
    if changes.capacity_days is not None and overridden:
        raise InputError(
            f"capacity_days: A capacity in days replaces the one computed from members' days "
            f"off, focus factor and reserve, so the {and_list(overridden)} set here would "
            "change nothing. "
            "Leave the capacity empty to use them, or leave them empty.",
            field="capacity_days",
        )
    get_team(session, team_id=team_id)
    period = get_period(session, period_id=period_id)
    members = {m.id: m for m in list_members(session, team_id=team_id)}
    limit = period_working_days(period)
    for member_id, days in changes.days_off.items():
        member = members.get(member_id)
        if member is None:
            raise InputError(f"days_off: Member {member_id} is not on this team.", field="days_off")
        if days > limit:
            raise InputError(
                f"days_off: {days:g} days off for {member.name} is more than the {limit} "
                f"working days of {period.name}.",
                field="days_off",
            )
    if changes.forced_in or changes.forced_out:
        records = list_initiatives(
            session, team_id=team_id, period_id=period_id, involving_team=True
        )
        ids = {r.row.id for r in records}
        for name in ("forced_in", "forced_out"):
            unknown = [i for i in getattr(changes, name) if i not in ids]
            if unknown:
                listed = ", ".join(str(i) for i in unknown)
                are = (
                    "Initiative {} is not a candidate"
                    if len(unknown) == 1
                    else "Initiatives {} are not candidates"
                )
                raise InputError(
                    f"{name}: {are.format(listed)} of this team in {period.name}.",
                    field=name,
                )
        _, blocked, _ = blocked_needs(session, records, period)
        for record in records:
            if record.row.id in changes.forced_in and record.row.id in blocked:
                named = ", ".join(f"“{t}”" for t in blocked[record.row.id])
                raise InputError(
                    f"forced_in: “{record.row.title}” is blocked: it needs {named}, which "
                    "cannot be chosen in this plan, so it cannot be forced in.",
                    field="forced_in",
                )


def still_applying(
    session: Session, *, team_id: int, period_id: int, changes: ScenarioChanges
) -> ScenarioChanges:
    """The changes without what live data has removed since they were made."""
    members = {m.id for m in list_members(session, team_id=team_id)}
    days_off = {k: v for k, v in changes.days_off.items() if k in members}
    forced = set(changes.forced_in) | set(changes.forced_out)
    if forced:
        records = list_initiatives(
            session, team_id=team_id, period_id=period_id, involving_team=True
        )
        candidates = {r.row.id for r in records}
    else:
        candidates = set()
    return changes.model_copy(
        update={
            "days_off": days_off,
            "forced_in": [i for i in changes.forced_in if i in candidates],
            "forced_out": [i for i in changes.forced_out if i in candidates],
        }
    )


@dataclass(frozen=True)
class ChangedInput:
    field: str
    label: str
    live: str
    scenario: str

    @property
    def text(self) -> str:
        return f"{self.label}: {self.scenario} (live: {self.live})"


def _days(value: float) -> str:
    return in_days(value)


def _level(confidence: float | None) -> str:
    if confidence is None:
        return "likely estimates"
    return f"P{round(confidence * 100, 1):g}"


def describe(
    changes: ScenarioChanges,
    base: PlanInputs,
    *,
    live_chosen: frozenset[str] | set[str] = frozenset(),
) -> list[ChangedInput]:
    """The changed inputs, each with its live value, in a fixed order.

    live_chosen holds the keys the live plan chooses, to say where a forced initiative was.
    """
    out: list[ChangedInput] = []
    cap = base.capacity
    if changes.confidence is not None:
        out.append(
            ChangedInput(
                "confidence",
                "Confidence level",
                _level(base.options.confidence),
                _level(changes.confidence),
            )
        )
    if changes.capacity_days is not None:
        out.append(
            ChangedInput(
                "capacity_days",
                "Capacity",
                _days(cap.capacity_days),
                _days(changes.capacity_days),
            )
        )
    if changes.focus_factor is not None:
        out.append(
            ChangedInput(
                "focus_factor",
                "Focus factor",
                f"{cap.focus_factor:g}",
                f"{changes.focus_factor:g}",
            )
        )
    if changes.reserve_pct is not None:
        out.append(
            ChangedInput(
                "reserve_pct", "Reserve", f"{cap.reserve_pct:g} %", f"{changes.reserve_pct:g} %"
            )
        )
    members = {m.member_id: m for m in cap.members}
    for member_id, days in sorted(changes.days_off.items()):
        member = members.get(member_id)
        name = member.name if member is not None else f"A removed member (id {member_id})"
        live = _days(member.days_off) if member is not None else "no longer on the team"
        out.append(ChangedInput(f"days_off.{member_id}", f"{name}: days off", live, _days(days)))
    titles = {i.id: i for i in base.initiatives}
    for name, label in (("forced_in", "Forced in"), ("forced_out", "Forced out")):
        for initiative_id in getattr(changes, name):
            row = titles.get(initiative_id)
            title = f"“{row.title}”" if row is not None else f"initiative {initiative_id}"
            if row is None:  # deleted, or moved out of the team's plan since
                live = "no longer in this team's plan, so not forced"
            else:
                live = "in the plan" if row.key in live_chosen else "left out"
            out.append(ChangedInput(f"{name}.{initiative_id}", title, live, label.lower()))
    return out


def changes_in_words(
    changes: ScenarioChanges, *, members: Mapping[int, str], titles: Mapping[int, str]
) -> list[str]:
    """The scenario's own values in words, enough to make it again by hand.

    members and titles name member and initiative ids; one not found is named by its id.
    """
    out: list[str] = []
    if changes.confidence is not None:
        out.append(f"confidence level {_level(changes.confidence)}")
    if changes.capacity_days is not None:
        out.append(f"capacity {_days(changes.capacity_days)}")
    if changes.focus_factor is not None:
        out.append(f"focus factor {changes.focus_factor:g}")
    if changes.reserve_pct is not None:
        out.append(f"reserve {changes.reserve_pct:g} %")
    for member_id, days in sorted(changes.days_off.items()):
        out.append(f"{members.get(member_id, f'member {member_id}')}: {_days(days)} off")
    for name, label in (("forced_in", "forced in"), ("forced_out", "forced out")):
        for initiative_id in getattr(changes, name):
            title = titles.get(initiative_id)
            out.append(f"“{title}” {label}" if title else f"initiative {initiative_id} {label}")
    return out


@dataclass(frozen=True)
class Baseline:
    """The live plan a scenario varies; when it cannot be solved, the live inputs alone."""

    inputs: PlanInputs
    plan: LivePlan | None
    problem: str | None

    @property
    def chosen(self) -> frozenset[str]:
        return frozenset(self.plan.selection.chosen) if self.plan is not None else frozenset()


def baseline_of(session: Session, *, team_id: int, period_id: int, resolution: float) -> Baseline:
    """Solve the live plan; a team without capacity still gets its inputs for the form."""
    try:
        live = solve_live(
            session,
            team_id=team_id,
            period_id=period_id,
            options=PlanOptions(resolution=resolution),
        )
    except InputError as exc:
        inputs = unsolved_inputs(
            session, team_id=team_id, period_id=period_id, resolution=resolution
        )
        return Baseline(inputs=inputs, plan=None, problem=exc.message)
    return Baseline(inputs=inputs_of(session, live), plan=live, problem=None)


@dataclass(frozen=True)
class ScenarioOutcome:
    """A scenario solved beside the live plan it varies (either may be unsolvable)."""

    changes: ScenarioChanges
    baseline: Baseline
    plan: LivePlan | None
    error: InputError | None  # why the scenario itself cannot be solved
    changed: list[ChangedInput]

    @property
    def live(self) -> LivePlan | None:
        return self.baseline.plan

    @property
    def value_change(self) -> float | None:
        if self.plan is None or self.live is None:
            return None
        return self.plan.selection.value - self.live.selection.value

    @property
    def entered(self) -> list[str]:
        if self.plan is None or self.live is None:
            return []
        live = self.baseline.chosen
        return [row.title for row in self.plan.rows if row.chosen and row.key not in live]

    @property
    def left(self) -> list[str]:
        if self.plan is None or self.live is None:
            return []
        now = set(self.plan.selection.chosen)
        return [row.title for row in self.live.rows if row.chosen and row.key not in now]


def solve_scenario(
    session: Session,
    *,
    team_id: int,
    period_id: int,
    changes: ScenarioChanges,
    resolution: float,
) -> ScenarioOutcome:
    """Solve the live plan and the scenario; list the changed inputs against live values.

    Solved as the scenario stands today (`still_applying`), so its page, its comparison and
    the plan saved from it all plan the same inputs; the list still names what no longer
    applies.
    """
    baseline = baseline_of(session, team_id=team_id, period_id=period_id, resolution=resolution)
    applying = still_applying(session, team_id=team_id, period_id=period_id, changes=changes)
    plan: LivePlan | None = baseline.plan if applying.is_empty else None
    error = None
    if plan is None:
        try:
            plan = solve_live(
                session,
                team_id=team_id,
                period_id=period_id,
                options=options_for(applying, resolution=resolution),
            )
        except InputError as exc:
            error = exc
    return ScenarioOutcome(
        changes=changes,
        baseline=baseline,
        plan=plan,
        error=error,
        changed=describe(changes, baseline.inputs, live_chosen=baseline.chosen),
    )


def scenario_snapshot(session: Session, outcome: ScenarioOutcome, *, name: str | None) -> Snapshot:
    """The snapshot to save a scenario as a plan, with its changes listed in words."""
    if outcome.plan is None:
        raise outcome.error or InputError("This scenario cannot be solved.", field="changes")
    return snapshot_of(
        session,
        outcome.plan,
        scenario_name=name,
        changed_inputs=[c.text for c in outcome.changed],
        live_days_off=sum(m.days_off for m in outcome.baseline.inputs.capacity.members)
        if outcome.changes.days_off
        else None,
    )


def capture(
    session: Session,
    *,
    team_id: int,
    period_id: int,
    changes: ScenarioChanges,
    resolution: float,
    scenario_name: str | None = None,
) -> Snapshot:
    """Check and solve a team's plan (live, or with changes) and freeze it for saving.

    A stored scenario (scenario_name given) is taken as it stands today, as its page shows it:
    days off of members no longer on the team and forcing of initiatives no longer in the
    plan count for nothing, and are not refused.
    """
    if scenario_name is not None:
        changes = still_applying(session, team_id=team_id, period_id=period_id, changes=changes)
    check_for_team(session, team_id=team_id, period_id=period_id, changes=changes)
    if changes.is_empty:
        live = solve_live(
            session,
            team_id=team_id,
            period_id=period_id,
            options=PlanOptions(resolution=resolution),
        )
        return snapshot_of(session, live, scenario_name=scenario_name)
    outcome = solve_scenario(
        session, team_id=team_id, period_id=period_id, changes=changes, resolution=resolution
    )
    return scenario_snapshot(session, outcome, name=scenario_name)


# Scenarios a list shows figures for (one solve each, without curve or explanations); the
# rest show theirs on their own pages.
LISTED_FIGURES = 20


@dataclass(frozen=True)
class ScenarioFigures:
    """A scenario's totals for a list: None when it cannot be solved."""

    value: float | None
    effort: float | None
    capacity: float | None


def figures_of(
    session: Session, *, team_id: int, period_id: int, changes: ScenarioChanges, resolution: float
) -> ScenarioFigures:
    """The scenario's value, effort and capacity: the same plan as its page, solved lean."""
    options = replace(options_for(changes, resolution=resolution), explain=False, curve=False)
    try:
        plan = solve_live(session, team_id=team_id, period_id=period_id, options=options)
    except InputError:
        return ScenarioFigures(value=None, effort=None, capacity=None)
    selection = plan.selection
    return ScenarioFigures(
        value=selection.value, effort=selection.effort, capacity=selection.capacity
    )
