"""JSON API: scenarios, saved plans, comparisons, published links, exports and CSV import."""

from __future__ import annotations

import datetime as dt
import math
from typing import Annotated, Any, Literal
from urllib.parse import quote

from fastapi import APIRouter, Path, Query, status
from fastapi.responses import Response
from pydantic import BaseModel, ConfigDict, Field, StringConstraints

from server.deps import SessionDep, SettingsDep
from server.models import NAME_MAX, Publication, SavedPlan, Scenario
from server.planning import exports
from server.planning.compare import Comparison
from server.planning.scenario_compare import compare_picks, compare_saved
from server.planning.scenarios import (
    ScenarioChanges,
    capture,
    changes_from_json,
    check_for_team,
    solve_scenario,
)
from server.planning.snapshots import PlanInputs, PlanResult, drift_of, view_of
from server.routes.preconditions import (
    CONDITIONAL,
    CONDITIONAL_DELETE,
    TAGGED,
    TAGGED_CREATED,
    ETagDep,
    IfMatchDep,
    entity_tag,
)
from server.routes.responses import ERRORS, ErrorDetail
from server.schemas import MAX_ID, ETag, RowId, Title
from server.store import plans as store

Actor = Annotated[str, StringConstraints(strip_whitespace=True, max_length=NAME_MAX)]
PathId = Annotated[int, Path(ge=1, le=MAX_ID)]
QueryId = Annotated[int | None, Query(ge=1, le=MAX_ID)]
RequiredQueryId = Annotated[int, Query(ge=1, le=MAX_ID)]
MAX_CSV_CHARS = 1_500_000


class FieldError(BaseModel):
    loc: list[str | int]
    msg: str
    type: str
    field: str


class BadInputBody(BaseModel):
    """A refused value: one field-named message, or FastAPI's list of them."""

    detail: ErrorDetail | list[FieldError]


class UnreadableBody(BaseModel):
    detail: str


RESPONSES: dict[int | str, dict[str, Any]] = {
    **ERRORS,
    400: {"model": UnreadableBody, "description": "The body could not be read."},
    422: {"model": BadInputBody, "description": "A value is not acceptable; the field is named."},
}
router = APIRouter(prefix="/api/v1", tags=["plans"], responses=RESPONSES)


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid")


# --- shapes --------------------------------------------------------------------------------


class PlanSaveIn(_Strict):
    name: Title
    team_id: RowId
    period_id: RowId
    changes: ScenarioChanges = Field(
        default_factory=ScenarioChanges,
        description="What-if changes to solve with; empty saves the live plan as it is.",
    )
    created_by: Actor = ""


class SavedPlanSummary(BaseModel):
    id: int
    name: str
    team_ids: list[int]
    team_names: str
    period_id: int | None
    period_name: str
    created_at: dt.datetime
    created_by: str
    scenario_name: str | None
    value: float
    effort: float
    capacity: float
    headroom: float
    utilisation: float | None
    confidence: float | None
    fit_probability: float | None
    fit_label: str | None
    inputs_digest: str
    url: str


class SavedPlanPublic(SavedPlanSummary):
    scenario_changes: dict[str, Any]
    inputs: PlanInputs
    result: PlanResult


class InputChangePublic(BaseModel):
    area: str
    subject: str
    field: str | None
    before: Any
    after: Any
    text: str


class DriftPublic(BaseModel):
    available: bool
    moved_on: bool
    message: str
    saved_digest: str
    changes: list[InputChangePublic]
    live_value: float | None
    live_entered: list[str] | None
    live_left: list[str] | None


class ScenarioCreateIn(_Strict):
    name: Title
    team_id: RowId
    period_id: RowId
    changes: ScenarioChanges = Field(default_factory=ScenarioChanges)
    created_by: Actor = ""


class ScenarioUpdateIn(_Strict):
    name: Title | None = None
    changes: ScenarioChanges | None = None


class ScenarioSaveIn(_Strict):
    name: Title | None = Field(default=None, description="Plan name; default: the scenario's.")
    created_by: Actor = ""


