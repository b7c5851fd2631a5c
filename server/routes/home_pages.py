"""Server-rendered pages: the home page (teams and periods) and a period's edit page.

Routes stay thin: they parse the form into the API's own input models, call the persistence
layer, and on a refused value re-show the same form with the values kept and the message
beside the field.
"""

from __future__ import annotations

from typing import Any

from fastapi import APIRouter, Request
from fastapi.responses import Response
from starlette.datastructures import FormData

from server.deps import SessionDep, TemplatesDep
from server.errors import LoadlineError
from server.models import Period
from server.routes.forms import (
    SPREAD_RULE,
    after_conflict,
    based_on,
    basis_to_show,
    form_text,
    percent_to_share,
    refusal_status,
    refused_as_percentage,
    render,
    see_other,
    store_or_errors,
)
from server.schemas import (
    PeriodCreate,
    PeriodUpdate,
    TeamCreate,
)
from server.store import audit
from server.store import periods as period_store
from server.store import teams as team_store
from server.validation import parse_form

router = APIRouter(include_in_schema=False)


# --- home --------------------------------------------------------------------------------


def _home_context(session: SessionDep) -> dict[str, Any]:
    periods = period_store.list_periods(session)
    return {
        "teams": team_store.list_teams(session),
        "periods": periods,
        "working_days": {p.id: period_store.period_working_days(p) for p in periods},
        "team_form": {"spread_pct": "0"},
        "team_errors": {},
        "period_form": {"kind": "sprint", "weekmask": "1111100"},
        "period_errors": {},
    }


@router.get("/")
def home(
    request: Request, session: SessionDep, templates: TemplatesDep, done: str | None = None
) -> Response:
    context = _home_context(session) | {"notice": _home_notice(session, done)}
    return render(templates, request, "home.html", context)


def _home_notice(session: SessionDep, code: str | None) -> str | None:
    """What a change just did, read from stored rows, so a link cannot make the page say
    anything else: 'Added period “…”.' for `done=added-ID` (or saved-ID), and the audit
    entry's 'Deleted team “…” …' for `done=deleted-team-ID` (team ids are never reused)."""
    kind, _, raw_id = (code or "").rpartition("-")
    if not raw_id.isdigit() or len(raw_id) > 10:
        return None
    if kind in ("added", "saved"):
        period = session.get(Period, int(raw_id))
        return f"{kind.capitalize()} period “{period.name}”." if period is not None else None
    if kind == "deleted-team":
        entry = audit.last_entry(session, action="team.delete", entity_id=int(raw_id))
        return f"{entry.summary}." if entry is not None else None
    return None


@router.post("/teams")
async def add_team(request: Request, session: SessionDep, templates: TemplatesDep) -> Response:
    form = await request.form()
    # A post without the field (an older page, a script) keeps the 0 % default; a blank
    # field is refused like on the team page, not read as 0 %.
    values = {"name": form_text(form, "name"), "spread_pct": form_text(form, "spread_pct")}
    spread = percent_to_share(values["spread_pct"]) if "spread_pct" in form else 0.0
    team_in, errors = parse_form(TeamCreate, {"name": values["name"], "default_spread": spread})
    refused_as_percentage(errors, "default_spread", "spread_pct", SPREAD_RULE)
    if team_in is not None:
        db_team, errors = store_or_errors(lambda: team_store.create_team(session, team_in=team_in))
        if db_team is not None:
            return see_other(f"/teams/{db_team.id}")
    context = _home_context(session) | {"team_form": values, "team_errors": errors}
    return render(templates, request, "home.html", context, status_code=422)


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
        db_period, errors = store_or_errors(
            lambda: period_store.create_period(session, period_in=period_in)
        )
        if db_period is not None:
            return see_other(f"/?done=added-{db_period.id}#periods-h")
    shown = values | {"non_working_dates": form_text(form, "non_working_dates")}
    context = _home_context(session) | {"period_form": shown, "period_errors": _flatten(errors)}
    return render(templates, request, "home.html", context, status_code=422)


PERIOD_LABELS = {
    "start_date": "first day",
    "end_date": "last day",
    "weekmask": "working weekdays",
    "non_working_dates": "non-working dates",
}


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
    basis: tuple[str, dict[str, Any]] | None = None,
    status_code: int = 200,
) -> Response:
    based_on_now, shown = basis or (
        period_store.period_fingerprint(db_period),
        _period_form(db_period),
    )
    context = {
        "period": db_period,
        "based_on": based_on_now,
        "shown": shown,
        "period_form": form or _period_form(db_period),
        "period_errors": errors or {},
        "delete_error": delete_error,
    }
    return render(templates, request, "period_edit.html", context, status_code=status_code)


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
        updated, errors = store_or_errors(
            lambda: period_store.update_period(
                session, period_id=period_id, period_in=period_in, based_on=based_on(form)
            )
        )
        if updated is not None:
            return see_other(f"/?done=saved-{period_id}#periods-h")
    session.refresh(db_period)
    typed = values | {"non_working_dates": form_text(form, "non_working_dates")}
    who = audit.last_actor(session, entity="period", entity_id=period_id)
    shown, errors = after_conflict(
        form, errors, typed, _period_form(db_period), labels=PERIOD_LABELS, who=who
    )
    basis = basis_to_show(
        form, errors, period_store.period_fingerprint(db_period), _period_form(db_period)
    )
    return _period_page(
        request,
        templates,
        db_period,
        form=shown,
        errors=_flatten(errors),
        basis=basis,
        status_code=refusal_status(errors),
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
