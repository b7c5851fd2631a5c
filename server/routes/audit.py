"""The audit trail: who changed what and when, as a page and through the API."""

from __future__ import annotations

import datetime as dt
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any
from urllib.parse import urlencode

from fastapi import APIRouter, Query, Request
from fastapi.responses import Response
from pydantic import BaseModel

from server.deps import SessionDep, TemplatesDep
from server.planning import audit_view
from server.schemas import MAX_ID
from server.store import audit as audit_store
from server.store.teams import list_teams

router = APIRouter()


class AuditEntryPublic(BaseModel):
    id: int
    at: dt.datetime
    actor: str
    action: str
    entity: str
    entity_id: int | None
    team_id: int | None
    summary: str
    before: dict[str, Any] | None
    after: dict[str, Any] | None
    undone_at: dt.datetime | None


AUDIT_PAGING = (
    "Newest first. To page back, send the id of the last entry received as `before`: the "
    "answer holds the entries older than it, and entries added meanwhile never shift it. "
    "An answer shorter than `limit` is the oldest page."
)


@router.get(
    "/api/v1/audit",
    response_model=list[AuditEntryPublic],
    tags=["audit"],
    description=AUDIT_PAGING,
)
def audit_entries(
    session: SessionDep,
    entity: str | None = Query(None, max_length=40),
    entity_id: int | None = Query(None, ge=1, le=MAX_ID),
    team_id: int | None = Query(None, ge=1, le=MAX_ID),
    before: int | None = Query(
        None,
        ge=1,
        le=MAX_ID,
        description="Only entries older than this entry id (the last one received).",
    ),
    limit: int = Query(200, ge=1, le=1000),
) -> list[AuditEntryPublic]:
    """Initiative edits with old and new values, plan saves, publishes, revokes."""
    rows = audit_store.list_entries(
        session,
        entity=entity,
        entity_id=entity_id,
        team_id=team_id,
        before_id=before,
        limit=limit,
    )
    return [AuditEntryPublic.model_validate(row, from_attributes=True) for row in rows]


PAGE_SIZE = 100


@dataclass(frozen=True)
class _Asked:
    """The page's query, read by hand so a bad value gets a sentence beside its field."""

    team_id: int | None = None
    since: dt.date | None = None
    until: dt.date | None = None
    before: int | None = None
    after: int | None = None


def _whole(raw: str) -> int | None:
    text = raw.strip()
    if not (text.isascii() and text.isdigit()) or len(text) > 10:
        return None
    return int(text) if 1 <= int(text) <= MAX_ID else None


def _read_query(params: Mapping[str, str]) -> tuple[_Asked, dict[str, str]]:
    errors: dict[str, str] = {}
    team_raw = params.get("team_id", "").strip()
    team_id = _whole(team_raw) if team_raw else None
    if team_raw and team_id is None:
        errors["team_id"] = (
            f"“{team_raw[:40]}” is not a team's number. Choose a team from the list."
        )
    dates: dict[str, dt.date | None] = {}
    for name, label in (("from", "From"), ("to", "To")):
        raw = params.get(name, "").strip()
        dates[name] = None
        if raw:
            try:
                dates[name] = dt.date.fromisoformat(raw)
            except ValueError:
                errors[name] = f"{label}: enter a date such as 2026-12-02."
    since, until = dates["from"], dates["to"]
    if until == dt.date.max:  # the day after it cannot be written: no end at all
        until = None
    if since and until and since > until:
        errors["to"] = "To: the end date is before the start date."
    keys: dict[str, int | None] = {}
    for name in ("before", "after"):
        raw = params.get(name, "").strip()
        keys[name] = _whole(raw) if raw else None
        if raw and keys[name] is None:
            errors["page"] = (
                "This page address does not name a page of changes. "
                "Start again from the newest changes."
            )
    if keys["before"] is not None and keys["after"] is not None:
        errors["page"] = "A page of changes is either older or newer than another, not both."
    asked = _Asked(team_id, since, until, keys["before"], keys["after"])
    return asked, errors


def _when(day: dt.date) -> str:
    return f"{day.day} {day:%B %Y}"


