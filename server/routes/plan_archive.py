"""Pages for saved plans, scenarios, comparisons, published links, exports and CSV import.

Thin routes: forms are parsed into the API's input models (or planning.scenarios' form
reader), the planning and persistence layers do the work, and a refused value re-shows the
form with the values kept and the message beside the field.

The saved-plan page is rendered from the snapshot alone, so it stays byte-for-byte the same
while live data changes; whether live data has moved on is a separate fragment
(/plans/{id}/changes), loaded by htmx or followed as a link.
"""

from __future__ import annotations

from collections import Counter
from typing import Any

from fastapi import APIRouter, Query, Request
from fastapi.responses import Response
from pydantic import TypeAdapter, ValidationError
from starlette.datastructures import FormData, UploadFile

from server.actor import current_actor
from server.deps import SessionDep, SettingsDep, TemplatesDep
from server.errors import InputError, LoadlineError, NotFoundError, StaleVersionError
from server.models import AuditEntry, Period, SavedPlan, Team, utcnow
from server.planning import exports
from server.planning.compare import (
    LIVE_PICK,
    MAX_PLANS,
    Comparison,
    curves_chart,
    parse_plan_ids,
    single_curve_chart,
)
from server.planning.scenario_compare import compare_picks, compare_saved, parse_picks, picks_of
from server.planning.scenarios import (
    LISTED_FIGURES,
    ScenarioChanges,
    baseline_of,
    capture,
    changes_from_json,
    check_for_team,
    figures_of,
    parse_changes_form,
    scenario_snapshot,
    solve_scenario,
)
from server.planning.snapshots import drift_of, view_from_snapshot, view_of
from server.routes.api_plans import (
    ExportFormat,
    PathId,
    QueryId,
    RequiredQueryId,
    comparison_export,
    plan_export,
    plan_summary,
)
from server.routes.forms import after_conflict, basis_to_show, form_text, render, see_other
from server.schemas import MAX_ID, Title
from server.store import audit
from server.store import plans as store
from server.store.periods import get_period, list_periods
from server.store.teams import get_team
from server.templating import bare_message
from server.validation import field_and_message
from server.wording import counted

router = APIRouter(include_in_schema=False)

_TITLE = TypeAdapter(Title)
MAX_UPLOAD_CHARS = 1_500_000
REVOKE_CONFIRM = "I understand the address stops working for everyone who has it"
REVOKE_UNCONFIRMED = (
    f"Tick “{REVOKE_CONFIRM}” to revoke: a revoked link cannot be restored, and publishing "
    "again makes a new address."
)


def _int(raw: str) -> int | None:
    return int(raw) if raw.isdigit() and 1 <= int(raw) <= MAX_ID else None


def _actor(typed: str) -> str:
    """The signed-in user when there is one, else the name typed into the form."""
    return current_actor.get() or typed[:80]


def _name(raw: str) -> tuple[str | None, dict[str, str]]:
    try:
        return _TITLE.validate_python(raw), {}
    except ValidationError as exc:  # the schema's own words: too long, or not visible text
        return None, {"name": field_and_message(exc.errors()[0])[1]}


# --- saving a plan -------------------------------------------------------------------------


def _save_context(
    session: SessionDep, team_id: int, period_id: int, settings: SettingsDep
) -> dict[str, Any]:
    """The live plan to save, its figures shown and its inputs digest carried by the form."""
    team = get_team(session, team_id=team_id)
    period = get_period(session, period_id=period_id)
    try:
        snapshot: Any = capture(
            session,
            team_id=team_id,
            period_id=period_id,
            changes=ScenarioChanges(),
            resolution=settings.resolution_days,
        )
        problem = None
    except LoadlineError as exc:  # no capacity yet: the post says why, beside the form
        snapshot, problem = None, exc.message
    return {
        "team": team,
        "period": period,
        "scenario": None,
        "live_result": snapshot.result if snapshot is not None else None,
        "live_problem": problem,
        "shown_digest": snapshot.digest if snapshot is not None else "",
        "form": {"name": f"{team.name} · {period.name}"},
        "errors": {},
    }


