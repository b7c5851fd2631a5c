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
    SelectorInputError,
    default_curve_to,
    selection_to_dict,
    solve,
)

router = APIRouter(prefix="/api/v1", tags=["selector"], responses=ERRORS)

MAX_ITEMS = 5000
# One request may ask for at most this many DP cells (items x capacity units): well under a
# second of work, so one caller cannot tie up a worker.
MAX_CELLS = 200_000_000
Key = Annotated[str, StringConstraints(min_length=1, max_length=120)]


class SelectItem(BaseModel):
    model_config = ConfigDict(extra="forbid")

    key: Key
    effort: float = Field(gt=0, le=MAX_EFFORT_DAYS, allow_inf_nan=False, description="Days.")
    value: float = Field(gt=0, le=MAX_VALUE, allow_inf_nan=False)
    pinned: bool = False
    ruled_out: bool = False
    needs: list[Key] = Field(default_factory=list, max_length=200)
    either_or: Key | None = None


class SelectRequest(BaseModel):
    model_config = ConfigDict(extra="forbid")

    capacity: float = Field(gt=0, le=1_000_000, allow_inf_nan=False, description="Days.")
    resolution: float = Field(0.5, gt=0, le=10, allow_inf_nan=False, description="Days.")
    items: list[SelectItem] = Field(max_length=MAX_ITEMS)
    curve: bool = Field(False, description="Add the capacity curve up to capacity + 25 %.")
    curve_to: float | None = Field(
        None, gt=0, le=1_000_000, allow_inf_nan=False, description="Curve end, in days."
    )
    explain: bool = Field(False, description="Add one explanation per item.")

    @model_validator(mode="after")
    def _bounded_work(self) -> SelectRequest:
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
    threshold_value: float | None
    displaces: list[str]
    reason: str
    constraint_cost: float | None = None


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
    items = tuple(
        Item(
            key=item.key,
            effort=item.effort,
            value=item.value,
            pinned=item.pinned,
            ruled_out=item.ruled_out,
            needs=tuple(item.needs),
            either_or=item.either_or,
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
    return selection_to_dict(selection)


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
        "selection": selection_to_dict(plan.selection),
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