class ChangedInputPublic(BaseModel):
    field: str
    label: str
    live: str
    scenario: str
    text: str


class ChosenPublic(BaseModel):
    key: str
    title: str
    planned_effort: float
    value: float


class PlanFigures(BaseModel):
    feasible: bool
    value: float
    effort: float
    capacity: float
    headroom: float
    utilisation: float | None
    confidence: float | None
    fit_probability: float | None
    fit_label: str | None
    p50_value: float | None
    chosen: list[ChosenPublic]


class ScenarioPublic(BaseModel):
    id: int
    name: str
    team_id: int
    period_id: int
    changes: ScenarioChanges
    created_at: dt.datetime
    created_by: str
    url: str
    etag: ETag


class ScenarioSolvedPublic(ScenarioPublic):
    changed_inputs: list[ChangedInputPublic]
    live: PlanFigures | None = Field(description="None when the live plan cannot be solved.")
    live_problem: str | None
    scenario_plan: PlanFigures | None = Field(
        description="None when the scenario cannot be solved."
    )
    scenario_problem: str | None
    value_change: float | None
    entered: list[str]
    left: list[str]


class PublicationPublic(BaseModel):
    id: int
    plan_id: int
    token: str
    url: str
    created_at: dt.datetime
    created_by: str
    revoked_at: dt.datetime | None
    active: bool


class ImportIn(_Strict):
    period_id: RowId
    csv: str = Field(max_length=MAX_CSV_CHARS, description="A plan CSV exported by Loadline.")
    scenario_name: Title | None = None
    created_by: Actor = ""


class ImportPublic(BaseModel):
    scenario: ScenarioPublic
    initiative_ids: dict[str, int]
    warnings: list[str]


# --- converters ----------------------------------------------------------------------------


def plan_summary(db_plan: SavedPlan) -> SavedPlanSummary:
    view = view_of(db_plan.inputs, db_plan.result)
    r = view.result
    return SavedPlanSummary(
        id=db_plan.id or 0,
        name=db_plan.name,
        team_ids=db_plan.team_ids,
        team_names=view.team_names,
        period_id=db_plan.period_id,
        period_name=view.inputs.period.name,
        created_at=db_plan.created_at,
        created_by=db_plan.created_by,
        scenario_name=r.scenario_name,
        value=r.value,
        effort=r.effort,
        capacity=r.capacity,
        headroom=r.headroom,
        utilisation=r.utilisation,
        confidence=r.confidence,
        fit_probability=r.fit.probability if r.fit else None,
        fit_label=r.fit.label if r.fit else None,
        inputs_digest=db_plan.inputs_digest,
        url=f"/plans/{db_plan.id}",
    )


def _plan_public(db_plan: SavedPlan) -> SavedPlanPublic:
    return SavedPlanPublic(
        **plan_summary(db_plan).model_dump(),
        scenario_changes=db_plan.scenario_changes,
        inputs=PlanInputs.model_validate(db_plan.inputs),
        result=PlanResult.model_validate(db_plan.result),
    )


def _scenario_public(db_scenario: Scenario) -> ScenarioPublic:
    return ScenarioPublic(
        id=db_scenario.id or 0,
        name=db_scenario.name,
        team_id=db_scenario.team_id,
        period_id=db_scenario.period_id,
        changes=changes_from_json(db_scenario.changes),
        created_at=db_scenario.created_at,
        created_by=db_scenario.created_by,
        url=f"/scenarios/{db_scenario.id}",
        etag=entity_tag(store.scenario_fingerprint(db_scenario)),
    )