@router.get("/plans/new")
def new_plan_page(
    request: Request,
    session: SessionDep,
    templates: TemplatesDep,
    settings: SettingsDep,
    team_id: RequiredQueryId,
    period_id: RequiredQueryId,
    scenario_id: QueryId = None,
) -> Response:
    if scenario_id is not None:  # a scenario is saved from its own page, beside its figures
        return see_other(f"/scenarios/{store.get_scenario(session, scenario_id=scenario_id).id}")
    context = _save_context(session, team_id, period_id, settings)
    return render(templates, request, "plans/save.html", context)


@router.post("/plans")
async def save_plan(
    request: Request, session: SessionDep, templates: TemplatesDep, settings: SettingsDep
) -> Response:
    """Save the live plan (or a scenario) of a team in a period as a frozen snapshot.

    The form carries what its page showed (`shown_digest`, and a scenario's `based_on`); a
    save over a change made since is refused with 409 and the page shown again with the new
    figures, the plan name kept.
    """
    form = await request.form()
    scenario_id = _int(form_text(form, "scenario_id"))
    scenario = store.get_scenario(session, scenario_id=scenario_id) if scenario_id else None
    # A scenario belongs to one team and period: those win over whatever the form says.
    team_id = scenario.team_id if scenario else _int(form_text(form, "team_id"))
    period_id = scenario.period_id if scenario else _int(form_text(form, "period_id"))
    if team_id is None or period_id is None:
        raise InputError("team_id and period_id: choose the team and the period.", field="team_id")
    name, errors = _name(form_text(form, "name"))
    status_code = 422
    if name is not None:
        changes = changes_from_json(scenario.changes) if scenario else ScenarioChanges()
        try:
            snapshot = capture(
                session,
                team_id=team_id,
                period_id=period_id,
                changes=changes,
                resolution=settings.resolution_days,
                scenario_name=scenario.name if scenario else None,
            )
            db_plan = store.save_plan(
                session,
                name=name,
                snapshot=snapshot,
                scenario_changes=changes.to_json(),
                actor=_actor(form_text(form, "created_by")),
                scenario=scenario,
                based_on=form_text(form, "based_on") or None,
                shown_digest=form_text(form, "shown_digest") or None,
            )
        except LoadlineError as exc:
            errors, status_code = {exc.field or "form": exc.message}, exc.status_code
        else:
            return see_other(f"/plans/{db_plan.id}")
    typed = {"name": form_text(form, "name"), "created_by": form_text(form, "created_by")}
    if scenario is not None:
        context = _scenario_context(session, scenario.id or 0, settings)
        context |= {"save_form": typed, "save_errors": errors}
        return render(templates, request, "plans/scenario.html", context, status_code=status_code)
    context = _save_context(session, team_id, period_id, settings)
    context |= {"form": typed, "errors": errors}
    return render(templates, request, "plans/save.html", context, status_code=status_code)


# --- saved plans ---------------------------------------------------------------------------


def _plans_context(
    session: SessionDep, team_id: int | None, period_id: int | None
) -> dict[str, Any]:
    period = get_period(session, period_id=period_id) if period_id is not None else None
    rows = store.list_plans(session, team_id=team_id, period_id=period_id)
    team = session.get(Team, team_id) if team_id is not None else None
    if team_id is not None and team is None and not rows:
        get_team(session, team_id=team_id)  # 404: no such team, and no plans of one
    return {
        "team": team,
        "team_id": team_id,
        "period": period,
        "plans": [plan_summary(p) for p in rows],
        "max_plans": MAX_PLANS,
        "ticked": set(),
        "errors": {},
    }


@router.get("/plans")
def plans_page(
    request: Request,
    session: SessionDep,
    templates: TemplatesDep,
    team_id: QueryId = None,
    period_id: QueryId = None,
    deleted: QueryId = None,
) -> Response:
    context = _plans_context(session, team_id, period_id)
    context["notice"] = _deleted_notice(session, deleted)
    return render(templates, request, "plans/list.html", context)


def _exists(session: SessionDep, model: Any, row_id: int) -> bool:
    return session.get(model, row_id) is not None


