"""The live plan page of a team in a period, and the changes made from it.

Every change posts a form that also carries the page's what-if settings, so the answer can be
the same view again. htmx requests get the plan fragment back (200 on success, 422 for a
refused value, 409 for an edit based on an old version); plain form posts are redirected
back to the page on success and get the whole page with the message beside the field when
refused. `Accept: application/json` gives the same figures as JSON.
"""

from __future__ import annotations

import threading
from collections import OrderedDict
from collections.abc import Callable, Hashable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any
from urllib.parse import urlencode

from fastapi import APIRouter, Request
from fastapi.responses import JSONResponse, RedirectResponse, Response
from markupsafe import Markup
from starlette.datastructures import FormData, ImmutableMultiDict

from server.access import allowed
from server.deps import SessionDep, SettingsDep, TemplatesDep
from server.errors import LoadlineError, NotFoundError, StaleVersionError
from server.planning.paste import (
    PasteResult,
    commit_paste,
    decimal_point,
    effort_text_message,
    parse_paste,
    typed_effort_fields,
)
from server.planning.plan_view import (
    PlanView,
    RowEdit,
    RowView,
    WhatIf,
    build_plan_view,
    parse_whatif,
    plan_json,
    row_form,
)
from server.planning.undo import UndoOutcome, redo_last_undo, undo_last_change
from server.routes.change_notices import change_notice
from server.routes.forms import form_text, merge_after_conflict, see_other, shown_as_posted
from server.routes.fragments import is_htmx
from server.schemas import INITIATIVE_STATES, InitiativeCreate, InitiativeUpdate
from server.store import audit
from server.store import initiatives as initiative_store
from server.store.periods import list_periods
from server.validation import parse_form
from server.wording import counted

router = APIRouter(include_in_schema=False)

ROW_FIELDS = ("effort", "value", "state")
ROW_LABELS = {"effort": "effort", "value": "value", "state": "state"}
QUICK_FIELDS = ("title", "effort", "value")


def _multi(data: ImmutableMultiDict[str, Any] | FormData) -> dict[str, list[str]]:
    return {key: [v for v in data.getlist(key) if isinstance(v, str)] for key in data}


def _wants_json(request: Request) -> bool:
    return "application/json" in request.headers.get("accept", "")


def plan_url(team_id: int, whatif: WhatIf, anchor: str = "") -> str:
    query = whatif.query()
    return f"/teams/{team_id}/plan" + (f"?{query}" if query else "") + anchor


# Rendered rows, reused while nothing they show has changed: an edit re-solves the plan, but
# most rows of a large plan come out the same, and rendering them again was most of the cost.
_ROW_CACHE: OrderedDict[Hashable, Markup] = OrderedDict()
_ROW_CACHE_SIZE = 5000
_ROW_CACHE_LOCK = threading.Lock()


@dataclass(frozen=True)
class RowCache:
    """Rendered rows of one page; `shared` holds everything outside the row that they show."""

    shared: tuple[Hashable, ...]
    focus: str | None

    def _key(self, row: RowView) -> Hashable | None:
        if row.errors or row.current or row.change:
            return None  # one-off states: render them fresh
        if self.focus is not None and self.focus.endswith(f"-{row.id}"):
            return None
        return (
            self.shared,
            row.id,
            row.version,
            row.title,
            row.decision,
            row.forced,
            row.state,
            row.effort_text,
            row.value_text,
            row.planned_effort,
            row.pert,
            row.blocked_by,
            row.needs,
            row.either_or,
            row.other_teams,
            row.editable,
            row.explanation,
        )

    def get(self, row: RowView) -> Markup | None:
        key = self._key(row)
        if key is None:
            return None
        with _ROW_CACHE_LOCK:
            html = _ROW_CACHE.get(key)
            if html is not None:
                _ROW_CACHE.move_to_end(key)
            return html

    def put(self, row: RowView, html: str) -> Markup:
        markup = Markup(html)
        key = self._key(row)
        if key is not None:
            with _ROW_CACHE_LOCK:
                _ROW_CACHE[key] = markup
                while len(_ROW_CACHE) > _ROW_CACHE_SIZE:
                    _ROW_CACHE.popitem(last=False)
        return markup


