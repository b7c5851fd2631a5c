"""JSON API: the stateless selector (POST /api/v1/select) and a team's live plan."""

from __future__ import annotations

from typing import Annotated, Any

from fastapi import APIRouter, Query
from fastapi.responses import JSONResponse
from pydantic import BaseModel, ConfigDict, Field, StringConstraints, model_validator

from server.deps import SessionDep
from server.errors import ConflictError
from server.planning.plan_view import WhatIf, no_plan_message
from server.planning.plans import PlanOptions, plan_for
from server.routes.responses import ERRORS
from server.schemas import MAX_EFFORT_DAYS, MAX_VALUE
from server.selector import (
    Item,
    Problem,
    Selection,
    SelectorInputError,
    default_curve_to,
    selection_to_dict,
    solve,
)
from server.selector.set_names import SetNames
from server.text_rules import VISIBLE_TEXT

router = APIRouter(prefix="/api/v1", tags=["selector"], responses=ERRORS)

MAX_ITEMS = 5000
# One request may ask for at most this many DP cells (items x capacity units): well under a
# second of work, so one caller cannot tie up a worker.
MAX_CELLS = 200_000_000
# At most this many points on a capacity curve (capacity units from 0 to curve_to): about
# 2 MB of JSON, a hundred times a usual quarter's curve at half-day resolution.
MAX_CURVE_POINTS = 100_000
# Keys are trimmed, so "a" and "a " are one key (a duplicate), and are visible text.
Key = Annotated[
    str,
    StringConstraints(strip_whitespace=True, min_length=1, max_length=120, pattern=VISIBLE_TEXT),
]
# Strict: true, false and numbers written as text are refused, not read as 1, 0 or a number.
Number = Annotated[float, Field(strict=True, allow_inf_nan=False)]


class SelectItem(BaseModel):
    model_config = ConfigDict(extra="forbid")

    key: Key
    effort: Number = Field(gt=0, le=MAX_EFFORT_DAYS, description="Days.")
    value: Number = Field(gt=0, le=MAX_VALUE)
    pinned: bool = False
    ruled_out: bool = False
    needs: list[Key] = Field(default_factory=list, max_length=200)
    either_or: Key | None = None


class SelectRequest(BaseModel):
    model_config = ConfigDict(extra="forbid")

    capacity: Number = Field(gt=0, le=1_000_000, description="Days.")
    resolution: Number = Field(0.5, gt=0, le=10, description="Days.")
    items: list[SelectItem] = Field(max_length=MAX_ITEMS)
    curve: bool = Field(False, description="Add the capacity curve up to capacity + 25 %.")
    curve_to: Number | None = Field(
        None, gt=0, le=1_000_000, description="Curve end, in days: at least the capacity."
    )
    explain: bool = Field(False, description="Add one explanation per item.")

    @model_validator(mode="after")
    def _bounded_work(self) -> SelectRequest:
        if self.curve_to is not None:
            if self.curve_to < self.capacity:
                raise ValueError(
                    f"curve_to: {self.curve_to:g} days is below the capacity of "
                    f"{self.capacity:g} days; the curve runs from 0 past the capacity"
                )
            points = self.curve_to / self.resolution + 1
            if points > MAX_CURVE_POINTS:
                raise ValueError(
                    f"curve_to: A curve to {self.curve_to:g} days at a {self.resolution:g}-day "
                    f"resolution has {points:,.0f} points, more than one request may ask "
                    f"({MAX_CURVE_POINTS:,}); use a nearer curve_to or a coarser resolution"
                )
        units = max(self.capacity, self.curve_to or 0) / self.resolution
        if units * max(len(self.items), 1) > MAX_CELLS:
            raise ValueError(
                f"capacity: {len(self.items)} items at {units:,.0f} capacity units is more work "
                f"than one request may ask ({MAX_CELLS:,} cells); use a coarser resolution"
            )
        return self


class CurveOut(BaseModel):
    capacity_days: list[float]
    values: list[float]


class ExplanationOut(BaseModel):
    key: str
    chosen: bool
    value_if_in: float | None
    value_if_out: float | None
    regret: float
    threshold_value: float | None = Field(
        description="Left out: the value score it would need to tie its way in. In the plan: "
        "the score it could drop to before an equally good plan without it exists; 0 or below "
        "means it stays at any score (work that needs it carries it). None for pinned, ruled-out "
        "and impossible cases."
    )
    displaces: list[str] = Field(
        description="Left out: chosen keys that would leave were it forced in. In the plan: "
        "keys that would take its place."
    )
    reason: str
    constraint_cost: float | None = None
    moves_with: list[str] = Field(
        default_factory=list,
        description="Left out: other keys that would come in with it. In the plan: chosen keys "
        "that would leave with it (work that needs it, or a new best mix).",
    )