def _saved_context(session: SessionDep, plan_id: int) -> dict[str, Any]:
    db_plan = store.get_plan(session, plan_id=plan_id)
    view = view_of(db_plan.inputs, db_plan.result)
    team, period = view.inputs.teams[0], view.inputs.period
    return {
        "plan": db_plan,
        "view": view,
        # Links to live pages only while the plan's team and period exist: a saved plan
        # outlives both, and its page should not lead to pages that answer 404.
        "live": _exists(session, Team, team.id) and _exists(session, Period, period.id),
        "chart": single_curve_chart(view, label="Plan", name=db_plan.name),
        "publications": store.list_publications(session, plan_id=plan_id),
        "revoke_confirm": REVOKE_CONFIRM,
        "revoke_errors": {},
        "delete_error": None,
    }


@router.get("/plans/{plan_id}")
def saved_plan_page(
    plan_id: PathId, request: Request, session: SessionDep, templates: TemplatesDep
) -> Response:
    return render(templates, request, "plans/saved.html", _saved_context(session, plan_id))


@router.get("/plans/{plan_id}/changes")
def plan_changes_page(
    plan_id: PathId, request: Request, session: SessionDep, templates: TemplatesDep
) -> Response:
    db_plan = store.get_plan(session, plan_id=plan_id)
    drift = drift_of(
        session, inputs=db_plan.inputs, result=db_plan.result, digest=db_plan.inputs_digest
    )
    context = {"plan": db_plan, "drift": drift}
    if request.headers.get("hx-request") == "true":
        return render(templates, request, "plans/_drift.html", context)
    return render(templates, request, "plans/changes.html", context)


@router.get("/plans/{plan_id}/export.{fmt}")
def export_plan(plan_id: PathId, fmt: ExportFormat, session: SessionDep) -> Response:
    return plan_export(store.get_plan(session, plan_id=plan_id), fmt)


@router.get("/teams/{team_id}/plan/export.{fmt}")
def export_live_plan(
    team_id: PathId,
    fmt: ExportFormat,
    session: SessionDep,
    settings: SettingsDep,
    period_id: RequiredQueryId,
) -> Response:
    """The live plan as it stands, in the saved plans' formats, without saving it.

    Named "(live, not saved)" in the file, so a download cannot pass for a frozen plan.
    """
    team = get_team(session, team_id=team_id)
    period = get_period(session, period_id=period_id)
    snapshot = capture(
        session,
        team_id=team_id,
        period_id=period_id,
        changes=ScenarioChanges(),
        resolution=settings.resolution_days,
    )
    unsaved = SavedPlan(
        name=f"{team.name} · {period.name} (live, not saved)",
        period_id=period_id,
        team_ids=[team_id],
        inputs=snapshot.inputs_json(),
        result=snapshot.result_json(),
        inputs_digest=snapshot.digest,
        created_by=_actor(""),
        created_at=utcnow(),
    )
    return plan_export(unsaved, fmt, f"live-plan-{team.name}-{period.name}")


@router.post("/plans/{plan_id}/publish")
async def publish_plan(plan_id: PathId, request: Request, session: SessionDep) -> Response:
    form = await request.form()
    store.publish_plan(session, plan_id=plan_id, actor=_actor(form_text(form, "created_by")))
    return see_other(f"/plans/{plan_id}#links")


@router.post("/plans/{plan_id}/delete")
async def delete_plan(
    plan_id: PathId, request: Request, session: SessionDep, templates: TemplatesDep
) -> Response:
    """Delete a saved plan once its box is ticked; the saved plans list then says so."""
    form = await request.form()
    db_plan = store.get_plan(session, plan_id=plan_id)
    if form_text(form, "confirm") != "yes":  # the box the browser requires, when it was not
        context = _saved_context(session, plan_id) | {
            "delete_error": f"Tick “Yes, delete {db_plan.name}” to delete it."
        }
        return render(templates, request, "plans/saved.html", context, status_code=422)
    team_id = db_plan.team_ids[0] if db_plan.team_ids else None
    trace = store.delete_plan(session, plan_id=plan_id, actor=_actor(form_text(form, "created_by")))
    team = f"team_id={team_id}&" if team_id else ""
    return see_other(f"/plans?{team}deleted={trace}")