def _figures(plan: Any) -> PlanFigures:
    fit = plan.fit
    return PlanFigures(
        feasible=plan.selection.feasible,
        value=plan.selection.value,
        effort=plan.selection.effort,
        capacity=plan.selection.capacity,
        headroom=plan.selection.headroom,
        utilisation=plan.utilisation
        if plan.utilisation is not None and math.isfinite(plan.utilisation)
        else None,
        confidence=plan.options.confidence,
        fit_probability=fit.probability if fit else None,
        fit_label=fit.label() if fit else None,
        p50_value=plan.p50_value,
        chosen=[
            ChosenPublic(key=r.key, title=r.title, planned_effort=r.effort_days, value=r.value)
            for r in plan.chosen_rows
        ],
    )


def _publication_public(db_publication: Publication) -> PublicationPublic:
    return PublicationPublic(
        id=db_publication.id or 0,
        plan_id=db_publication.plan_id,
        token=db_publication.token,
        url=f"/p/{db_publication.token}",
        created_at=db_publication.created_at,
        created_by=db_publication.created_by,
        revoked_at=db_publication.revoked_at,
        active=db_publication.revoked_at is None,
    )


ExportFormat = Literal["csv", "json", "md"]
_MEDIA = {"csv": "text/csv", "json": "application/json", "md": "text/markdown"}
EXPORT_RESPONSES: dict[int | str, dict[str, Any]] = {
    200: {
        "description": "The export: CSV (formula-like cells neutralised), JSON or Markdown.",
        "content": {"text/csv": {}, "application/json": {}, "text/markdown": {}},
    }
}


def export_response(body: str, fmt: str, filename: str) -> Response:
    """A download: the format's media type, UTF-8, and the file name twice (RFC 6266): as
    typed, letters of any script kept (filename*, RFC 8187), and in ASCII for old clients."""
    safe = "".join(c if (c.isascii() and c.isalnum()) or c in "-_" else "-" for c in filename)
    safe = safe[:60] or "plan"
    # Letters and digits of any script, spaces as hyphens; no path or quote characters.
    typed = "".join(c if c.isalnum() or c in "-_" else "-" for c in filename)[:60] or "plan"
    disposition = f'attachment; filename="{safe}.{fmt}"'
    if typed != safe:
        disposition += f"; filename*=UTF-8''{quote(f'{typed}.{fmt}', safe='')}"
    return Response(
        body,
        media_type=f"{_MEDIA[fmt]}; charset=utf-8",
        headers={"Content-Disposition": disposition},
    )


def plan_export(db_plan: SavedPlan, fmt: str, filename: str | None = None) -> Response:
    """A saved plan's download; an unsaved one (the live plan) is named by `filename`."""
    if fmt == "csv":
        body = exports.plan_csv(db_plan)
    elif fmt == "json":
        body = exports.json_text(exports.plan_json(db_plan))
    else:
        body = exports.plan_markdown(db_plan)
    return export_response(body, fmt, filename or f"plan-{db_plan.id}-{db_plan.name}")


def comparison_export(comparison: Comparison, fmt: str, filename: str | None = None) -> Response:
    """A comparison's download; one of unsaved plans (scenarios solved now) is named by filename."""
    if fmt == "csv":
        body = exports.comparison_csv(comparison)
    elif fmt == "json":
        body = exports.json_text(exports.comparison_json(comparison))
    else:
        body = exports.comparison_markdown(comparison)
    ids = "-".join(str(i) for i in comparison.plan_ids)
    return export_response(body, fmt, filename or f"comparison-{ids}")


# --- saved plans ---------------------------------------------------------------------------


@router.post(
    "/plans",
    response_model=SavedPlanPublic,
    status_code=status.HTTP_201_CREATED,
    description="Solve a team's live plan in a period (optionally with what-if changes) and "
    "save it as an immutable snapshot of its inputs and result.",
)
def save_plan(plan_in: PlanSaveIn, session: SessionDep, settings: SettingsDep) -> SavedPlanPublic:
    snapshot = capture(
        session,
        team_id=plan_in.team_id,
        period_id=plan_in.period_id,
        changes=plan_in.changes,
        resolution=settings.resolution_days,
    )
    db_plan = store.save_plan(
        session,
        name=plan_in.name,
        snapshot=snapshot,
        scenario_changes=plan_in.changes.to_json(),
        actor=plan_in.created_by,
    )
    return _plan_public(db_plan)