def can_edit(request: Request, team_id: int) -> bool:
    """Whether this person's role may change the plan's initiatives (the access table)."""
    return allowed(
        getattr(request.state, "user", None), "POST", f"/teams/{team_id}/plan/initiatives"
    )


def _row_cache(request: Request, view: PlanView, focus: str | None, editing: bool) -> RowCache:
    shared = (
        editing,  # a viewer's rows have no fields: never reuse an editor's
        request.state.csrf_token,
        view.team.id,
        view.whatif.query(),
        view.whatif.confidence_label,
        view.explained,
    )
    return RowCache(shared=shared, focus=focus)


def _render(
    request: Request,
    templates: TemplatesDep,
    view: PlanView,
    *,
    status_code: int = 200,
    extra: Mapping[str, Any] | None = None,
) -> Response:
    if _wants_json(request):
        return JSONResponse(plan_json(view), status_code=status_code)
    context = {
        "view": view,
        "states": INITIATIVE_STATES,
        "plan_url": plan_url,
        "quick": {"form": {}, "errors": {}},
        "paste": None,
        "paste_text": "",
        "notice": None,
        "focus": None,
        "can_edit": can_edit(request, view.team.id or 0),
    } | dict(extra or {})
    context["row_cache"] = _row_cache(request, view, context["focus"], context["can_edit"])
    show_fragment = is_htmx(request)
    context["fragment"] = show_fragment
    name = "_plan_body.html" if show_fragment else "plan.html"
    response = templates.TemplateResponse(request, name, context, status_code=status_code)
    response.headers["Vary"] = "HX-Request, Accept"
    if request.method == "POST" and show_fragment:
        # A boosted form would put its action in the address bar; the page is still the plan.
        response.headers["HX-Push-Url"] = plan_url(view.team.id or 0, view.whatif)
    return response


def _view(
    request: Request,
    session: SessionDep,
    settings: SettingsDep,
    team_id: int,
    params: Mapping[str, Sequence[str]],
    **kwargs: Any,
) -> PlanView:
    whatif, errors = parse_whatif(params)
    return build_plan_view(
        session,
        team_id=team_id,
        whatif=whatif,
        whatif_errors=errors,
        resolution=settings.resolution_days,
        **kwargs,
    )


def _previous(form: FormData) -> frozenset[int] | None:
    """Ids the page showed as chosen before this change (to mark what entered or left)."""
    raw = form.get("was_in")
    if not isinstance(raw, str):
        return None
    return frozenset(int(p) for p in raw.split(",") if p.isdigit())


def _back(team_id: int, whatif: WhatIf, anchor: str = "") -> Response:
    return see_other(plan_url(team_id, whatif, anchor))


# --- reading -----------------------------------------------------------------------------------


def _after_change(
    request: Request,
    session: SessionDep,
    settings: SettingsDep,
    templates: TemplatesDep,
    *,
    team_id: int,
    form: FormData,
    anchor: str = "",
    extra: dict[str, Any] | None = None,
    done: str | None = None,
) -> Response:
    """A change is stored: back to the plan page, or the plan re-rendered for htmx and JSON,
    marking what the change moved in or out of the plan. `done` names the change for the
    page to say so after the redirect (see `change_notices`): without scripts too."""
    params = _multi(form)
    if not is_htmx(request) and not _wants_json(request):
        whatif, _ = parse_whatif(params)
        if done is None:
            return _back(team_id, whatif, anchor)
        url = plan_url(team_id, whatif)
        return see_other(url + ("&" if "?" in url else "?") + urlencode({"done": done}) + anchor)
    view = _view(request, session, settings, team_id, params, previous_chosen=_previous(form))
    return _render(request, templates, view, extra=extra)