def _deleted_notice(session: SessionDep, entry_id: int | None) -> str | None:
    """'Deleted saved plan “…”.' read from the audit entry the redirect names."""
    entry = session.get(AuditEntry, entry_id) if entry_id else None
    if entry is None or entry.action != "plan.delete":
        return None
    return entry.summary + "."


@router.post("/publications/{publication_id}/revoke")
async def revoke_publication(
    publication_id: PathId, request: Request, session: SessionDep, templates: TemplatesDep
) -> Response:
    """Revoke a link once the box saying it stops for everyone is ticked; refused otherwise."""
    form = await request.form()
    if form_text(form, "confirm") != "yes":  # the box the browser requires, when it was not
        db_publication = store.get_publication(session, publication_id=publication_id)
        context = _saved_context(session, db_publication.plan_id)
        context["revoke_errors"] = {publication_id: REVOKE_UNCONFIRMED}
        return render(templates, request, "plans/saved.html", context, status_code=422)
    db_publication = store.revoke_publication(
        session, publication_id=publication_id, actor=_actor(form_text(form, "created_by"))
    )
    return see_other(f"/plans/{db_publication.plan_id}#links")


# --- comparison ----------------------------------------------------------------------------


def _ticked(raw: list[str]) -> set[str]:
    """The ticked boxes as sent, so a refused comparison shows them still ticked."""
    return {p.strip() for chunk in raw for p in chunk.split(",") if p.strip()}


@router.get("/compare")
def compare_page(
    request: Request,
    session: SessionDep,
    settings: SettingsDep,
    templates: TemplatesDep,
    plans: list[str] = Query(default_factory=list),
    team_id: QueryId = None,
    period_id: QueryId = None,
) -> Response:
    try:
        ids = parse_plan_ids(plans)
        store.get_plans(session, plan_ids=[i for i in ids if i is not None])
        query = ",".join(LIVE_PICK if i is None else str(i) for i in ids)
        if len(plans) > 1 or team_id is not None or period_id is not None:
            # Ticked boxes arrive as plans=1&plans=2 (and the list's filter): the stable URL.
            return see_other("/compare?plans=" + query)
        comparison = compare_saved(session, plans=plans, resolution=settings.resolution_days)
    except (InputError, NotFoundError) as exc:
        # Back to the saved plans (as filtered when ticked), the boxes still ticked.
        context = _plans_context(session, team_id, period_id)
        text = bare_message(exc.message, "plans")  # shown beside the boxes: a sentence
        context |= {"ticked": _ticked(plans), "errors": {"plans": text[:1].upper() + text[1:]}}
        return render(templates, request, "plans/list.html", context, status_code=422)
    names = {p.label: p.name for p in comparison.plans}
    live = next((p for p in comparison.plans if p.id is None), None)
    first = store.get_plan(session, plan_id=next(i for i in ids if i is not None))
    # Columns are told apart by name and save time to the minute; by number when both match.
    stamps = {p.id: p.created_at.strftime("%Y-%m-%d %H:%M") for p in comparison.plans}
    seen = Counter((p.name, stamps[p.id]) for p in comparison.plans)
    context = {
        "comparison": comparison,
        "stamps": stamps,
        "alike": {p.id for p in comparison.plans if seen[(p.name, stamps[p.id])] > 1},
        "chart": curves_chart(comparison.curves, names) if comparison.curves else None,
        "query": query,
        # The live column's team and period (those of the first saved plan), for its link.
        "live": live,
        "team": first.inputs["teams"][0],
        "period": first.inputs["period"],
    }
    return render(templates, request, "plans/compare.html", context)


@router.get("/compare/export.{fmt}")
def export_comparison(
    fmt: ExportFormat,
    session: SessionDep,
    settings: SettingsDep,
    plans: list[str] = Query(default_factory=list),
) -> Response:
    comparison = compare_saved(session, plans=plans, resolution=settings.resolution_days)
    return comparison_export(comparison, fmt)


# --- scenarios -----------------------------------------------------------------------------


def _scenario_form_context(
    session: SessionDep, team_id: int, period_id: int, settings: SettingsDep
) -> dict[str, Any]:
    """The live plan a scenario varies, to show live values beside each field."""
    return {
        "baseline": baseline_of(
            session, team_id=team_id, period_id=period_id, resolution=settings.resolution_days
        )
    }


