"""Server-rendered pages: home, team (members, availability, capacity), initiative lists.

Routes stay thin: they parse the form into the API's own input models, call the persistence
layer, and on a refused value re-show the same form with the values kept and the message beside
the field.
"""

from __future__ import annotations

from typing import Any

from fastapi import APIRouter, Request
from fastapi.responses import Response
from starlette.datastructures import FormData

from server.deps import SessionDep, TemplatesDep
from server.errors import LoadlineError, NotFoundError
from server.planning.team_capacity import capacity_of
from server.routes.forms import form_text, percent_to_share, refused_as_percentage, see_other
from server.schemas import (
    INITIATIVE_STATES,
    AvailabilityCreate,
    CapacitySettingsIn,
    InitiativeCreate,
    InitiativeUpdate,
    MemberCreate,
    MemberUpdate,
    PeriodCreate,
    PeriodUpdate,
    TeamCreate,
    TeamUpdate,
)
from server.store import initiatives as initiative_store
from server.store import periods as period_store
from server.store import teams as team_store
from server.validation import parse_form

router = APIRouter(include_in_schema=False)

# Refusals of a share typed as a percentage (member share, confidence) and of the spread.
_SHARE_RULE = "Enter a percentage above 0 and at most 100."
_SPREAD_RULE = "Enter a percentage from 0 to below 100."


def _optional(form: FormData, name: str) -> str | None:
    return form_text(form, name) or None


def _render(
    templates: TemplatesDep,
    request: Request,
    name: str,
    context: dict[str, Any],
    status_code: int = 200,
) -> Response:
    return templates.TemplateResponse(request, name, context, status_code=status_code)


def _store_or_errors(action: Any) -> tuple[Any, dict[str, str]]:
    """Run a persistence call; a refused change becomes a message beside its field."""
    try:
        return action(), {}
    except LoadlineError as exc:
        return None, {exc.field or "form": exc.message}


# --- home --------------------------------------------------------------------------------


def _home_context(session: SessionDep) -> dict[str, Any]:
    periods = period_store.list_periods(session)
    return {
        "teams": team_store.list_teams(session),
        "periods": periods,
        "working_days": {p.id: period_store.period_working_days(p) for p in periods},
        "team_form": {},
        "team_errors": {},
        "period_form": {"kind": "sprint", "weekmask": "1111100"},
        "period_errors": {},
    }


@router.get("/")
def home(request: Request, session: SessionDep, templates: TemplatesDep) -> Response:
    return _render(templates, request, "home.html", _home_context(session))


@router.post("/teams")
async def add_team(request: Request, session: SessionDep, templates: TemplatesDep) -> Response:
    form = await request.form()
    values = {"name": form_text(form, "name")}
    team_in, errors = parse_form(TeamCreate, values)
    if team_in is not None:
        db_team, errors = _store_or_errors(lambda: team_store.create_team(session, team_in=team_in))
        if db_team is not None:
            return see_other(f"/teams/{db_team.id}")
    context = _home_context(session) | {"team_form": values, "team_errors": errors}
    return _render(templates, request, "home.html", context, status_code=422)


def _period_values(form: FormData) -> dict[str, Any]:
    raw_dates = form_text(form, "non_working_dates").replace(",", " ").split()
    return {
        "name": form_text(form, "name"),
        "kind": form_text(form, "kind"),
        "start_date": form_text(form, "start_date"),
        "end_date": form_text(form, "end_date"),
        "weekmask": form_text(form, "weekmask") or "1111100",
        "non_working_dates": raw_dates,
    }


@router.post("/periods")
async def add_period(request: Request, session: SessionDep, templates: TemplatesDep) -> Response:
    form = await request.form()
    values = _period_values(form)
    period_in, errors = parse_form(PeriodCreate, values)
    if period_in is not None:
        db_period, errors = _store_or_errors(
            lambda: period_store.create_period(session, period_in=period_in)
        )
        if db_period is not None:
            return see_other("/")
    shown = values | {"non_working_dates": form_text(form, "non_working_dates")}
    context = _home_context(session) | {"period_form": shown, "period_errors": _flatten(errors)}
    return _render(templates, request, "home.html", context, status_code=422)


def _period_form(db_period: Any) -> dict[str, Any]:
    values = period_store.period_values(db_period)
    return values | {"non_working_dates": " ".join(values["non_working_dates"])}