@router.get("/teams/{team_id}/plan")
def plan_page(
    team_id: int,
    request: Request,
    session: SessionDep,
    settings: SettingsDep,
    templates: TemplatesDep,
) -> Response:
    params = _multi(request.query_params)
    if not (params.get("period_id") or [""])[0].isdigit():
        periods = list_periods(session)
        if periods:  # the plan of the first period: a link that names its period
            whatif, _ = parse_whatif(params | {"period_id": [str(periods[0].id)]})
            return RedirectResponse(plan_url(team_id, whatif), status_code=307)
    view = _view(request, session, settings, team_id, params)
    status = 422 if view.whatif_errors else 200
    done = (params.get("done") or [""])[0]
    notice = change_notice(session, done)
    # After a row was added the keyboard goes on in the next new row, as it does with scripts
    # (Enter saves and opens the next one); after any other change, to what it did.
    focus = "quick-title" if done.startswith("added-") else "notice"
    extra = {"notice": notice, "focus": focus} if notice else None
    return _render(request, templates, view, status_code=status, extra=extra)


@router.get("/teams/{team_id}/plan/initiatives/{initiative_id}/explain")
def explain_fragment(
    team_id: int,
    initiative_id: int,
    request: Request,
    session: SessionDep,
    settings: SettingsDep,
    templates: TemplatesDep,
) -> Response:
    view = _view(request, session, settings, team_id, _multi(request.query_params), explain=True)
    row = next((r for r in view.rows if r.id == initiative_id), None)
    if row is None:
        raise initiative_store.deleted_refusal(session, initiative_id) or NotFoundError(
            f"No initiative with id {initiative_id} in this plan.", field="initiative_id"
        )
    if _wants_json(request):
        body = plan_json(view)
        return JSONResponse(next(r for r in body["rows"] if r["id"] == initiative_id))
    return templates.TemplateResponse(
        request,
        "_plan_explain_fragment.html" if is_htmx(request) else "plan_explain.html",
        {
            "view": view,
            "row": row,
            "plan_url": plan_url,
            "states": INITIATIVE_STATES,
            "can_edit": can_edit(request, team_id),
            # Fetched into its row, the row's form is there for "Pin it" and the like.
            "standalone": not is_htmx(request),
        },
    )


# --- inline edit of one row ---------------------------------------------------------------------


def _row_values(form: FormData) -> dict[str, str]:
    values = {name: form_text(form, name) for name in (*ROW_FIELDS, "version")}
    # "Pin it" and the like are buttons of the row's form that name the state to set.
    state = form_text(form, "set_state")
    return values | ({"state": state} if state else {})


def _required(values: dict[str, Any]) -> dict[str, Any]:
    """Leave blank fields out, so they are reported as required rather than as bad numbers."""
    return {key: value for key, value in values.items() if value not in ("", {})}


def _update_values(values: Mapping[str, str]) -> dict[str, Any]:
    # Every field is sent: a cleared field is refused, never read as "leave unchanged".
    return {
        "version": values["version"],
        "effort": typed_effort_fields(values["effort"]) or {"likely": ""},
        "value": decimal_point(values["value"]),
        "state": values["state"] or "candidate",
    }


def _unchanged(record: initiative_store.InitiativeRecord, update_in: InitiativeUpdate) -> bool:
    line = record.own_effort
    effort = update_in.effort
    return (
        effort is not None
        and (effort.likely, effort.low, effort.high) == (line.likely, line.low, line.high)
        and update_in.value == record.row.value
        and update_in.state == record.row.state
    )


def _field(name: str) -> str:
    head = name.split(".")[0]
    return head if head in (*ROW_FIELDS, "version") else "form"


def _typed_errors(refused: Mapping[str, str], field_of: Callable[[str], str]) -> dict[str, str]:
    """Refusals by the page's field; an effort typed in one field says what it accepts."""
    errors: dict[str, str] = {}
    for name, message in refused.items():
        field = field_of(name)
        errors.setdefault(field, effort_text_message(message) if field == "effort" else message)
    return errors


def _quick_field(name: str) -> str:
    head = name.split(".")[0]
    return head if head in QUICK_FIELDS else "form"


