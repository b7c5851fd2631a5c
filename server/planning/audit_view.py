"""What the Changes page shows of an entry: its values in the pages' words, with names.

Entries keep ids (of members, initiatives, teams, periods) and stored numbers (shares,
reserve percentages, efforts as records). They are put in words when shown, so old entries
read as well as new ones; the names of one page are read in one query per kind of row.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

from pydantic import ValidationError
from sqlmodel import Session, col, select

from server.models import AuditEntry, Initiative, Member, Period
from server.planning.scenarios import changes_from_json, changes_in_words
from server.wording import STATE_LABELS, audit_value, field_label, in_days, quoted

# Keys kept for undo or for the record that the page does not list on their own.
_NOT_LISTED = {
    "in_words",
    "position",
    "id",
    "version",
    "created_at",
    "updated_at",
    "inputs_digest",
}

# Old summaries named fields by their stored names; new ones use the labels.
_SUMMARY_WORDS = {
    "period.update": (("non working dates", "non-working dates"), ("weekmask", "working weekdays")),
}


def values_shown(entry: AuditEntry) -> bool:
    """Edits, availability, removed members, deleted initiatives, scenarios and saved plans
    list their values (a deleted initiative's are all that is left to make it again by hand);
    the values of other entries are whole records, which the summary already names."""
    return entry.action.endswith((".update", ".set")) or entry.action in (
        "initiative.delete",
        "member.delete",
        "availability.delete",
        "scenario.delete",
        "plan.delete",
    )


@dataclass(frozen=True)
class Names:
    """Names of the rows a page of entries refers to; a missing one is named by its id."""

    members: Mapping[int, str]
    initiatives: Mapping[int, str]
    teams: Mapping[int, str]
    periods: Mapping[int, str]

    def initiative(self, initiative_id: int) -> str:
        title = self.initiatives.get(initiative_id)
        return quoted(title) if title is not None else f"a deleted initiative (id {initiative_id})"

    def team(self, team_id: int) -> str:
        name = self.teams.get(team_id)
        return name if name is not None else f"a deleted team (id {team_id})"

    def period(self, period_id: int) -> str:
        name = self.periods.get(period_id)
        return quoted(name) if name is not None else f"a deleted period (id {period_id})"


@dataclass(frozen=True)
class EntryView:
    entry: AuditEntry
    summary: str
    before: list[tuple[str, str]]
    after: list[tuple[str, str]]
    made_by: str | None = None  # "undo" / "redo": the change an undo or a redo made itself


# An undo or redo records its own entry, then the changes it makes (listed in its "produced").
_REVERTING = {"initiative.undo": "undo", "initiative.redo": "redo"}


@dataclass
class _Wanted:
    members: set[int]
    initiatives: set[int]
    teams: set[int]
    periods: set[int]


def _ids(value: Any) -> list[int]:
    items = value if isinstance(value, list) else [value]
    return [item for item in items if isinstance(item, int) and not isinstance(item, bool)]


def _note_ids(key: str, value: Any, wanted: _Wanted) -> None:
    if key == "needs":
        wanted.initiatives.update(_ids(value))
    elif key == "period_id":
        wanted.periods.update(_ids(value))
    elif key == "team_id":
        wanted.teams.update(_ids(value))
    elif key == "other_efforts" and isinstance(value, list):
        wanted.teams.update(_ids([line.get("team_id") for line in value if isinstance(line, dict)]))
    elif key == "availability" and isinstance(value, list):
        periods = [row.get("period_id") for row in value if isinstance(row, dict)]
        wanted.periods.update(_ids(periods))
    elif key == "changes" and isinstance(value, dict):
        days_off = value.get("days_off")
        if isinstance(days_off, dict):
            wanted.members.update(int(k) for k in days_off if str(k).isdigit())
        for name in ("forced_in", "forced_out"):
            wanted.initiatives.update(_ids(value.get(name) or []))


def _names_of(session: Session, model: Any, column: Any, ids: set[int]) -> dict[int, str]:
    if not ids:
        return {}
    rows = session.exec(select(model.id, column).where(col(model.id).in_(sorted(ids))))
    return {int(row_id): str(name) for row_id, name in rows}


def names_for(
    session: Session, entries: Iterable[AuditEntry], *, teams: Mapping[int, str]
) -> Names:
    """The names a page of entries needs: one query each for members, initiatives and periods
    (none when no entry names one); `teams` are the team names the page has read already."""
    wanted = _Wanted(set(), set(), set(), set())
    for entry in entries:
        if not values_shown(entry):
            continue
        for values in (entry.before, entry.after):
            for key, value in (values or {}).items():
                _note_ids(key, value, wanted)
    return Names(
        members=_names_of(session, Member, Member.name, wanted.members),
        initiatives=_names_of(session, Initiative, Initiative.title, wanted.initiatives),
        teams=dict(teams),
        periods=_names_of(session, Period, Period.name, wanted.periods),
    )


def _number(value: float) -> str:
    return f"{round(float(value), 2):g}"


def _percent_of_share(value: float) -> str:
    return f"{_number(float(value) * 100)} %"


def effort_words(effort: Mapping[str, Any]) -> str:
    """An effort record as the pages write it: "16 / 24 / 40 days", or "24 days"."""
    likely, low, high = effort.get("likely"), effort.get("low"), effort.get("high")
    if not isinstance(likely, int | float):
        return "–"
    if isinstance(low, int | float) and isinstance(high, int | float):
        return f"{_number(low)} / {_number(likely)} / {_number(high)} days"
    return in_days(float(likely))


def _listed(words: Sequence[str]) -> str:
    return "; ".join(words) if words else "none"


def _scenario_changes(value: Any, names: Names, entry: AuditEntry) -> str:
    kept = (entry.before or {}).get("in_words") if entry.action == "scenario.delete" else None
    if isinstance(kept, list) and all(isinstance(item, str) for item in kept):
        return _listed(kept) if kept else "none (the live plan)"
    try:
        changes = changes_from_json(value)
    except (ValidationError, TypeError, ValueError):
        return audit_value(value)
    # Members unquoted, as the words kept by a scenario's deletion name them.
    members = {
        member_id: names.members.get(member_id, f"a removed member (id {member_id})")
        for member_id in changes.days_off
    }
    unforced = changes.model_copy(update={"forced_in": [], "forced_out": []})
    words = changes_in_words(unforced, members=members, titles={})
    for ids, label in ((changes.forced_in, "forced in"), (changes.forced_out, "forced out")):
        words.extend(f"{names.initiative(initiative_id)} {label}" for initiative_id in ids)
    return _listed(words) if words else "none (the live plan)"


def _availability_kept(value: Any, names: Names) -> str:
    if not isinstance(value, list):
        return audit_value(value)
    rows = []
    for row in value:
        if not isinstance(row, dict):
            continue
        period = row.get("period_id")
        where = names.period(period) if isinstance(period, int) else "a period"
        rows.append(f"{where}: {_days_off(row.get('days_off'))}, {_share(row.get('allocation'))}")
    return _listed(rows)


def _days_off(value: Any) -> str:
    return f"{in_days(float(value))} off" if isinstance(value, int | float) else "–"


def _share(value: Any) -> str:
    if value is None:
        return "the member's usual share"
    return f"share {_percent_of_share(value)}" if isinstance(value, int | float) else "–"


def _dates(value: list[Any]) -> str:
    return ", ".join(str(item) for item in value) or "none"


def _numeric(show: Callable[[float], str]) -> Callable[[Any], str]:
    return lambda value: show(value) if isinstance(value, int | float) else audit_value(value)


_PLAIN: dict[str, Callable[[Any], str]] = {
    "allocation": lambda v: (
        "the member's usual share" if v is None else _numeric(_percent_of_share)(v)
    ),
    "default_spread": _numeric(_percent_of_share),
    "confidence": lambda v: "likely estimate" if v is None else _numeric(_percent_of_share)(v),
    "days_off": _numeric(lambda v: in_days(float(v))),
    "reserve_pct": _numeric(lambda v: f"{_number(v)} %"),
    "focus_factor": _numeric(_number),
    "value": _numeric(_number),
    "state": lambda v: (
        STATE_LABELS.get(v, audit_value(v)) if isinstance(v, str) else audit_value(v)
    ),
    "either_or": lambda v: "none" if v in (None, "") else audit_value(v),
    "notes": lambda v: "none" if v in (None, "") else audit_value(v),
    "effort": lambda v: effort_words(v) if isinstance(v, dict) else audit_value(v),
    "non_working_dates": lambda v: _dates(v) if isinstance(v, list) else audit_value(v),
}


def value_words(key: str, value: Any, names: Names, entry: AuditEntry) -> str:
    """One stored value in the pages' words."""
    if key in _PLAIN:
        return _PLAIN[key](value)
    if key == "needs" and isinstance(value, list):
        return _listed([names.initiative(i) for i in _ids(value)])
    if key == "period_id":
        return "the backlog" if value is None else names.period(value)
    if key == "team_id" and isinstance(value, int):
        return names.team(value)
    if key == "other_efforts" and isinstance(value, list):
        lines = [
            f"{names.team(line['team_id'])}: {effort_words(line)}"
            for line in value
            if isinstance(line, dict) and isinstance(line.get("team_id"), int)
        ]
        return _listed(lines)
    if key == "changes":
        return _scenario_changes(value, names, entry)
    if key == "availability":
        return _availability_kept(value, names)
    return audit_value(value)


def _pairs(
    values: Mapping[str, Any] | None,
    other: Mapping[str, Any] | None,
    names: Names,
    entry: AuditEntry,
) -> list[tuple[str, str]]:
    """The listed values; a field equal on both sides (a scenario's name kept) is left out."""
    return [
        (field_label(key), value_words(key, value, names, entry))
        for key, value in (values or {}).items()
        if key not in _NOT_LISTED and not (other and key in other and other[key] == value)
    ]


def summary_words(entry: AuditEntry) -> str:
    """The summary; old period summaries named fields by their stored names (only the part
    before the period's name is reworded)."""
    head, mark, rest = entry.summary.partition(" of period “")
    for old, new in _SUMMARY_WORDS.get(entry.action, ()):
        head = head.replace(old, new)
    return head + mark + rest


def entry_views(entries: Sequence[AuditEntry], names: Names) -> list[EntryView]:
    made_by = {
        int(produced): _REVERTING[entry.action]
        for entry in entries
        if entry.action in _REVERTING
        for produced in (entry.after or {}).get("produced", [])
    }
    views = []
    for entry in entries:
        shown = values_shown(entry)
        views.append(
            EntryView(
                entry=entry,
                summary=summary_words(entry),
                before=_pairs(entry.before, entry.after, names, entry) if shown else [],
                after=_pairs(entry.after, entry.before, names, entry) if shown else [],
                made_by=made_by.get(entry.id or 0),
            )
        )
    return views