def _scenarios_context(
    session: SessionDep, team_id: int, period_id: int | None, settings: SettingsDep
) -> dict[str, Any]:
    team = get_team(session, team_id=team_id)
    periods = list_periods(session)
    if period_id is None and periods:
        period_id = periods[0].id
    period = get_period(session, period_id=period_id) if period_id is not None else None
    scenarios = (
        store.list_scenarios(session, team_id=team_id, period_id=period_id) if period else []
    )
    context: dict[str, Any] = {
        "team": team,
        "periods": periods,
        "period": period,
        "scenarios": scenarios,
        "figures": {
            s.id: figures_of(
                session,
                team_id=team_id,
                period_id=s.period_id,
                changes=changes_from_json(s.changes),
                resolution=settings.resolution_days,
            )
            for s in scenarios[:LISTED_FIGURES]
        },
        "form": {},
        "errors": {},
        "ticked": set(),
        "max_plans": MAX_PLANS,
    }
    if period is not None:
        context |= _scenario_form_context(session, team_id, period.id or 0, settings)
    return context


@router.get("/teams/{team_id}/scenarios")
def scenarios_page(
    team_id: PathId,
    request: Request,
    session: SessionDep,
    templates: TemplatesDep,
    settings: SettingsDep,
    period_id: QueryId = None,
    deleted: QueryId = None,
) -> Response:
    context = _scenarios_context(session, team_id, period_id, settings)
    # After a delete: said from the audit entry, so the address cannot put words on the page.
    name = (
        store.deleted_scenario_name(session, scenario_id=deleted, team_id=team_id)
        if deleted is not None
        else None
    )
    context["notice"] = f"Deleted scenario “{name}”." if name else None
    # A what-if brought from the live plan starts the form; the post checks it like any value.
    context["form"] = {
        key: value
        for key, value in request.query_params.items()
        if key == "confidence" or (key.startswith("forced.") and value in ("in", "out"))
    }
    return render(templates, request, "plans/scenarios.html", context)


@router.get("/teams/{team_id}/scenarios/compare")
def compare_scenarios_page(
    team_id: PathId,
    request: Request,
    session: SessionDep,
    templates: TemplatesDep,
    settings: SettingsDep,
    period_id: QueryId = None,
    pick: list[str] = Query(default_factory=list),
) -> Response:
    """The live plan and scenarios picked, solved now side by side; nothing is saved."""
    team = get_team(session, team_id=team_id)
    if len(pick) > 1 and period_id is not None:
        # Ticked boxes arrive as pick=live&pick=3: the stable address says them in one.
        try:
            query = ",".join(parse_picks(pick))
        except InputError:
            pass  # refused below, with the boxes kept ticked
        else:
            return see_other(_address_of(team_id, period_id, query))
    try:
        comparison = _picked_comparison(session, settings, team_id, period_id, pick)
    except (InputError, NotFoundError) as exc:
        # Back to the scenarios of the period, the boxes still ticked.
        context = _scenarios_context(session, team_id, period_id, settings)
        text = bare_message(exc.message, exc.field or "pick")
        context |= {"ticked": _ticked(pick), "errors": {"pick": text[:1].upper() + text[1:]}}
        return render(templates, request, "plans/scenarios.html", context, status_code=422)
    period = get_period(session, period_id=period_id or 0)
    query = ",".join(picks_of(comparison))
    names = {p.label: p.name for p in comparison.plans}
    scenarios = [p for p in comparison.plans if p.scenario_id is not None]
    live = len(scenarios) < len(comparison.plans)
    heading = (
        f"Comparing the live plan and {counted(len(scenarios), 'scenario')}"
        if live
        else f"Comparing {counted(len(scenarios), 'scenario')}"
    )
    address = _address_of(team_id, period_id or 0, query)
    context = {
        "comparison": comparison,
        "unsaved": True,
        "team": team,
        "period": period,
        "heading": heading,
        "solved_at": comparison.plans[0].created_at.strftime("%Y-%m-%d %H:%M"),
        "address": address,
        "export_path": f"/teams/{team_id}/scenarios/compare/export",
        "export_query": f"period_id={period_id}&pick={query}",
        "chart": curves_chart(comparison.curves, names) if comparison.curves else None,
    }
    return render(templates, request, "plans/compare.html", context)