def _period_page(
    request: Request,
    templates: TemplatesDep,
    db_period: Any,
    *,
    form: dict[str, Any] | None = None,
    errors: dict[str, str] | None = None,
    delete_error: str | None = None,
    status_code: int = 200,
) -> Response:
    context = {
        "period": db_period,
        "period_form": form or _period_form(db_period),
        "period_errors": errors or {},
        "delete_error": delete_error,
    }
    return _render(templates, request, "period_edit.html", context, status_code=status_code)


@router.get("/periods/{period_id}/edit")
def edit_period_page(
    period_id: int, request: Request, session: SessionDep, templates: TemplatesDep
) -> Response:
    db_period = period_store.get_period(session, period_id=period_id)
    return _period_page(request, templates, db_period)


@router.post("/periods/{period_id}")
async def update_period(
    period_id: int, request: Request, session: SessionDep, templates: TemplatesDep
) -> Response:
    db_period = period_store.get_period(session, period_id=period_id)
    form = await request.form()
    values = _period_values(form)
    period_in, errors = parse_form(PeriodUpdate, values)
    if period_in is not None:
        updated, errors = _store_or_errors(
            lambda: period_store.update_period(session, period_id=period_id, period_in=period_in)
        )
        if updated is not None:
            return see_other("/")
    session.refresh(db_period)
    shown = values | {"non_working_dates": form_text(form, "non_working_dates")}
    return _period_page(
        request, templates, db_period, form=shown, errors=_flatten(errors), status_code=422
    )


@router.post("/periods/{period_id}/delete")
async def delete_period(
    period_id: int, request: Request, session: SessionDep, templates: TemplatesDep
) -> Response:
    db_period = period_store.get_period(session, period_id=period_id)
    form = await request.form()
    if form_text(form, "confirm") != "yes":
        message = f"Tick “Yes, delete {db_period.name}” to delete it."
        return _period_page(request, templates, db_period, delete_error=message, status_code=422)
    try:
        period_store.delete_period(session, period_id=period_id)
    except LoadlineError as exc:  # still used: the store names by what
        return _period_page(
            request, templates, db_period, delete_error=exc.message, status_code=exc.status_code
        )
    return see_other("/")


def _flatten(errors: dict[str, str]) -> dict[str, str]:
    """Name list items by their list: 'non_working_dates.2' -> 'non_working_dates'."""
    flat: dict[str, str] = {}
    for field, message in errors.items():
        head = field.split(".")[0]
        flat.setdefault(head, message)
    return flat


# --- team page ---------------------------------------------------------------------------


def _team_context(session: SessionDep, team_id: int, period_id: int | None) -> dict[str, Any]:
    db_team = team_store.get_team(session, team_id=team_id)
    members = team_store.list_members(session, team_id=team_id)
    periods = period_store.list_periods(session)
    if period_id is None and periods:
        period_id = periods[0].id
    period = next((p for p in periods if p.id == period_id), None)
    if period_id is not None and period is None:
        period_store.get_period(session, period_id=period_id)  # 404 naming the unknown period
    capacity = None
    settings = None
    availability: dict[int, Any] = {}
    if period is not None:
        capacity = capacity_of(session, team_id=team_id, period_id=period.id or 0)
        settings = period_store.get_capacity_settings(
            session, team_id=team_id, period_id=period.id or 0
        )
        availability = {
            row.member_id: row
            for row in team_store.list_availability(session, team_id=team_id, period_id=period.id)
        }
    return {
        "team": db_team,
        "members": members,
        "periods": periods,
        "period": period,
        "capacity": capacity,
        "capacity_settings": settings,
        "availability": availability,
        "member_form": {"share": "100"},
        "member_errors": {},
        "availability_form": {},
        "availability_errors": {},
        "settings_form": {},
        "settings_errors": {},
        "team_form": {},
        "team_errors": {},
        "member_edit": None,  # {"id", "form", "errors"} of a refused member edit
        "settings_based_on": period_store.settings_fingerprint(settings) if settings else "",
        "team_based_on": team_store.team_fingerprint(db_team),
        "member_based_on": {m.id: team_store.member_fingerprint(m) for m in members},
        "owned_initiatives": team_store.count_team_initiatives(session, team_id=team_id),
        "scenario_count": team_store.count_team_scenarios(session, team_id=team_id),
        "delete_error": None,
        "delete_form": {},
    }


