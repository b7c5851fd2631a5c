"""The team page: members, their availability per period, capacity settings, the team's name
and spread, and deleting the team. Thin routes, as in home_pages.
"""

from __future__ import annotations

from typing import Any
from urllib.parse import urlencode

from fastapi import APIRouter, Query, Request
from fastapi.responses import Response

from server.deps import SessionDep, TemplatesDep
from server.errors import LoadlineError, NotFoundError
from server.planning.team_capacity import capacity_of
from server.routes.forms import (
    SHARE_RULE,
    SPREAD_RULE,
    after_conflict,
    based_on,
    basis_to_show,
    form_text,
    optional_int,
    percent_to_share,
    refusal_status,
    refused_as_percentage,
    render,
    see_other,
    store_or_errors,
)
from server.schemas import (
    AvailabilityCreate,
    CapacitySettingsIn,
    MemberCreate,
    MemberUpdate,
    TeamUpdate,
)
from server.store import audit
from server.store import periods as period_store
from server.store import teams as team_store
from server.templating import form_number
from server.validation import parse_form
from server.wording import possessive

router = APIRouter(include_in_schema=False)


# --- team page ---------------------------------------------------------------------------

# The stored values as each form shows them: its fields when opened, its `shown_<field>`
# values, and what a field untouched here takes after a colleague's change.


def _settings_shown(settings: Any) -> dict[str, str]:
    if settings is None:
        return {}
    return {
        "focus_factor": form_number(settings.focus_factor),
        "reserve_pct": form_number(settings.reserve_pct),
    }


def _team_shown(db_team: Any) -> dict[str, str]:
    return {"name": db_team.name, "spread_pct": form_number(db_team.default_spread * 100)}


def _member_shown(db_member: Any) -> dict[str, str]:
    return {"name": db_member.name, "share": form_number(db_member.allocation * 100)}


def _availability_shown(row: Any) -> dict[str, str]:
    if row is None:
        return {"days_off": "0", "share": ""}
    share = form_number(row.allocation * 100) if row.allocation is not None else ""
    return {"days_off": form_number(row.days_off), "share": share}


LABELS = {
    "focus_factor": "focus factor",
    "reserve_pct": "reserve",
    "spread_pct": "estimate spread",
    "days_off": "days off",
    "share": "share",
    "name": "name",
}


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
        "settings_shown": _settings_shown(settings),
        "team_based_on": team_store.team_fingerprint(db_team),
        "team_shown": _team_shown(db_team),
        "availability_fingerprint": team_store.availability_fingerprint,
        "availability_shown": _availability_shown,
        "availability_basis": None,  # (based_on, shown) of a refused days-off row
        "member_based_on": {m.id: team_store.member_fingerprint(m) for m in members},
        "member_shown": {m.id: _member_shown(m) for m in members},
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
    saved: str | None = Query(None, max_length=40, description="What was just saved."),
) -> Response:
    context = _team_context(session, team_id, period_id)
    context["saved_notice"] = _saved_notice(context, saved)
    return render(templates, request, "team.html", context)


@router.post("/teams/{team_id}/members")
async def add_member(
    team_id: int, request: Request, session: SessionDep, templates: TemplatesDep
) -> Response:
    form = await request.form()
    values = {"name": form_text(form, "name"), "share": form_text(form, "share")}
    member_in, errors = _member_input(MemberCreate, values, team_id=team_id)
    period_id = optional_int(form_text(form, "period_id"))
    if member_in is not None:
        db_member, errors = store_or_errors(
            lambda: team_store.create_member(session, member_in=member_in)
        )
        if db_member is not None:
            return see_other(_team_url(team_id, period_id, saved="member-added"))
    context = _team_context(session, team_id, period_id) | {
        "member_form": values,
        "member_errors": errors,
    }
    return render(templates, request, "team.html", context, status_code=422)