def _link(asked: _Asked, **page: int) -> str:
    query: dict[str, str | int] = {}
    if asked.team_id is not None:
        query["team_id"] = asked.team_id
    if asked.since is not None:
        query["from"] = asked.since.isoformat()
    if asked.until is not None:
        query["to"] = asked.until.isoformat()
    query.update(page)
    return "/audit" + (f"?{urlencode(query)}" if query else "")


def _empty_words(asked: _Asked, team_words: str | None) -> str:
    whose = f" for {team_words}" if team_words else ""
    if asked.since and asked.until:
        return f"No changes{whose} from {_when(asked.since)} to {_when(asked.until)}."
    if asked.since:
        return f"No changes{whose} since {_when(asked.since)}."
    if asked.until:
        return f"No changes{whose} up to {_when(asked.until)}."
    if asked.before or asked.after:
        return f"No changes{whose} on this page. Start again from the newest changes."
    if team_words:
        return f"No changes recorded for {team_words}."
    return "No changes recorded yet."


@router.get("/audit", include_in_schema=False)
def audit_page(request: Request, session: SessionDep, templates: TemplatesDep) -> Response:
    """The Changes page: 100 entries a page, newest first, paged by entry id."""
    asked, errors = _read_query(request.query_params)
    teams = list_teams(session)
    team_names = {team.id or 0: team.name for team in teams}
    form = {name: request.query_params.get(name, "").strip() for name in ("team_id", "from", "to")}
    context: dict[str, Any] = {
        "teams": teams,
        "team_id": asked.team_id,
        "form": form,
        "errors": errors,
        "entries": [],
        "shown": "",
        "empty": "",
        "older_url": None,
        "newer_url": None,
        "newest_url": None,
    }
    if errors:
        context["newest_url"] = "/audit"
        return templates.TemplateResponse(request, "audit.html", context, status_code=422)
    wanted = audit_store.EntryFilter(
        team_id=asked.team_id,
        since=_day_start(asked.since),
        until=_day_start(asked.until + dt.timedelta(days=1)) if asked.until else None,
    )
    entries = audit_store.page_of_entries(
        session, wanted=wanted, before_id=asked.before, after_id=asked.after, limit=PAGE_SIZE
    )
    total = audit_store.count_entries(session, wanted=wanted)
    team_words = None
    if asked.team_id is not None:
        name = team_names.get(asked.team_id)
        team_words = (
            f"team “{name}”" if name is not None else f"a deleted team (id {asked.team_id})"
        )
        if name is None and total == 0:
            context["errors"] = {
                "team_id": f"There is no team with id {asked.team_id}. Choose a team from the list."
            }
            return templates.TemplateResponse(request, "audit.html", context, status_code=404)
    if entries:
        paged = asked.before is not None or asked.after is not None
        newer = (  # the first page holds the newest entries
            audit_store.count_entries(session, wanted=wanted, newer_than=entries[0].id or 0)
            if paged
            else 0
        )
        first, last = newer + 1, newer + len(entries)
        of = f" of {team_words}" if team_words else ""
        context["shown"] = (
            f"Changes{of} {first:,}–{last:,} of {total:,}, newest first"
            if len(entries) < total
            else (
                f"The only change{of}" if total == 1 else f"All {total:,} changes{of}, newest first"
            )
        )
        if newer:
            context["newer_url"] = _link(asked, after=entries[0].id or 0)
            context["newest_url"] = _link(asked)
        if last < total:
            context["older_url"] = _link(asked, before=entries[-1].id or 0)
    else:
        context["empty"] = _empty_words(asked, team_words)
        if asked.before or asked.after:
            context["newest_url"] = _link(asked)
    names = audit_view.names_for(session, entries, teams=team_names)
    context["entries"] = audit_view.entry_views(entries, names)
    context["team_words"] = team_words
    return templates.TemplateResponse(request, "audit.html", context)


def _day_start(day: dt.date | None) -> dt.datetime | None:
    return dt.datetime.combine(day, dt.time(), tzinfo=dt.UTC) if day else None