@router.get("/teams/{team_id}")
def team_page(
    team_id: int,
    request: Request,
    session: SessionDep,
    templates: TemplatesDep,
    period_id: int | None = None,
) -> Response:
    return _render(templates, request, "team.html", _team_context(session, team_id, period_id))


@router.post("/teams/{team_id}/members")
async def add_member(
    team_id: int, request: Request, session: SessionDep, templates: TemplatesDep
) -> Response:
    form = await request.form()
    values = {"name": form_text(form, "name"), "share": form_text(form, "share")}
    member_in, errors = _member_input(MemberCreate, values, team_id=team_id)
    period_id = _optional_int(form_text(form, "period_id"))
    if member_in is not None:
        db_member, errors = _store_or_errors(
            lambda: team_store.create_member(session, member_in=member_in)
        )
        if db_member is not None:
            return see_other(_team_url(team_id, period_id))
    context = _team_context(session, team_id, period_id) | {
        "member_form": values,
        "member_errors": errors,
    }
    return _render(templates, request, "team.html", context, status_code=422)


@router.post("/teams/{team_id}/settings")
async def update_team(
    team_id: int, request: Request, session: SessionDep, templates: TemplatesDep
) -> Response:
    form = await request.form()
    period_id = _optional_int(form_text(form, "period_id"))
    values = {"name": form_text(form, "name"), "spread_pct": form_text(form, "spread_pct")}
    spread = percent_to_share(values["spread_pct"] or "0")
    team_in, errors = parse_form(TeamUpdate, {"name": values["name"], "default_spread": spread})
    refused_as_percentage(errors, "default_spread", "spread_pct", _SPREAD_RULE)
    if team_in is not None:
        db_team, errors = _store_or_errors(
            lambda: team_store.update_team(
                session, team_id=team_id, team_in=team_in, based_on=_based_on(form)
            )
        )
        if db_team is not None:
            return see_other(_team_url(team_id, period_id))
    context = _team_context(session, team_id, period_id) | {
        "team_form": values,
        "team_errors": errors,
    }
    return _render(templates, request, "team.html", context, status_code=_refusal(errors))


@router.post("/teams/{team_id}/delete")
async def delete_team(
    team_id: int, request: Request, session: SessionDep, templates: TemplatesDep
) -> Response:
    db_team = team_store.get_team(session, team_id=team_id)
    form = await request.form()
    period_id = _optional_int(form_text(form, "period_id"))
    with_initiatives = form_text(form, "with_initiatives") == "yes"
    status_code = 422
    if form_text(form, "confirm") != "yes":  # the box the browser requires, when it was not
        message = f"Tick “Yes, delete team {db_team.name}” to delete it."
    else:
        try:
            team_store.delete_team(session, team_id=team_id, with_initiatives=with_initiatives)
        except LoadlineError as exc:  # still owns initiatives, or others depend on it
            message, status_code = exc.message, exc.status_code
        else:
            return see_other("/")
    context = _team_context(session, team_id, period_id) | {
        "delete_error": message,
        "delete_form": {"with_initiatives": with_initiatives},
    }
    return _render(templates, request, "team.html", context, status_code=status_code)


def _member_input(schema: Any, values: dict[str, str], **fixed: Any) -> tuple[Any, dict[str, str]]:
    """A member form (share typed in percent; blank is full time) parsed into `schema`."""
    allocation = percent_to_share(values["share"] or "100")
    parsed, errors = parse_form(schema, fixed | {"name": values["name"], "allocation": allocation})
    return parsed, refused_as_percentage(errors, "allocation", "share", _SHARE_RULE)


def _percentage(share: float) -> str:
    return f"{round(share * 100, 6):g}"


def _member_of_team(session: SessionDep, team_id: int, member_id: int) -> Any:
    db_member = team_store.get_member(session, member_id=member_id)
    if db_member.team_id != team_id:
        raise NotFoundError("That member is not on this team.", field="member_id")
    return db_member