@router.get("/teams/{team_id}/scenarios/compare/export.{fmt}")
def export_scenario_comparison(
    team_id: PathId,
    fmt: ExportFormat,
    session: SessionDep,
    settings: SettingsDep,
    period_id: QueryId = None,
    pick: list[str] = Query(default_factory=list),
) -> Response:
    comparison = _picked_comparison(session, settings, team_id, period_id, pick)
    picks = "-".join(picks_of(comparison))
    return comparison_export(comparison, fmt, f"comparison-team-{team_id}-{picks}-not-saved")


def _address_of(team_id: int, period_id: int, query: str) -> str:
    """The stable address of a comparison of picks (query: the picks, comma-separated)."""
    return f"/teams/{team_id}/scenarios/compare?period_id={period_id}&pick={query}"


def _picked_comparison(
    session: SessionDep,
    settings: SettingsDep,
    team_id: int,
    period_id: int | None,
    pick: list[str],
) -> Comparison:
    if period_id is None:
        raise InputError("period_id: Choose the period to compare plans in.", field="period_id")
    return compare_picks(
        session,
        team_id=team_id,
        period_id=period_id,
        pick=pick,
        resolution=settings.resolution_days,
    )


def _read_changes(
    session: SessionDep, form: FormData, team_id: int, period_id: int
) -> tuple[ScenarioChanges | None, dict[str, str]]:
    fields = {key: value for key, value in form.items() if isinstance(value, str)}
    changes, errors = parse_changes_form(fields)
    # Days off that overrun the period are said with the other refusals, not after them.
    checked = changes
    if checked is None:
        checked, _ = parse_changes_form({k: v for k, v in fields.items() if "." in k})
    if checked is not None:
        try:
            check_for_team(session, team_id=team_id, period_id=period_id, changes=checked)
        except LoadlineError as exc:
            return None, errors | {exc.field or "form": exc.message}
    return changes, errors


@router.post("/teams/{team_id}/scenarios")
async def create_scenario(
    team_id: PathId,
    request: Request,
    session: SessionDep,
    templates: TemplatesDep,
    settings: SettingsDep,
) -> Response:
    form = await request.form()
    period_id = _int(form_text(form, "period_id"))
    if period_id is None:
        raise InputError("period_id: Choose a period.", field="period_id")
    name, errors = _name(form_text(form, "name"))
    changes, change_errors = _read_changes(session, form, team_id, period_id)
    errors |= change_errors
    if name is not None and changes is not None and not errors:
        db_scenario = store.create_scenario(
            session,
            team_id=team_id,
            period_id=period_id,
            name=name,
            changes=changes.to_json(),
            actor=_actor(form_text(form, "created_by")),
        )
        return see_other(f"/scenarios/{db_scenario.id}")
    context = _scenarios_context(session, team_id, period_id, settings)
    context |= {"form": _echo(form), "errors": errors}
    return render(templates, request, "plans/scenarios.html", context, status_code=422)


def _echo(form: FormData) -> dict[str, str]:
    return {key: value for key, value in form.items() if isinstance(value, str)}


def _form_of(changes: ScenarioChanges) -> dict[str, str]:
    """Stored changes as the form fields that express them."""
    data: dict[str, str] = {}
    for name in ("capacity_days", "focus_factor", "reserve_pct"):
        value = getattr(changes, name)
        if value is not None:
            data[name] = f"{value:g}"
    if changes.confidence is not None:
        data["confidence"] = f"P{round(changes.confidence * 100, 1):g}"
    for member_id, days in changes.days_off.items():
        data[f"days_off.{member_id}"] = f"{days:g}"
    for initiative_id in changes.forced_in:
        data[f"forced.{initiative_id}"] = "in"
    for initiative_id in changes.forced_out:
        data[f"forced.{initiative_id}"] = "out"
    return data