@router.post("/teams/{team_id}/plan/initiatives/{initiative_id}")
async def edit_row(
    team_id: int,
    initiative_id: int,
    request: Request,
    session: SessionDep,
    settings: SettingsDep,
    templates: TemplatesDep,
) -> Response:
    form = await request.form()
    params = _multi(form)
    record = initiative_store.get_initiative(session, initiative_id=initiative_id)
    if record.row.team_id != team_id:
        raise NotFoundError(
            f"Initiative {initiative_id} belongs to another team; edit it on that team's plan.",
            field="initiative_id",
        )
    values = _row_values(form)
    update_in, refused = parse_form(InitiativeUpdate, _update_values(values))
    errors = _typed_errors(refused, _field)
    current = None
    # Nothing changed (e.g. a field left without editing): no store call, no new version.
    if update_in is not None and not _unchanged(record, update_in):
        try:
            initiative_store.update_initiative(
                session, initiative_id=initiative_id, initiative_in=update_in
            )
        except StaleVersionError as exc:
            errors = {"version": exc.message}
            current = exc.current
        except LoadlineError as exc:
            errors = {_field(exc.field or "form"): exc.message}
    if not errors:  # stored, or nothing to store
        return _after_change(
            request,
            session,
            settings,
            templates,
            team_id=team_id,
            form=form,
            anchor=f"#row-{initiative_id}",
            done=f"saved-{initiative_id}",
        )
    note = ""
    shown = None
    if current is not None:
        # Fields changed here keep their typed values, the others take the stored ones, and
        # saving again puts the result on top of the stored version.
        merged = merge_after_conflict(form, values, row_form(record, team_id), ROW_LABELS)
        values = merged.values | {"version": str(current["version"])}
        who = audit.last_actor(session, entity="initiative", entity_id=initiative_id)
        note = merged.note(who)
    else:  # refused as typed: the row stays based on what it showed, version included
        shown = shown_as_posted(form, row_form(record, team_id))
    edit = RowEdit(values=values, errors=errors, current=current, note=note, shown=shown)
    view = _view(request, session, settings, team_id, params, edits={initiative_id: edit})
    status = 409 if current is not None else 422
    first = next((name for name in ROW_FIELDS if name in errors), ROW_FIELDS[0])
    # A colleague's change: the message saying what is stored now, then the fields.
    focus = f"conflict-{initiative_id}" if current is not None else f"{first}-{initiative_id}"
    return _render(request, templates, view, status_code=status, extra={"focus": focus})


# --- quick add ---------------------------------------------------------------------------------


@router.post("/teams/{team_id}/plan/initiatives")
async def quick_add(
    team_id: int,
    request: Request,
    session: SessionDep,
    settings: SettingsDep,
    templates: TemplatesDep,
) -> Response:
    form = await request.form()
    params = _multi(form)
    whatif, _ = parse_whatif(params)
    values = {name: form_text(form, name) for name in QUICK_FIELDS}
    create_in, refused = parse_form(
        InitiativeCreate,
        _required(
            {
                "team_id": team_id,
                "period_id": whatif.period_id,
                "title": values["title"],
                "effort": typed_effort_fields(values["effort"]),
                "value": decimal_point(values["value"]),
            }
        ),
    )
    errors = _typed_errors(refused, _quick_field)
    if create_in is not None:
        try:
            record = initiative_store.create_initiative(session, initiative_in=create_in)
        except LoadlineError as exc:
            errors = {exc.field or "form": exc.message}
        else:
            notice = f"Added “{record.row.title}”."
            return _after_change(
                request,
                session,
                settings,
                templates,
                team_id=team_id,
                form=form,
                anchor="#quick-add",
                extra={"notice": notice, "focus": "quick-title"},
                done=f"added-{record.row.id}",
            )
    view = _view(request, session, settings, team_id, params)
    first = next((name for name in QUICK_FIELDS if name in errors), "title")
    return _render(
        request,
        templates,
        view,
        status_code=422,
        extra={"quick": {"form": values, "errors": errors}, "focus": f"quick-{first}"},
    )


# --- paste -------------------------------------------------------------------------------------


def _parse(session: SessionDep, team_id: int, view: PlanView, text: str) -> PasteResult:
    period_id = view.whatif.period_id
    # The team's own titles there: the plan's rows also show other teams' cross-team work,
    # whose titles this team may use.
    in_use = initiative_store.titles_in_use(session, team_id=team_id, period_id=period_id)
    return parse_paste(text, team_id=team_id, period_id=period_id, titles_in_use=in_use)