class RoundingOut(BaseModel):
    resolution: float
    capacity_units: int
    capacity_days_used: float
    capacity_days_lost: float
    effort_units: dict[str, int]
    items_rounded_up: list[str]


class SelectResponse(BaseModel):
    feasible: bool
    value: float
    effort: float
    capacity: float
    headroom: float
    chosen: list[str]
    method: str
    method_note: str
    infeasibility: str | None
    excess_days: float | None
    rounding: RoundingOut
    forced_by_needs: list[str]
    cells: int
    curve: CurveOut | None = None
    curve_note: str | None = Field(None, description="Why a curve that was asked for is absent.")
    explanations: list[ExplanationOut] | None = None


def _selector_error(exc: SelectorInputError, keys: list[str]) -> JSONResponse:
    loc: list[Any] = ["body"]
    if exc.key is not None and exc.key in keys:
        loc += ["items", keys.index(exc.key), exc.field]
    else:
        loc.append(exc.field)
    field = ".".join(str(part) for part in loc[1:])
    error = {"loc": loc, "msg": exc.message, "type": "value_error", "field": field}
    return JSONResponse({"detail": [error]}, status_code=422)


@router.post(
    "/select",
    response_model=SelectResponse,
    description="Choose the value-optimal set of items that fits the capacity (exact). "
    "Stateless: nothing is stored. Efforts round up and the capacity down to the resolution.",
)
def select(request_in: SelectRequest) -> Any:
    set_names = SetNames()
    items = tuple(
        Item(
            key=item.key,
            effort=item.effort,
            value=item.value,
            pinned=item.pinned,
            ruled_out=item.ruled_out,
            needs=tuple(item.needs),
            either_or=set_names.spelling(item.either_or),
        )
        for item in request_in.items
    )
    problem = Problem(items=items, capacity=request_in.capacity, resolution=request_in.resolution)
    curve_to = request_in.curve_to or (
        default_curve_to(request_in.capacity) if request_in.curve else None
    )
    try:
        selection = solve(problem, curve_to=curve_to, explain=request_in.explain)
    except SelectorInputError as exc:
        return _selector_error(exc, [item.key for item in items])
    answer = selection_to_dict(selection)
    if curve_to is not None and selection.curve is None:
        answer["curve_note"] = _no_curve_reason(selection)
    return answer


def _no_curve_reason(selection: Selection) -> str:
    if not selection.feasible:
        return "No capacity curve: pinned work alone does not fit the capacity."
    return (
        f"No capacity curve: the curve is read from the dynamic program's last row, and this "
        f"problem was solved by {selection.method} (needs combined with either-or sets, or "
        "effort for several teams), which finds the best plan at one capacity only."
    )


@router.get(
    "/teams/{team_id}/periods/{period_id}/plan",
    responses=ERRORS,
    description="The live plan of a team in a period: the same data as the plan page. 409 when "
    "the stored initiatives or capacity give no plan (the message says why and what to change).",
)
def live_plan(
    team_id: int,
    period_id: int,
    session: SessionDep,
    confidence: float | None = Query(None, gt=0, lt=1, description="Plan at this quantile."),
) -> dict[str, Any]:
    try:
        plan = plan_for(
            session,
            team_id=team_id,
            period_id=period_id,
            options=PlanOptions(confidence=confidence),
        )
    except SelectorInputError as exc:  # stored marks no plan can honour: say which, not 500
        whatif = WhatIf(period_id=period_id)
        message = no_plan_message(session, exc, team_id, period_id, whatif)
        raise ConflictError(message, field=exc.field) from exc
    return {
        "team": {"id": plan.team.id, "name": plan.team.name},
        "period": {"id": plan.period.id, "name": plan.period.name},
        "capacity_days": plan.capacity.capacity_days,
        "selection": selection_to_dict(plan.worded_selection()),
        "initiatives": [
            {
                "id": row.id,
                "title": row.title,
                "effort_days": row.effort_days,
                "value": row.value,
                "state": row.state,
                "chosen": row.chosen,
                "blocked_by": list(row.blocked_by),
                "other_teams": list(row.other_teams),
            }
            for row in plan.rows
        ],
        "warnings": list(plan.warnings),
        "fit_probability": plan.fit.probability if plan.fit else None,
        "fit_label": plan.fit.label() if plan.fit else None,
        "p50_value": plan.p50_value,
    }