@router.post("/teams/{team_id}/settings")
async def update_team(
    team_id: int, request: Request, session: SessionDep, templates: TemplatesDep
) -> Response:
    form = await request.form()
    period_id = optional_int(form_text(form, "period_id"))
    values = {"name": form_text(form, "name"), "spread_pct": form_text(form, "spread_pct")}
    spread = percent_to_share(values["spread_pct"])  # blank is refused, not read as 0 %
    team_in, errors = parse_form(TeamUpdate, {"name": values["name"], "default_spread": spread})
    refused_as_percentage(errors, "default_spread", "spread_pct", SPREAD_RULE)
    if team_in is not None:
        db_team, errors = store_or_errors(
            lambda: team_store.update_team(
                session, team_id=team_id, team_in=team_in, based_on=based_on(form)
            )
        )
        if db_team is not None:
            return see_other(_team_url(team_id, period_id, saved="team"))
    context = _team_context(session, team_id, period_id)
    who = audit.last_actor(session, entity="team", entity_id=team_id)
    values, errors = after_conflict(
        form, errors, values, context["team_shown"], labels=LABELS, who=who
    )
    context["team_based_on"], context["team_shown"] = basis_to_show(
        form, errors, context["team_based_on"], context["team_shown"]
    )
    context |= {"team_form": values, "team_errors": errors}
    return render(templates, request, "team.html", context, status_code=refusal_status(errors))


@router.post("/teams/{team_id}/delete")
async def delete_team(
    team_id: int, request: Request, session: SessionDep, templates: TemplatesDep
) -> Response:
    db_team = team_store.get_team(session, team_id=team_id)
    form = await request.form()
    period_id = optional_int(form_text(form, "period_id"))
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
            return see_other(f"/?done=deleted-team-{team_id}")
    context = _team_context(session, team_id, period_id) | {
        "delete_error": message,
        "delete_form": {"with_initiatives": with_initiatives},
    }
    return render(templates, request, "team.html", context, status_code=status_code)


def _member_input(schema: Any, values: dict[str, str], **fixed: Any) -> tuple[Any, dict[str, str]]:
    """A member form (share typed in percent) parsed into `schema`. A blank share is refused,
    not read as full time: on an edit it would silently replace the stored share."""
    allocation = percent_to_share(values["share"])
    parsed, errors = parse_form(schema, fixed | {"name": values["name"], "allocation": allocation})
    return parsed, refused_as_percentage(errors, "allocation", "share", SHARE_RULE)


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
    period_id = optional_int(form_text(form, "period_id"))
    _member_of_team(session, team_id, member_id)
    values = {"name": form_text(form, "name"), "share": form_text(form, "share")}
    member_in, errors = _member_input(MemberUpdate, values)
    if member_in is not None:
        db_member, errors = store_or_errors(
            lambda: team_store.update_member(
                session, member_id=member_id, member_in=member_in, based_on=based_on(form)
            )
        )
        if db_member is not None:
            return see_other(_team_url(team_id, period_id, saved=f"member-{member_id}"))
    context = _team_context(session, team_id, period_id)
    stored = context["member_shown"].get(member_id, {})
    who = audit.last_actor(session, entity="member", entity_id=member_id)
    values, errors = after_conflict(form, errors, values, stored, labels=LABELS, who=who)
    context["member_edit"] = {"id": member_id, "form": values, "errors": errors}
    if member_id in context["member_shown"]:
        basis = basis_to_show(form, errors, context["member_based_on"][member_id], stored)
        context["member_based_on"][member_id], context["member_shown"][member_id] = basis
    return render(templates, request, "team.html", context, status_code=refusal_status(errors))


@router.post("/teams/{team_id}/members/{member_id}/delete")
async def remove_member(
    team_id: int, member_id: int, request: Request, session: SessionDep, templates: TemplatesDep
) -> Response:
    form = await request.form()
    period_id = optional_int(form_text(form, "period_id"))
    db_member = _member_of_team(session, team_id, member_id)
    if form_text(form, "confirm") != "yes":  # the box the browser requires, when it was not
        context = _team_context(session, team_id, period_id) | {
            "member_edit": {
                "id": member_id,
                "form": {"name": db_member.name, "share": form_number(db_member.allocation * 100)},
                "errors": {"form": f"Tick “Yes, remove {db_member.name}” to remove them."},
            },
        }
        return render(templates, request, "team.html", context, status_code=422)
    team_store.delete_member(session, member_id=member_id)
    return see_other(_team_url(team_id, period_id, saved="member-removed"))


