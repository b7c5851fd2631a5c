"""Initiative lists per team and period, and an initiative's edit page. Thin routes, as in
home_pages.
"""

from __future__ import annotations

from typing import Any
from urllib.parse import urlencode

from fastapi import APIRouter, Query, Request
from fastapi.responses import Response
from starlette.datastructures import FormData

from server.deps import SessionDep, TemplatesDep
from server.errors import InputError, LoadlineError, NotFoundError
from server.planning.paste import decimal_point, effort_text_message, typed_effort_fields
from server.routes.change_notices import change_notice
from server.routes.forms import (
    SHARE_RULE,
    form_text,
    merge_after_conflict,
    optional_int,
    optional_text,
    percent_to_share,
    refused_as_percentage,
    render,
    see_other,
    shown_as_posted,
    store_or_errors,
)
from server.schemas import (
    INITIATIVE_STATES,
    InitiativeCreate,
    InitiativeUpdate,
)
from server.store import audit
from server.store import initiatives as initiative_store
from server.store import periods as period_store
from server.store import teams as team_store
from server.templating import form_number
from server.validation import parse_form

router = APIRouter(include_in_schema=False)


# --- initiatives -------------------------------------------------------------------------


def _initiatives_context(session: SessionDep, team_id: int, period: str | None) -> dict[str, Any]:
    db_team = team_store.get_team(session, team_id=team_id)
    periods = period_store.list_periods(session)
    if period is None:
        period = str(periods[0].id) if periods else initiative_store.BACKLOG
    period_id: int | str = initiative_store.BACKLOG
    if period != initiative_store.BACKLOG:
        number = optional_int(period)
        if number is None:
            raise NotFoundError(
                f"No period “{period}”: choose one from the list, or the backlog.", field="period"
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
    saved: str | None = Query(None, max_length=40, description="What was just saved."),
) -> Response:
    context = _initiatives_context(session, team_id, period)
    context["saved_notice"] = change_notice(session, saved)
    return render(templates, request, "initiatives.html", context)


def _list_url(team_id: int, period: str, saved: str) -> str:
    """The initiative list a save returns to; `saved` names what was done, for it to say."""
    return f"/teams/{team_id}/initiatives?{urlencode({'period': period, 'saved': saved})}"


def initiative_values(form: FormData, team_id: int) -> dict[str, Any]:
    """Form fields -> the API's initiative input (blank optional fields become null)."""
    period = form_text(form, "period_id")
    effort: dict[str, Any] = {"likely": decimal_point(form_text(form, "effort.likely"))}
    if form_text(form, "effort.low") or form_text(form, "effort.high"):
        low, high = optional_text(form, "effort.low"), optional_text(form, "effort.high")
        effort |= {
            "low": None if low is None else decimal_point(low),
            "high": None if high is None else decimal_point(high),
        }
    confidence = optional_text(form, "confidence")
    return {
        "team_id": team_id,
        "period_id": None if period in {"", initiative_store.BACKLOG} else period,
        "title": form_text(form, "title"),
        "notes": form_text(form, "notes", strip=False),
        "effort": effort,
        "value": decimal_point(form_text(form, "value")),
        "confidence": percent_to_share(confidence),
        "state": form_text(form, "state") or "candidate",
        "either_or": optional_text(form, "either_or"),
        "needs": [v for v in form.getlist("needs") if isinstance(v, str) and v],
    }


def _in_percent(parsed: tuple[Any, dict[str, str]]) -> tuple[Any, dict[str, str]]:
    """Phrase a refused confidence as the percentage the page asks for, not as a share."""
    model, errors = parsed
    return model, refused_as_percentage(errors, "confidence", "confidence", SHARE_RULE)


def form_echo(form: FormData) -> dict[str, Any]:
    """The values as typed, to re-show a refused form unchanged."""
    echo: dict[str, Any] = {key: value for key, value in form.items() if isinstance(value, str)}
    for name in ("needs", "drop_effort"):  # fields sent once per ticked box or option
        echo[name] = [v for v in form.getlist(name) if isinstance(v, str)]
    return echo


@router.post("/teams/{team_id}/initiatives")
async def add_initiative(
    team_id: int, request: Request, session: SessionDep, templates: TemplatesDep
) -> Response:
    form = await request.form()
    values = initiative_values(form, team_id)
    initiative_in, errors = _in_percent(parse_form(InitiativeCreate, values))
    if initiative_in is not None:
        record, errors = store_or_errors(
            lambda: initiative_store.create_initiative(session, initiative_in=initiative_in)
        )
        if record is not None:
            period = form_text(form, "period_id") or initiative_store.BACKLOG
            return see_other(_list_url(team_id, period, f"added-{record.row.id}"))
    context = _initiatives_context(session, team_id, form_text(form, "period_id") or None)
    context |= {"form": form_echo(form), "errors": errors}
    return render(templates, request, "initiatives.html", context, status_code=422)


def _edit_context(session: SessionDep, initiative_id: int) -> dict[str, Any]:
    record = initiative_store.get_initiative(session, initiative_id=initiative_id)
    row = record.row
    others = initiative_store.list_initiatives(session, team_id=row.team_id)
    # Needs on other teams' work are offered too, or saving the form would drop them.
    listed = {r.row.id for r in others}
    others += [
        initiative_store.get_initiative(session, initiative_id=needed_id)
        for needed_id in record.needs
        if needed_id not in listed
    ]
    names = {t.id: t.name for t in team_store.list_teams(session)}
    stored = _stored_form(record)
    return {
        "record": record,
        # Effort other teams carry for it: listed, and each can be removed here (the way to
        # free a team another team's initiative holds).
        "other_efforts": [
            (names.get(tid, f"team {tid}"), line)
            for tid, line in sorted(record.efforts.items())
            if tid != row.team_id
        ],
        # Teams that can take a share of the work: every team but the owner.
        "effort_teams": sorted(
            ((tid, name) for tid, name in names.items() if tid != row.team_id),
            key=lambda team: team[1].casefold(),
        ),
        "team": team_store.get_team(session, team_id=row.team_id),
        "periods": period_store.list_periods(session),
        "states": INITIATIVE_STATES,
        "candidates": [r for r in others if r.row.id != row.id],
        "team_names": names,
        "form": stored | {"version": str(row.version)},
        "shown": stored,  # the stored values the form is based on (`shown_<field>`)
        "errors": {},
        "current": None,
        "merge_note": "",
    }