@router.post("/teams/{team_id}/members/{member_id}")
async def update_member(
    team_id: int, member_id: int, request: Request, session: SessionDep, templates: TemplatesDep
) -> Response:
    form = await request.form()
    period_id = _optional_int(form_text(form, "period_id"))
    _member_of_team(session, team_id, member_id)
    values = {"name": form_text(form, "name"), "share": form_text(form, "share")}
    member_in, errors = _member_input(MemberUpdate, values)
    if member_in is not None:
        db_member, errors = _store_or_errors(
            lambda: team_store.update_member(
                session, member_id=member_id, member_in=member_in, based_on=_based_on(form)
            )
        )
        if db_member is not None:
            return see_other(_team_url(team_id, period_id))
    context = _team_context(session, team_id, period_id) | {
        "member_edit": {"id": member_id, "form": values, "errors": errors},
    }
    return _render(templates, request, "team.html", context, status_code=_refusal(errors))


@router.post("/teams/{team_id}/members/{member_id}/delete")
async def remove_member(
    team_id: int, member_id: int, request: Request, session: SessionDep, templates: TemplatesDep
) -> Response:
    form = await request.form()
    period_id = _optional_int(form_text(form, "period_id"))
    db_member = _member_of_team(session, team_id, member_id)
    if form_text(form, "confirm") != "yes":  # the box the browser requires, when it was not
        context = _team_context(session, team_id, period_id) | {
            "member_edit": {
                "id": member_id,
                "form": {"name": db_member.name, "share": _percentage(db_member.allocation)},
                "errors": {"form": f"Tick “Yes, remove {db_member.name}” to remove them."},
            },
        }
        return _render(templates, request, "team.html", context, status_code=422)
    team_store.delete_member(session, member_id=member_id)
    return see_other(_team_url(team_id, period_id))


@router.post("/teams/{team_id}/availability")
async def set_availability(
    team_id: int, request: Request, session: SessionDep, templates: TemplatesDep
) -> Response:
    form = await request.form()
    period_id = _optional_int(form_text(form, "period_id"))
    values = {
        "member_id": form_text(form, "member_id"),
        "period_id": period_id,
        "days_off": form_text(form, "days_off") or "0",
        "share": form_text(form, "share"),
    }
    shared = {k: v for k, v in values.items() if k != "share"}
    allocation = percent_to_share(values["share"] or None)
    availability_in, errors = parse_form(AvailabilityCreate, shared | {"allocation": allocation})
    refused_as_percentage(errors, "allocation", "share", _SHARE_RULE)
    if availability_in is None and "days_off" not in errors and period_id is not None:
        # Another field was refused: still say whether the days off fit, not one error a time.
        try:
            days_off = float(values["days_off"])
        except ValueError:
            days_off = None
        if days_off is not None:
            _, too_many = _store_or_errors(
                lambda: team_store.check_days_off(session, period_id=period_id, days_off=days_off)
            )
            errors = too_many | errors
    if availability_in is not None:
        # Another team's member has no row on this page to show a message in: a 404 page.
        _member_of_team(session, team_id, availability_in.member_id)
        row, errors = _store_or_errors(
            lambda: team_store.set_availability(session, availability_in=availability_in)
        )
        if row is not None:
            return see_other(_team_url(team_id, period_id))
    context = _team_context(session, team_id, period_id) | {
        "availability_form": values,
        "availability_errors": errors,
    }
    return _render(templates, request, "team.html", context, status_code=422)


@router.post("/teams/{team_id}/capacity")
async def set_capacity(
    team_id: int, request: Request, session: SessionDep, templates: TemplatesDep
) -> Response:
    form = await request.form()
    period_id = _optional_int(form_text(form, "period_id"))
    values = {
        "focus_factor": form_text(form, "focus_factor"),
        "reserve_pct": form_text(form, "reserve_pct"),
    }
    settings_in, errors = parse_form(CapacitySettingsIn, values)
    if settings_in is not None and period_id is not None:
        period_store.get_period(session, period_id=period_id)
        stored, errors = _store_or_errors(
            lambda: period_store.set_capacity_settings(
                session,
                team_id=team_id,
                period_id=period_id,
                settings_in=settings_in,
                based_on=_based_on(form),
            )
        )
        if stored is not None:
            return see_other(_team_url(team_id, period_id))
    if period_id is None:
        errors = {"period_id": "Choose a period first."}
    context = _team_context(session, team_id, period_id) | {
        "settings_form": values,
        "settings_errors": errors,
    }
    return _render(templates, request, "team.html", context, status_code=_refusal(errors))