def _scenario_shown(db_scenario: Any, changes: ScenarioChanges, baseline: Any) -> dict[str, str]:
    """Every field of the scenario form as the stored scenario fills it (blank: live value)."""
    fields = {
        "name": db_scenario.name,
        "capacity_days": "",
        "focus_factor": "",
        "reserve_pct": "",
        "confidence": "",
    }
    fields |= {f"days_off.{m.member_id}": "" for m in baseline.inputs.capacity.members}
    fields |= {f"forced.{row.id}": "" for row in baseline.inputs.initiatives}
    return fields | _form_of(changes)


def _scenario_labels(baseline: Any) -> dict[str, str]:
    """The scenario form's fields as a message about a colleague's change names them."""
    labels = {"capacity_days": "capacity", "reserve_pct": "reserve", "name": "name"}
    labels |= {
        f"days_off.{m.member_id}": f"days off of {m.name}" for m in baseline.inputs.capacity.members
    }
    labels |= {
        f"forced.{row.id}": f"forcing of “{row.title}”" for row in baseline.inputs.initiatives
    }
    return labels


def _scenario_context(
    session: SessionDep, scenario_id: int, settings: SettingsDep
) -> dict[str, Any]:
    db_scenario = store.get_scenario(session, scenario_id=scenario_id)
    changes = changes_from_json(db_scenario.changes)
    outcome = solve_scenario(
        session,
        team_id=db_scenario.team_id,
        period_id=db_scenario.period_id,
        changes=changes,
        resolution=settings.resolution_days,
    )
    snapshot = (
        scenario_snapshot(session, outcome, name=db_scenario.name)
        if outcome.plan is not None
        else None
    )
    view = view_from_snapshot(snapshot) if snapshot is not None else None
    return {
        "scenario": db_scenario,
        "based_on": store.scenario_fingerprint(db_scenario),
        "team": get_team(session, team_id=db_scenario.team_id),
        "period": get_period(session, period_id=db_scenario.period_id),
        "outcome": outcome,
        "view": view,
        "chart": single_curve_chart(view, label="Scenario", name=db_scenario.name)
        if view is not None
        else None,
        "baseline": outcome.baseline,
        "form": {"name": db_scenario.name, **_form_of(changes)},
        "shown": _scenario_shown(db_scenario, changes, outcome.baseline),
        "labels": _scenario_labels(outcome.baseline),
        "errors": {},
        "save_form": {"name": db_scenario.name},
        "save_errors": {},
        "delete_error": None,
        "shown_digest": snapshot.digest if snapshot is not None else "",
    }


@router.get("/scenarios/{scenario_id}")
def scenario_page(
    scenario_id: PathId,
    request: Request,
    session: SessionDep,
    templates: TemplatesDep,
    settings: SettingsDep,
) -> Response:
    context = _scenario_context(session, scenario_id, settings)
    return render(templates, request, "plans/scenario.html", context)


@router.post("/scenarios/{scenario_id}")
async def update_scenario(
    scenario_id: PathId,
    request: Request,
    session: SessionDep,
    templates: TemplatesDep,
    settings: SettingsDep,
) -> Response:
    form = await request.form()
    db_scenario = store.get_scenario(session, scenario_id=scenario_id)
    name, errors = _name(form_text(form, "name"))
    changes, change_errors = _read_changes(
        session, form, db_scenario.team_id, db_scenario.period_id
    )
    errors |= change_errors
    status_code = 422
    if name is not None and changes is not None and not errors:
        try:
            store.update_scenario(
                session,
                scenario_id=scenario_id,
                name=name,
                changes=changes.to_json(),
                actor=_actor(form_text(form, "created_by")),
                based_on=form_text(form, "based_on") or None,
            )
        except StaleVersionError as exc:  # a colleague saved the scenario in between
            errors, status_code = {"version": exc.changed or exc.message}, exc.status_code
        except LoadlineError as exc:
            errors, status_code = {exc.field or "form": exc.message}, exc.status_code
        else:
            return see_other(f"/scenarios/{scenario_id}")
    context = _scenario_context(session, scenario_id, settings)
    context["edit_based_on"], context["shown"] = basis_to_show(
        form, errors, context["based_on"], context["shown"]
    )
    who = audit.last_actor(session, entity="scenario", entity_id=scenario_id)
    typed, errors = after_conflict(
        form, errors, _echo(form), context["shown"], labels=context["labels"], who=who
    )
    context |= {"form": typed, "errors": errors}
    return render(templates, request, "plans/scenario.html", context, status_code=status_code)