# Names of the edit form's fields in a message about a colleague's change.
EDIT_LABELS = {
    "effort.likely": "likely effort",
    "effort.low": "low effort",
    "effort.high": "high effort",
    "either_or": "either-or set",
    "period_id": "period",
}


def _stored_form(record: initiative_store.InitiativeRecord) -> dict[str, Any]:
    """The stored initiative as the edit form's fields show it."""
    row = record.row
    effort = record.own_effort
    return {
        "title": row.title,
        "notes": row.notes,
        "effort.likely": form_number(effort.likely),
        "effort.low": form_number(effort.low),
        "effort.high": form_number(effort.high),
        "value": form_number(row.value),
        "confidence": form_number(row.confidence * 100 if row.confidence is not None else None),
        "state": row.state,
        "either_or": row.either_or or "",
        "period_id": str(row.period_id) if row.period_id else initiative_store.BACKLOG,
        "needs": [str(n) for n in record.needs],
    }


@router.get("/initiatives/{initiative_id}/edit")
def edit_initiative_page(
    initiative_id: int, request: Request, session: SessionDep, templates: TemplatesDep
) -> Response:
    return render(templates, request, "initiative_edit.html", _edit_context(session, initiative_id))


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
    dropped = {v for v in form.getlist("drop_effort") if isinstance(v, str)}
    added_team = form_text(form, "add_effort_team")
    added_effort = form_text(form, "add_effort")
    if dropped or added_team:  # the other lines are sent back unchanged, low and high included
        values["other_efforts"] = [
            {"team_id": line.team_id, "likely": line.likely, "low": line.low, "high": line.high}
            for _, line in context["other_efforts"]
            if str(line.team_id) not in dropped and str(line.team_id) != added_team
        ]
        if added_team:
            added = {"likely": ""} | typed_effort_fields(added_effort)
            values["other_efforts"].append({"team_id": added_team} | added)
    update_in, errors = _in_percent(parse_form(InitiativeUpdate, values))
    errors = _added_effort_errors(errors, added_team, added_effort)
    typed = form_echo(form)
    # Refused as typed: the form stays based on what it showed (its version is echoed too).
    shown = shown_as_posted(form, context["shown"])
    if update_in is not None and not errors:
        try:
            initiative_store.update_initiative(
                session, initiative_id=initiative_id, initiative_in=update_in
            )
        except LoadlineError as exc:
            errors = _added_effort_errors({exc.field or "form": exc.message}, "", "")
            current = getattr(exc, "current", None)
            context = _edit_context(session, initiative_id) | {"current": current}
            if current is not None:  # a colleague's change: merge it in, based on it now
                merged = merge_after_conflict(form, typed, context["shown"], EDIT_LABELS)
                typed = merged.values | {"version": str(current["version"])}
                shown = context["shown"]
                who = audit.last_actor(session, entity="initiative", entity_id=initiative_id)
                context["merge_note"] = merged.note(who)
        else:
            period = form_text(form, "period_id") or initiative_store.BACKLOG
            return see_other(_list_url(team_id, period, f"saved-{initiative_id}"))
    context |= {"form": typed, "errors": errors, "shown": shown}
    status = 409 if context.get("current") else 422
    return render(templates, request, "initiative_edit.html", context, status_code=status)


def _added_effort_errors(errors: dict[str, str], team: str, effort: str) -> dict[str, str]:
    """Refusals of the other teams' lines, said beside the one field that adds a line (the
    lines kept are the stored ones, so only the added one can be refused)."""
    out = {k: v for k, v in errors.items() if not k.startswith("other_efforts")}
    refused = [v for k, v in errors.items() if k.startswith("other_efforts")]
    if team and not effort.strip():
        out["add_effort"] = "Enter the team's effort in days, or choose no team."
    elif effort.strip() and not team:
        # Never dropped in silence: an effort typed without its team is refused.
        out["add_effort"] = "Choose the team this effort is for, or clear the effort."
    elif refused:
        out["add_effort"] = effort_text_message(refused[0].split(": ", 1)[-1])
    return out


@router.post("/initiatives/{initiative_id}/delete")
async def delete_initiative(
    initiative_id: int, request: Request, session: SessionDep, templates: TemplatesDep
) -> Response:
    record = initiative_store.get_initiative(session, initiative_id=initiative_id)
    period = str(record.row.period_id) if record.row.period_id else initiative_store.BACKLOG
    form = await request.form()
    try:
        if form_text(form, "confirm") != "yes":  # the box the browser requires, when it was not
            raise InputError(
                f"Tick “Yes, delete {record.row.title}” to delete it: it leaves every plan.",
                field="confirm",
            )
        initiative_store.delete_initiative(session, initiative_id=initiative_id)
    except LoadlineError as exc:  # e.g. still needed: the edit page again, with the reason
        context = _edit_context(session, initiative_id) | {"delete_error": exc.message}
        return render(
            templates, request, "initiative_edit.html", context, status_code=exc.status_code
        )
    return see_other(_list_url(record.row.team_id, period, f"deleted-{initiative_id}"))