def _refusal(errors: dict[str, str]) -> int:
    """409 when the form was refused for a colleague's change in between, else 422."""
    return 409 if "version" in errors else 422


def _based_on(form: FormData) -> str | None:
    """The fingerprint of the stored values the form was built from (None: none sent)."""
    return form_text(form, "based_on") or None


def _team_url(team_id: int, period_id: int | None) -> str:
    return f"/teams/{team_id}" + (f"?period_id={period_id}" if period_id else "")


def _optional_int(value: str) -> int | None:
    return int(value) if value.isdigit() else None


# --- initiatives -------------------------------------------------------------------------


def _initiatives_context(session: SessionDep, team_id: int, period: str | None) -> dict[str, Any]:
    db_team = team_store.get_team(session, team_id=team_id)
    periods = period_store.list_periods(session)
    if period is None:
        period = str(periods[0].id) if periods else initiative_store.BACKLOG
    period_id: int | str = initiative_store.BACKLOG
    if period != initiative_store.BACKLOG:
        number = _optional_int(period)
        if number is None:
            raise NotFoundError(
                f"No period {period!r}: choose one from the list, or the backlog.", field="period"
            )
        period_id = period_store.get_period(session, period_id=number).id or 0
    records = initiative_store.list_initiatives(session, team_id=team_id, period_id=period_id)
    return {
        "team": db_team,
        "periods": periods,
        "period_key": str(period_id),
        "records": records,
        "titles": _titles_with_needs(session, records),
        "states": INITIATIVE_STATES,
        "form": {"state": "candidate", "period_id": str(period_id)},
        "errors": {},
    }


def _titles_with_needs(
    session: SessionDep, records: list[initiative_store.InitiativeRecord]
) -> dict[int | None, str]:
    """Titles of the listed initiatives and of those they need (other periods or teams too)."""
    titles: dict[int | None, str] = {r.row.id: r.row.title for r in records}
    for needed_id in sorted({n for r in records for n in r.needs} - titles.keys()):
        titles[needed_id] = initiative_store.get_initiative(
            session, initiative_id=needed_id
        ).row.title
    return titles


@router.get("/teams/{team_id}/initiatives")
def initiatives_page(
    team_id: int,
    request: Request,
    session: SessionDep,
    templates: TemplatesDep,
    period: str | None = None,
) -> Response:
    context = _initiatives_context(session, team_id, period)
    return _render(templates, request, "initiatives.html", context)


def initiative_values(form: FormData, team_id: int) -> dict[str, Any]:
    """Form fields -> the API's initiative input (blank optional fields become null)."""
    period = form_text(form, "period_id")
    effort: dict[str, Any] = {"likely": form_text(form, "effort.likely")}
    if form_text(form, "effort.low") or form_text(form, "effort.high"):
        effort |= {"low": _optional(form, "effort.low"), "high": _optional(form, "effort.high")}
    confidence = _optional(form, "confidence")
    return {
        "team_id": team_id,
        "period_id": None if period in {"", initiative_store.BACKLOG} else period,
        "title": form_text(form, "title"),
        "notes": form_text(form, "notes", strip=False),
        "effort": effort,
        "value": form_text(form, "value"),
        "confidence": percent_to_share(confidence),
        "state": form_text(form, "state") or "candidate",
        "either_or": _optional(form, "either_or"),
        "needs": [v for v in form.getlist("needs") if isinstance(v, str) and v],
    }


def _in_percent(parsed: tuple[Any, dict[str, str]]) -> tuple[Any, dict[str, str]]:
    """Phrase a refused confidence as the percentage the page asks for, not as a share."""
    model, errors = parsed
    return model, refused_as_percentage(errors, "confidence", "confidence", _SHARE_RULE)


def form_echo(form: FormData) -> dict[str, Any]:
    """The values as typed, to re-show a refused form unchanged."""
    echo: dict[str, Any] = {key: value for key, value in form.items() if isinstance(value, str)}
    echo["needs"] = [v for v in form.getlist("needs") if isinstance(v, str)]
    return echo