@router.post("/scenarios/{scenario_id}/delete")
async def delete_scenario(
    scenario_id: PathId,
    request: Request,
    session: SessionDep,
    templates: TemplatesDep,
    settings: SettingsDep,
) -> Response:
    form = await request.form()
    db_scenario = store.get_scenario(session, scenario_id=scenario_id)
    if form_text(form, "confirm") != "yes":  # the box the browser requires, when it was not
        context = _scenario_context(session, scenario_id, settings)
        context["delete_error"] = f"Tick “Yes, delete scenario {db_scenario.name}” to delete it."
        return render(templates, request, "plans/scenario.html", context, status_code=422)
    target = (
        f"/teams/{db_scenario.team_id}/scenarios?period_id={db_scenario.period_id}"
        f"&deleted={scenario_id}"
    )
    actor = _actor(form_text(form, "created_by"))
    store.delete_scenario(session, scenario_id=scenario_id, actor=actor)
    return see_other(target)


# --- importing a plan CSV ------------------------------------------------------------------


def _import_context(session: SessionDep, team_id: int) -> dict[str, Any]:
    return {
        "team": get_team(session, team_id=team_id),
        "periods": list_periods(session),
        "form": {},
        "errors": {},
    }


@router.get("/teams/{team_id}/plan-import")
def import_page(
    team_id: PathId, request: Request, session: SessionDep, templates: TemplatesDep
) -> Response:
    return render(templates, request, "plans/import.html", _import_context(session, team_id))


async def _uploaded_text(form: FormData) -> str:
    upload = form.get("file")
    if isinstance(upload, UploadFile) and upload.filename:
        raw = await upload.read(MAX_UPLOAD_CHARS * 4 + 1)
        try:
            return raw.decode("utf-8")
        except UnicodeDecodeError as exc:
            raise InputError("csv: The file is not UTF-8 text.", field="csv") from exc
    return form_text(form, "csv", strip=False)


@router.post("/teams/{team_id}/plan-import")
async def import_plan(
    team_id: PathId, request: Request, session: SessionDep, templates: TemplatesDep
) -> Response:
    async with request.form(max_part_size=MAX_UPLOAD_CHARS * 4) as form:
        return await _import_from_form(team_id, form, request, session, templates)


async def _import_from_form(
    team_id: int, form: FormData, request: Request, session: SessionDep, templates: TemplatesDep
) -> Response:
    period_id = _int(form_text(form, "period_id"))
    errors: dict[str, str] = {}
    try:
        if period_id is None:
            raise InputError("Choose the period to import into.", field="period_id")
        text = await _uploaded_text(form)
        if not text.strip():
            raise InputError("Choose an exported plan CSV file.", field="csv")
        if len(text) > MAX_UPLOAD_CHARS:
            raise InputError("csv: The file is too large.", field="csv")
        parsed = exports.parse_plan_csv(text, team_id=team_id)
        outcome = store.import_plan(
            session,
            team_id=team_id,
            period_id=period_id,
            imported=parsed,
            scenario_name=f"Imported: {parsed.plan_name or 'plan'}"[:200],
            actor=_actor(form_text(form, "created_by")),
        )
    except LoadlineError as exc:
        errors = {exc.field or "form": exc.message}
    else:
        if not outcome.warnings:
            return see_other(f"/scenarios/{outcome.scenario.id}")
        # Notes about the import (a blocked row imported as ruled out, another spread) are
        # said once, here, before the scenario: a redirect would drop them.
        done = {"team": get_team(session, team_id=team_id), "outcome": outcome}
        return render(templates, request, "plans/import_done.html", done)
    context = _import_context(session, team_id)
    context |= {
        "form": {
            "period_id": form_text(form, "period_id"),
            "csv": form_text(form, "csv", strip=False),
        },
        "errors": errors,
    }
    return render(templates, request, "plans/import.html", context, status_code=422)