@router.post("/teams/{team_id}/plan/paste/preview")
async def paste_preview(
    team_id: int,
    request: Request,
    session: SessionDep,
    settings: SettingsDep,
    templates: TemplatesDep,
) -> Response:
    form = await request.form()
    text = form_text(form, "text", strip=False)
    view = _view(request, session, settings, team_id, _multi(form))
    try:
        result = _parse(session, team_id, view, text)
    except LoadlineError as exc:
        return _render(
            request,
            templates,
            view,
            status_code=422,
            extra={"paste_text": text, "paste_error": exc.message, "focus": "paste-text"},
        )
    status = 200 if result.ok else 422
    return _render(
        request,
        templates,
        view,
        status_code=status,
        extra={"paste": result, "paste_text": text, "focus": "paste-preview"},
    )


@router.post("/teams/{team_id}/plan/paste")
async def paste_commit(
    team_id: int,
    request: Request,
    session: SessionDep,
    settings: SettingsDep,
    templates: TemplatesDep,
) -> Response:
    form = await request.form()
    text = form_text(form, "text", strip=False)
    params = _multi(form)
    view = _view(request, session, settings, team_id, params)
    try:
        result = _parse(session, team_id, view, text)
        ids = commit_paste(session, result)
    except LoadlineError as exc:
        extra: dict[str, Any] = {"paste_text": text, "focus": "paste-preview"}
        try:
            extra["paste"] = _parse(session, team_id, view, text)
        except LoadlineError:
            extra["paste_error"] = exc.message
        view = _view(request, session, settings, team_id, params)
        return _render(request, templates, view, status_code=422, extra=extra)
    notice = f"Added {counted(len(ids), 'initiative')} from the pasted rows."
    return _after_change(
        request,
        session,
        settings,
        templates,
        team_id=team_id,
        form=form,
        extra={"notice": notice, "focus": "notice"},
        done=f"pasted-{len(ids)}",
    )


# --- undo --------------------------------------------------------------------------------------


def _entry_field(form: FormData, name: str) -> int | None:
    """An audit entry id the undo or redo form sent (the one it offered or confirmed)."""
    text = form_text(form, name)
    return int(text) if text.isdigit() else None


@router.post("/teams/{team_id}/plan/undo")
async def undo(
    team_id: int,
    request: Request,
    session: SessionDep,
    settings: SettingsDep,
    templates: TemplatesDep,
) -> Response:
    return await _undo_or_redo(request, session, settings, templates, team_id, undo_last_change)


@router.post("/teams/{team_id}/plan/redo")
async def redo(
    team_id: int,
    request: Request,
    session: SessionDep,
    settings: SettingsDep,
    templates: TemplatesDep,
) -> Response:
    return await _undo_or_redo(request, session, settings, templates, team_id, redo_last_undo)


async def _undo_or_redo(
    request: Request,
    session: SessionDep,
    settings: SettingsDep,
    templates: TemplatesDep,
    team_id: int,
    revert: Callable[..., UndoOutcome],
) -> Response:
    form = await request.form()
    try:
        # The page's period: undo reverts only what the page offered.
        whatif, _ = parse_whatif(_multi(form))
        outcome = revert(
            session,
            team_id=team_id,
            period_id=whatif.period_id,
            offered=_entry_field(form, "entry"),
            confirmed=_entry_field(form, "confirm"),
        )
    except LoadlineError as exc:
        view = _view(request, session, settings, team_id, _multi(form))
        status = 404 if isinstance(exc, NotFoundError) else exc.status_code
        return _render(
            request,
            templates,
            view,
            status_code=status,
            extra={"notice": exc.message, "focus": "notice"},
        )
    return _after_change(
        request,
        session,
        settings,
        templates,
        team_id=team_id,
        form=form,
        extra={"notice": outcome.summary, "focus": "notice"},
        done=f"{'redone' if revert is redo_last_undo else 'undone'}-{outcome.entry.id}",
    )