@router.get("/plans", response_model=list[SavedPlanSummary])
def list_plans(
    session: SessionDep, team_id: QueryId = None, period_id: QueryId = None
) -> list[SavedPlanSummary]:
    return [
        plan_summary(p) for p in store.list_plans(session, team_id=team_id, period_id=period_id)
    ]


@router.get("/plans/{plan_id}", response_model=SavedPlanPublic)
def read_plan(plan_id: PathId, session: SessionDep) -> SavedPlanPublic:
    return _plan_public(store.get_plan(session, plan_id=plan_id))


@router.delete(
    "/plans/{plan_id}",
    status_code=status.HTTP_204_NO_CONTENT,
    description="Delete a saved plan and its published links, which answer 404 from then "
    "on. The audit trail keeps its name, value and chosen initiatives (by title).",
)
def delete_plan(plan_id: PathId, session: SessionDep) -> None:
    store.delete_plan(session, plan_id=plan_id)


@router.get(
    "/plans/{plan_id}/changes",
    response_model=DriftPublic,
    description="Solve the live data with the plan's options and list what moved on since the "
    "snapshot: per capacity figure, per member and per initiative.",
)
def plan_changes(plan_id: PathId, session: SessionDep) -> DriftPublic:
    db_plan = store.get_plan(session, plan_id=plan_id)
    drift = drift_of(
        session, inputs=db_plan.inputs, result=db_plan.result, digest=db_plan.inputs_digest
    )
    return DriftPublic(
        available=drift.available,
        moved_on=drift.moved_on,
        message=drift.message,
        saved_digest=db_plan.inputs_digest,
        changes=[InputChangePublic(**vars(c)) for c in drift.changes],
        live_value=drift.live_value,
        live_entered=drift.live_entered,
        live_left=drift.live_left,
    )


@router.get(
    "/plans/{plan_id}/export.{fmt}",
    responses=EXPORT_RESPONSES,
    response_class=Response,
    description="Download the plan: csv (re-importable, formula-like cells neutralised), json "
    "(the full snapshot) or md (a summary to paste into a wiki or chat).",
)
def export_plan(plan_id: PathId, fmt: ExportFormat, session: SessionDep) -> Response:
    return plan_export(store.get_plan(session, plan_id=plan_id), fmt)


# --- published links -----------------------------------------------------------------------


@router.post(
    "/plans/{plan_id}/publications",
    response_model=PublicationPublic,
    status_code=status.HTTP_201_CREATED,
    description="Make a read-only link to the frozen plan; its token carries 256 random bits.",
)
def publish_plan(
    plan_id: PathId, session: SessionDep, created_by: Actor = Query("", max_length=NAME_MAX)
) -> PublicationPublic:
    return _publication_public(store.publish_plan(session, plan_id=plan_id, actor=created_by))


@router.get("/plans/{plan_id}/publications", response_model=list[PublicationPublic])
def list_publications(plan_id: PathId, session: SessionDep) -> list[PublicationPublic]:
    store.get_plan(session, plan_id=plan_id)
    return [_publication_public(p) for p in store.list_publications(session, plan_id=plan_id)]


@router.post(
    "/publications/{publication_id}/revoke",
    response_model=PublicationPublic,
    description="Revoke a link: from now on it answers 410. Revoking twice changes nothing.",
)
def revoke_publication(
    publication_id: PathId, session: SessionDep, created_by: Actor = Query("", max_length=NAME_MAX)
) -> PublicationPublic:
    db_publication = store.revoke_publication(
        session, publication_id=publication_id, actor=created_by
    )
    return _publication_public(db_publication)


# --- comparison ----------------------------------------------------------------------------


PLANS_PICK = "Plan ids, comma-separated, and `live` for the live plan now: plans=1,2,live"