@router.post("/teams/{team_id}/availability")
async def set_availability(
    team_id: int, request: Request, session: SessionDep, templates: TemplatesDep
) -> Response:
    form = await request.form()
    period_id = optional_int(form_text(form, "period_id"))
    values = {
        "member_id": form_text(form, "member_id"),
        "period_id": period_id,
        "days_off": form_text(form, "days_off"),
        "share": form_text(form, "share"),
    }
    shared = {k: v for k, v in values.items() if k != "share"}
    allocation = percent_to_share(values["share"] or None)
    availability_in, errors = parse_form(AvailabilityCreate, shared | {"allocation": allocation})
    if not values["days_off"].strip():  # a cleared field is not "no days off": say so
        availability_in = None
        errors = {"days_off": "Enter the days off, 0 if none."} | {
            k: v for k, v in errors.items() if k != "days_off"
        }
    refused_as_percentage(errors, "allocation", "share", SHARE_RULE)
    if availability_in is None and "days_off" not in errors and period_id is not None:
        # Another field was refused: still say whether the days off fit, not one error a time.
        try:
            days_off = float(values["days_off"])
        except ValueError:
            days_off = None
        if days_off is not None:
            _, too_many = store_or_errors(
                lambda: team_store.check_days_off(session, period_id=period_id, days_off=days_off)
            )
            errors = too_many | errors
    if availability_in is not None:
        # Another team's member has no row on this page to show a message in: a 404 page.
        _member_of_team(session, team_id, availability_in.member_id)
        row, errors = store_or_errors(
            lambda: team_store.set_availability(
                session, availability_in=availability_in, based_on=based_on(form)
            )
        )
        if row is not None:
            saved = f"days-off-{availability_in.member_id}"
            return see_other(_team_url(team_id, period_id, saved=saved))
    context = _team_context(session, team_id, period_id)
    stored_row = context["availability"].get(optional_int(values["member_id"]))
    who = audit.last_actor(
        session, entity="availability", entity_id=stored_row.id if stored_row else None
    )
    stored = _availability_shown(stored_row)
    values, errors = after_conflict(form, errors, values, stored, labels=LABELS, who=who)
    now = team_store.availability_fingerprint(stored_row)
    context["availability_basis"] = basis_to_show(form, errors, now, stored)
    context |= {"availability_form": values, "availability_errors": errors}
    return render(templates, request, "team.html", context, status_code=refusal_status(errors))


@router.post("/teams/{team_id}/capacity")
async def set_capacity(
    team_id: int, request: Request, session: SessionDep, templates: TemplatesDep
) -> Response:
    form = await request.form()
    period_id = optional_int(form_text(form, "period_id"))
    values = {
        "focus_factor": form_text(form, "focus_factor"),
        # "15 %" is 15: the label asks for a percentage, so its sign is no error.
        "reserve_pct": form_text(form, "reserve_pct").removesuffix("%").strip(),
    }
    settings_in, errors = parse_form(CapacitySettingsIn, values)
    if settings_in is not None and period_id is not None:
        period_store.get_period(session, period_id=period_id)
        stored, errors = store_or_errors(
            lambda: period_store.set_capacity_settings(
                session,
                team_id=team_id,
                period_id=period_id,
                settings_in=settings_in,
                based_on=based_on(form),
            )
        )
        if stored is not None:
            return see_other(_team_url(team_id, period_id, saved="capacity"))
    if period_id is None:
        errors = {"period_id": "Choose a period first."}
    context = _team_context(session, team_id, period_id)
    stored_settings = context["capacity_settings"]
    who = audit.last_actor(
        session,
        entity="capacity_settings",
        entity_id=stored_settings.id if stored_settings is not None else None,
    )
    values, errors = after_conflict(
        form, errors, values, context["settings_shown"], labels=LABELS, who=who
    )
    context["settings_based_on"], context["settings_shown"] = basis_to_show(
        form, errors, context["settings_based_on"], context["settings_shown"]
    )
    context |= {"settings_form": values, "settings_errors": errors}
    return render(templates, request, "team.html", context, status_code=refusal_status(errors))


def _team_url(team_id: int, period_id: int | None, *, saved: str | None = None) -> str:
    """The team page; `saved` names what was just saved, for the page to say so."""
    query = {"period_id": period_id, "saved": saved}
    shown = urlencode({k: v for k, v in query.items() if v})
    return f"/teams/{team_id}" + (f"?{shown}" if shown else "")


def _saved_notice(context: dict[str, Any], saved: str | None) -> str | None:
    """What the page says was saved, from the `saved` code the save redirected with."""
    if not saved:
        return None
    members = {str(m.id): m.name for m in context.get("members", [])}
    kind, _, member_id = saved.rpartition("-") if saved[-1:].isdigit() else (saved, "", "")
    name = members.get(member_id)
    if kind == "days-off" and name:
        return f"Saved {possessive(name)} days off."
    if kind == "member" and name:
        return f"Saved {name}."
    return {
        "member-added": "Member added.",
        "member-removed": "Member removed, with their days off.",
        "capacity": "Saved the focus factor and reserve.",
        "team": "Saved the team's name and estimate spread.",
    }.get(saved)