@router.post("/teams/{team_id}/initiatives")
async def add_initiative(
    team_id: int, request: Request, session: SessionDep, templates: TemplatesDep
) -> Response:
    form = await request.form()
    values = initiative_values(form, team_id)
    initiative_in, errors = _in_percent(parse_form(InitiativeCreate, values))
    if initiative_in is not None:
        record, errors = _store_or_errors(
            lambda: initiative_store.create_initiative(session, initiative_in=initiative_in)
        )
        if record is not None:
            period = form_text(form, "period_id") or initiative_store.BACKLOG
            return see_other(f"/teams/{team_id}/initiatives?period={period}")
    context = _initiatives_context(session, team_id, form_text(form, "period_id") or None)
    context |= {"form": form_echo(form), "errors": errors}
    return _render(templates, request, "initiatives.html", context, status_code=422)


def _edit_context(session: SessionDep, initiative_id: int) -> dict[str, Any]:
    record = initiative_store.get_initiative(session, initiative_id=initiative_id)
    row = record.row
    effort = record.own_effort
    others = initiative_store.list_initiatives(session, team_id=row.team_id)
    # Needs on other teams' work are offered too, or saving the form would drop them.
    listed = {r.row.id for r in others}
    others += [
        initiative_store.get_initiative(session, initiative_id=needed_id)
        for needed_id in record.needs
        if needed_id not in listed
    ]
    return {
        "record": record,
        "team": team_store.get_team(session, team_id=row.team_id),
        "periods": period_store.list_periods(session),
        "states": INITIATIVE_STATES,
        "candidates": [r for r in others if r.row.id != row.id],
        "form": {
            "title": row.title,
            "notes": row.notes,
            "effort.likely": _plain(effort.likely),
            "effort.low": _plain(effort.low),
            "effort.high": _plain(effort.high),
            "value": _plain(row.value),
            "confidence": _plain(row.confidence * 100 if row.confidence is not None else None),
            "state": row.state,
            "either_or": row.either_or or "",
            "period_id": str(row.period_id) if row.period_id else initiative_store.BACKLOG,
            "needs": [str(n) for n in record.needs],
            "version": str(row.version),
        },
        "errors": {},
        "current": None,
    }


def _plain(value: float | None) -> str:
    return "" if value is None else f"{value:g}"


@router.get("/initiatives/{initiative_id}/edit")
def edit_initiative_page(
    initiative_id: int, request: Request, session: SessionDep, templates: TemplatesDep
) -> Response:
    return _render(
        templates, request, "initiative_edit.html", _edit_context(session, initiative_id)
    )


@router.post("/initiatives/{initiative_id}")
async def edit_initiative(
    initiative_id: int, request: Request, session: SessionDep, templates: TemplatesDep
) -> Response:
    form = await request.form()
    context = _edit_context(session, initiative_id)
    team_id = context["record"].row.team_id
    values = initiative_values(form, team_id)
    values.pop("team_id")
    values["version"] = form_text(form, "version")
    update_in, errors = _in_percent(parse_form(InitiativeUpdate, values))
    if update_in is not None:
        try:
            initiative_store.update_initiative(
                session, initiative_id=initiative_id, initiative_in=update_in
            )
        except LoadlineError as exc:
            errors = {exc.field or "form": exc.message}
            current = getattr(exc, "current", None)
            context = _edit_context(session, initiative_id) | {"current": current}
        else:
            period = form_text(form, "period_id") or initiative_store.BACKLOG
            return see_other(f"/teams/{team_id}/initiatives?period={period}")
    context |= {"form": form_echo(form), "errors": errors}
    status = 409 if context.get("current") else 422
    return _render(templates, request, "initiative_edit.html", context, status_code=status)


@router.post("/initiatives/{initiative_id}/delete")
async def delete_initiative(
    initiative_id: int, request: Request, session: SessionDep, templates: TemplatesDep
) -> Response:
    record = initiative_store.get_initiative(session, initiative_id=initiative_id)
    period = str(record.row.period_id) if record.row.period_id else initiative_store.BACKLOG
    try:
        initiative_store.delete_initiative(session, initiative_id=initiative_id)
    except LoadlineError as exc:  # e.g. still needed: the edit page again, with the reason
        context = _edit_context(session, initiative_id) | {"delete_error": exc.message}
        return _render(
            templates, request, "initiative_edit.html", context, status_code=exc.status_code
        )
    return see_other(f"/teams/{record.row.team_id}/initiatives?period={period}")