@router.get(
    "/compare",
    response_model=Comparison,
    description="Compare two to four saved plans: figures, initiatives in each, differences "
    "per pair (set arithmetic on the chosen sets) and the capacity curves. `live` in the list "
    "is the live plan now of the first saved plan's team and period (its column has `id` "
    "null).",
)
def compare_plans(
    session: SessionDep,
    settings: SettingsDep,
    plans: list[str] = Query(description=PLANS_PICK),
) -> Comparison:
    return compare_saved(session, plans=plans, resolution=settings.resolution_days)


@router.get(
    "/teams/{team_id}/periods/{period_id}/scenario-comparison",
    response_model=Comparison,
    description="Compare a team's live plan and its scenarios in a period, two to four of them, "
    "each solved now on today's live data and saved nowhere. Columns of plans solved now have "
    "`id` null and `scenario_id` set for a scenario; `plan_ids` is empty.",
)
def compare_scenarios(
    team_id: PathId,
    period_id: PathId,
    session: SessionDep,
    settings: SettingsDep,
    pick: list[str] = Query(description="live and scenario ids, comma-separated: pick=live,3,5"),
) -> Comparison:
    return compare_picks(
        session,
        team_id=team_id,
        period_id=period_id,
        pick=pick,
        resolution=settings.resolution_days,
    )


@router.get("/compare/export.{fmt}", responses=EXPORT_RESPONSES, response_class=Response)
def export_comparison(
    fmt: ExportFormat,
    session: SessionDep,
    settings: SettingsDep,
    plans: list[str] = Query(description=PLANS_PICK),
) -> Response:
    comparison = compare_saved(session, plans=plans, resolution=settings.resolution_days)
    return comparison_export(comparison, fmt)


# --- scenarios -----------------------------------------------------------------------------


def _solved(db_scenario: Scenario, session: SessionDep, resolution: float) -> ScenarioSolvedPublic:
    outcome = solve_scenario(
        session,
        team_id=db_scenario.team_id,
        period_id=db_scenario.period_id,
        changes=changes_from_json(db_scenario.changes),
        resolution=resolution,
    )
    return ScenarioSolvedPublic(
        **_scenario_public(db_scenario).model_dump(),
        changed_inputs=[
            ChangedInputPublic(
                field=c.field, label=c.label, live=c.live, scenario=c.scenario, text=c.text
            )
            for c in outcome.changed
        ],
        live=_figures(outcome.live) if outcome.live is not None else None,
        live_problem=outcome.baseline.problem,
        scenario_plan=_figures(outcome.plan) if outcome.plan is not None else None,
        scenario_problem=outcome.error.message if outcome.error is not None else None,
        value_change=outcome.value_change,
        entered=outcome.entered,
        left=outcome.left,
    )


@router.post(
    "/scenarios",
    response_model=ScenarioSolvedPublic,
    status_code=status.HTTP_201_CREATED,
    responses=TAGGED_CREATED,
    description="Make a scenario of a team's live plan and solve it.",
)
def create_scenario(
    scenario_in: ScenarioCreateIn, session: SessionDep, settings: SettingsDep, etag: ETagDep
) -> ScenarioSolvedPublic:
    check_for_team(
        session,
        team_id=scenario_in.team_id,
        period_id=scenario_in.period_id,
        changes=scenario_in.changes,
    )
    db_scenario = store.create_scenario(
        session,
        team_id=scenario_in.team_id,
        period_id=scenario_in.period_id,
        name=scenario_in.name,
        changes=scenario_in.changes.to_json(),
        actor=scenario_in.created_by,
    )
    return etag(_solved(db_scenario, session, settings.resolution_days))


@router.get("/scenarios", response_model=list[ScenarioPublic])
def list_scenarios(
    session: SessionDep, team_id: QueryId = None, period_id: QueryId = None
) -> list[ScenarioPublic]:
    rows = store.list_scenarios(session, team_id=team_id, period_id=period_id)
    return [_scenario_public(s) for s in rows]


@router.get(
    "/scenarios/{scenario_id}",
    response_model=ScenarioSolvedPublic,
    responses=TAGGED,
    description="A scenario, solved on today's live data. The ETag is that of the stored "
    "scenario (name and changes), what PATCH and DELETE check; the solved plans are not in it.",
)
def read_scenario(
    scenario_id: PathId, session: SessionDep, settings: SettingsDep, etag: ETagDep
) -> ScenarioSolvedPublic:
    db_scenario = store.get_scenario(session, scenario_id=scenario_id)
    return etag(_solved(db_scenario, session, settings.resolution_days))


@router.patch(
    "/scenarios/{scenario_id}", response_model=ScenarioSolvedPublic, responses=CONDITIONAL
)
def update_scenario(
    scenario_id: PathId,
    scenario_in: ScenarioUpdateIn,
    session: SessionDep,
    settings: SettingsDep,
    condition: IfMatchDep,
) -> ScenarioSolvedPublic:
    db_scenario = store.get_scenario(session, scenario_id=scenario_id)
    if scenario_in.changes is not None:
        check_for_team(
            session,
            team_id=db_scenario.team_id,
            period_id=db_scenario.period_id,
            changes=scenario_in.changes,
        )
    db_scenario = store.update_scenario(
        session,
        scenario_id=scenario_id,
        name=scenario_in.name,
        changes=scenario_in.changes.to_json() if scenario_in.changes is not None else None,
        based_on=condition.based_on,
    )
    return condition(_solved(db_scenario, session, settings.resolution_days))


@router.delete(
    "/scenarios/{scenario_id}",
    status_code=status.HTTP_204_NO_CONTENT,
    responses=CONDITIONAL_DELETE,
)
def delete_scenario(scenario_id: PathId, session: SessionDep, condition: IfMatchDep) -> None:
    store.delete_scenario(session, scenario_id=scenario_id, based_on=condition.based_on)


@router.post(
    "/scenarios/{scenario_id}/plans",
    response_model=SavedPlanPublic,
    status_code=status.HTTP_201_CREATED,
    description="Solve the scenario on today's live data and save it as a plan.",
)
def save_scenario_as_plan(
    scenario_id: PathId, save_in: ScenarioSaveIn, session: SessionDep, settings: SettingsDep
) -> SavedPlanPublic:
    db_scenario = store.get_scenario(session, scenario_id=scenario_id)
    snapshot = capture(
        session,
        team_id=db_scenario.team_id,
        period_id=db_scenario.period_id,
        changes=changes_from_json(db_scenario.changes),
        resolution=settings.resolution_days,
        scenario_name=db_scenario.name,
    )
    db_plan = store.save_plan(
        session,
        name=save_in.name or db_scenario.name,
        snapshot=snapshot,
        scenario_changes=db_scenario.changes,
        actor=save_in.created_by,
    )
    return _plan_public(db_plan)


# --- import --------------------------------------------------------------------------------


@router.post(
    "/teams/{team_id}/plan-imports",
    response_model=ImportPublic,
    status_code=status.HTTP_201_CREATED,
    description="Import a plan CSV exported by Loadline into a team and period: creates the "
    "initiatives and a scenario with the plan's capacity; solving it on an empty team gives "
    "the same plan. All or nothing. Refused (422, field csv) while any of the file's titles "
    "is already one of the team's initiatives in the period (ignoring case and surrounding "
    "spaces), so a plan is not imported twice.",
)
def import_plan(team_id: PathId, import_in: ImportIn, session: SessionDep) -> ImportPublic:
    parsed = exports.parse_plan_csv(import_in.csv, team_id=team_id)
    name = import_in.scenario_name or f"Imported: {parsed.plan_name or 'plan'}"[:200]
    outcome = store.import_plan(
        session,
        team_id=team_id,
        period_id=import_in.period_id,
        imported=parsed,
        scenario_name=name,
        actor=import_in.created_by,
    )
    return ImportPublic(
        scenario=_scenario_public(outcome.scenario),
        initiative_ids=outcome.initiative_ids,
        warnings=outcome.warnings,
    )
