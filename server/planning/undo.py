"""Undo and redo of a team's changes to its initiatives in a period, from the audit trail.

Undo covers initiatives only (created, changed, deleted, moved, pasted); capacity settings,
members and days off are not undone, and the plan page says so beside the button.

The plan page of a period offers the team's last change that touched that period (an
initiative created, changed or deleted there, or moved in or out of it), made by a person:
changes of the demo loader and other system actors, and changes with no actor (command line),
are never offered, so undo cannot take the demo workspace apart. Each press reverts the
newest such change that has not been undone yet, so pressing it again steps further back:
- an update is reverted to its `before` values, as a new version (so open forms see it);
- a creation is reverted by deleting the initiative;
- a deletion is reverted by storing the initiative again under its own id, with every team's
  effort line and its needs (`store.initiatives.restore_initiatives`), so scenarios, saved
  plans and other initiatives that name it by id find it again. Only where SQLite has handed
  that id to a newer initiative does it come back under a new one (later undos follow it);
- a paste is reverted as a whole (all its rows are deleted).

An initiative that another one needs by now is not deleted: the undo is refused with the
dependants named (the store's rule for every deletion).

Another person's change is reverted only when the request confirms that change by its entry
id (the page's tick box naming whose change it is); one's own change takes one press. The
form also names the entry it offered, so a change made meanwhile is not reverted unseen.

Redo: the newest undo of the team can itself be reverted, from the page of the period it was
pressed on, as long as nothing else changed the team's initiatives since (a newer change is
never overwritten by a redo). A redo reverts the undo's own changes (deleted rows come back
under their ids), clears the `undone_at` of the change the undo reverted, so the next undo
offers it again, and sets the undo's own `undone_at`. Redoing another person's undo asks for
the same confirmation. Undo and redo entries (`initiative.undo`, `initiative.redo`) name the
entry they revert and the entries their own changes wrote; those changes are never offered
for undoing themselves. The marks and the entry are committed in the same transaction as the
last change an undo or redo makes.
"""

from __future__ import annotations

import datetime as dt
import re
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

from sqlmodel import Session, col, select

from server.actor import SYSTEM_ACTORS, current_actor
from server.errors import ConflictError, InputError, NotFoundError
from server.models import AuditEntry, Initiative, Period, Team, utcnow
from server.schemas import InitiativeCreate, InitiativeUpdate
from server.store import audit
from server.store._common import and_list
from server.store.initiatives import (
    Restoring,
    delete_initiative,
    delete_initiatives,
    existing_initiative_ids,
    field_in_words,
    get_initiative,
    restore_initiatives,
    update_initiative,
)
from server.validation import parse_form
from server.wording import counted, possessive

UNDOABLE = ("initiative.create", "initiative.update", "initiative.delete", "initiative.paste")
UNDO_ACTION = "initiative.undo"
REDO_ACTION = "initiative.redo"
RESTORE_ACTION = "initiative.restore"
COVERS = "Undo covers this plan's initiative changes, not capacity, focus factor or days off."
HISTORY_DEPTH = 300  # entries read: undo steps back through recent changes, not all time
_UPDATABLE = (
    "period_id",
    "title",
    "notes",
    "effort",
    "other_efforts",
    "value",
    "confidence",
    "state",
    "either_or",
    "needs",
)


@dataclass(frozen=True)
class UndoOutcome:
    entry: AuditEntry  # the change (or, for a redo, the undo) that was reverted
    summary: str  # what the undo did, in plain words


@dataclass(frozen=True)
class Offer:
    """What the undo or redo button of a plan page would revert."""

    entry_id: int  # the audit entry it reverts; the form sends it back
    text: str  # the change in plain words, and whose it is
    actor: str  # who made it
    others: bool  # another person's: reverting it needs a confirmation


@dataclass(frozen=True)
class _History:
    produced: set[int]  # ids of entries written by undos and redos
    renamed: dict[int, int]  # initiative id -> id it was re-created as
    pasted: set[int]  # initiatives created by a paste (undone with the paste, not alone)


def _history(session: Session, team_id: int) -> _History:
    """What earlier undos, redos and pastes said; read from their (few) entries only."""
    query = (
        select(AuditEntry)
        .where(
            AuditEntry.team_id == team_id,
            AuditEntry.entity == "initiative",
            col(AuditEntry.action).in_((UNDO_ACTION, REDO_ACTION, "initiative.paste")),
        )
        .order_by(col(AuditEntry.id).desc())
        .limit(HISTORY_DEPTH)
    )
    produced: set[int] = set()
    renamed: dict[int, int] = {}
    pasted: set[int] = set()
    for entry in session.exec(query):
        after = entry.after or {}
        if entry.action in (UNDO_ACTION, REDO_ACTION):
            produced.update(int(i) for i in after.get("produced", []))
            renamed.update({int(k): int(v) for k, v in after.get("recreated", {}).items()})
        elif entry.undone_at is None:
            pasted.update(int(i) for i in after.get("initiative_ids", []))
    return _History(produced, renamed, pasted)


def _current_id(history: _History, initiative_id: int) -> int:
    seen = set()
    while initiative_id in history.renamed and initiative_id not in seen:
        seen.add(initiative_id)
        initiative_id = history.renamed[initiative_id]
    return initiative_id


def _exists(session: Session, initiative_id: int) -> bool:
    return bool(existing_initiative_ids(session, [initiative_id]))


def _still_undoable(session: Session, history: _History, entry: AuditEntry) -> bool:
    if entry.action == "initiative.delete":
        return True
    if entry.action == "initiative.paste":
        ids = (entry.after or {}).get("initiative_ids", [])
        return any(_exists(session, _current_id(history, int(i))) for i in ids)
    # An update or creation of an initiative that is gone has nothing left to revert.
    return entry.entity_id is not None and _exists(session, _current_id(history, entry.entity_id))


def _by_a_person(actor: str) -> bool:
    return bool(actor) and actor not in SYSTEM_ACTORS


class _Periods:
    """Where each initiative was at the point an entry was written, walking back in time.

    An update entry names the period only when it moved the initiative, so the walk starts
    from where the initiatives are now and steps each move (and deletion) back as it passes.
    """

    def __init__(self, session: Session, history: _History, team_id: int) -> None:
        self.history = history
        query = select(Initiative.id, Initiative.period_id).where(Initiative.team_id == team_id)
        self.now: dict[int, int | None] = {int(i): p for i, p in session.exec(query)}

    def touched(
        self,
        session: Session,
        entry_id: int,
        action: str,
        entity_id: int | None,
        before_period: int | None,
        after_period: int | None,
    ) -> set[int | None]:
        """The periods the entry changed; moves the walk to just before it."""
        if action == "initiative.paste":
            pasted = session.get(AuditEntry, entry_id)
            ids = (pasted.after or {}).get("initiative_ids", []) if pasted is not None else []
            return {self.now.get(_current_id(self.history, int(i))) for i in ids}
        current = _current_id(self.history, entity_id or 0)
        if action == "initiative.create":
            return {after_period}
        if action == "initiative.delete":
            self.now[current] = before_period
            return {before_period}
        if before_period is not None or after_period is not None:  # a move
            self.now[current] = before_period
            return {before_period, after_period}
        return {self.now.get(current)}


def last_change(session: Session, *, team_id: int, period_id: int | None) -> AuditEntry | None:
    """The change the next undo on the team's plan for `period_id` would revert, or None."""
    if period_id is None:
        return None
    history = _history(session, team_id)
    query = (
        select(
            AuditEntry.id,
            AuditEntry.action,
            AuditEntry.entity_id,
            AuditEntry.actor,
            AuditEntry.undone_at,
            col(AuditEntry.before)["period_id"].as_integer(),
            col(AuditEntry.after)["period_id"].as_integer(),
        )
        .where(
            AuditEntry.team_id == team_id,
            AuditEntry.entity == "initiative",
            col(AuditEntry.action).in_(UNDOABLE),
        )
        .order_by(col(AuditEntry.id).desc())
        .limit(HISTORY_DEPTH)
    )
    periods = _Periods(session, history, team_id)
    # Undone and system entries are walked too: their moves say where initiatives were.
    for entry_id, action, entity_id, actor, undone_at, before_p, after_p in session.exec(query):
        touched = periods.touched(session, entry_id, action, entity_id, before_p, after_p)
        if undone_at is not None or entry_id in history.produced or not _by_a_person(actor):
            continue
        if action == "initiative.create" and entity_id in history.pasted:
            continue
        if period_id not in touched:
            continue
        entry = session.get(AuditEntry, entry_id)
        if entry is not None and _still_undoable(session, history, entry):
            return entry
    return None


def last_undo(session: Session, *, team_id: int, period_id: int | None) -> AuditEntry | None:
    """The undo the next redo on the team's plan for `period_id` would revert, or None.

    That is the team's newest undo not redone yet, when it was pressed on this period's page
    and no other change to the team's initiatives has been made since.
    """
    if period_id is None:
        return None
    history = _history(session, team_id)
    query = (
        select(
            AuditEntry.id,
            AuditEntry.action,
            AuditEntry.undone_at,
            col(AuditEntry.after)["period_id"].as_integer(),
        )
        .where(AuditEntry.team_id == team_id, AuditEntry.entity == "initiative")
        .order_by(col(AuditEntry.id).desc())
        .limit(HISTORY_DEPTH)
    )
    for entry_id, action, undone_at, pressed_on in session.exec(query):
        if entry_id in history.produced or action == REDO_ACTION:
            continue  # an undo's or redo's own changes, or a redo: keep looking back
        if action == UNDO_ACTION:
            if undone_at is not None:
                continue  # redone already
            return session.get(AuditEntry, entry_id) if pressed_on == period_id else None
        if action in UNDOABLE and undone_at is not None:
            continue
        return None  # a change made after the last undo: a redo would overwrite it
    return None


def offer_text(entry: AuditEntry, viewer: str) -> str:
    """What the undo button would revert, and whose change it is: the plan is the team's, so
    the last change may be a colleague's, and the person pressing undo should know."""
    whose = "your change" if entry.actor == viewer else f"by {entry.actor}"
    return f"{entry.summary} ({whose})"


def undo_offer(session: Session, *, team_id: int, period_id: int | None) -> Offer | None:
    """The plan page's undo button, for the person asking, or None."""
    entry = last_change(session, team_id=team_id, period_id=period_id)
    if entry is None:
        return None
    viewer = current_actor.get()
    return Offer(entry.id or 0, offer_text(entry, viewer), entry.actor, entry.actor != viewer)


def redo_offer(session: Session, *, team_id: int, period_id: int | None) -> Offer | None:
    """The plan page's redo button, for the person asking, or None."""
    entry = last_undo(session, team_id=team_id, period_id=period_id)
    if entry is None:
        return None
    viewer = current_actor.get()
    whose = "your undo" if entry.actor == viewer else f"undone by {entry.actor}"
    text = f"{entry.summary.removeprefix('Undid: ')} ({whose})"
    return Offer(entry.id or 0, text, entry.actor, entry.actor != viewer)


def _refuse_unconfirmed(
    entry: AuditEntry, *, offered: int | None, confirmed: int | None, what: str, button: str
) -> None:
    """Refuse to revert a change the page did not offer, or another person's unconfirmed."""
    viewer = current_actor.get()
    if offered is not None and offered != entry.id:
        raise ConflictError(
            f"The last {what} is now another one: {offer_text(entry, viewer)}. Nothing was "
            f"reverted; look at it and press {button} again.",
            field=what,
        )
    if entry.actor != viewer and confirmed != entry.id:
        raise ConflictError(
            f"“{entry.summary}” is {possessive(entry.actor)} {what}, not yours: tick “Revert "
            f"{possessive(entry.actor)} {what}” and press {button} to revert it. Nothing was "
            "reverted.",
            field=what,
        )


def undo_last_change(
    session: Session,
    *,
    team_id: int,
    period_id: int | None,
    actor: str = "",
    offered: int | None = None,
    confirmed: int | None = None,
) -> UndoOutcome:
    """Revert the team's last change in the period; NotFoundError when there is none.

    offered: the entry the page showed, refused when the last change is another one by now.
    confirmed: the entry the person confirmed reverting; needed for another person's change.
    """
    # Deletes cascade in the database, so rows loaded earlier in this session may be gone;
    # SQLite can hand their ids to the rows an undo creates. Start from an empty identity map.
    session.expunge_all()
    entry = last_change(session, team_id=team_id, period_id=period_id)
    if entry is None:
        raise NotFoundError(
            "There is no change of this team in this period left to undo.", field="undo"
        )
    _refuse_unconfirmed(entry, offered=offered, confirmed=confirmed, what="change", button="Undo")
    history = _history(session, team_id)
    before_id = _max_entry_id(session)
    try:
        marker, done = _revert(session, history, entry, team_id, actor)
    except Exception:  # nothing of a failed undo stays half-done in the session
        session.rollback()
        raise
    marker.after = (marker.after or {}) | {
        "period_id": period_id,
        "produced": _produced_since(session, before_id, team_id),
    }
    session.add(marker)
    session.commit()
    return UndoOutcome(entry=entry, summary=done)


def redo_last_undo(
    session: Session,
    *,
    team_id: int,
    period_id: int | None,
    actor: str = "",
    offered: int | None = None,
    confirmed: int | None = None,
) -> UndoOutcome:
    """Revert the team's last undo in the period (see the module); NotFoundError if none."""
    session.expunge_all()
    undo = last_undo(session, team_id=team_id, period_id=period_id)
    if undo is None:
        raise NotFoundError(
            "There is no undo of this team in this period left to redo.", field="redo"
        )
    _refuse_unconfirmed(undo, offered=offered, confirmed=confirmed, what="undo", button="Redo")
    history = _history(session, team_id)
    after = undo.after or {}
    ids = [int(i) for i in after.get("produced", [])]
    produced = [e for e in (session.get(AuditEntry, i) for i in ids) if e is not None]
    before_id = _max_entry_id(session)
    try:
        reverted = session.get(AuditEntry, int(after.get("undid", 0)))
        if reverted is not None:
            reverted.undone_at = None
            session.add(reverted)
        undo.undone_at = utcnow()
        session.add(undo)
        marker = audit.record(
            session,
            actor=actor,
            action=REDO_ACTION,
            entity="initiative",
            entity_id=undo.entity_id,
            team_id=team_id,
            summary=f"Redid: {reverted.summary if reverted is not None else undo.summary}",
            after={"redid": undo.id, "period_id": period_id},
        )
        recreated = _reapply(session, history, produced, actor)
    except Exception:
        session.rollback()
        raise
    marker.after = (marker.after or {}) | {
        "produced": _produced_since(session, before_id, team_id),
        "recreated": recreated,
    }
    session.add(marker)
    session.commit()
    again = reverted.summary if reverted is not None else undo.summary.removeprefix("Undid: ")
    return UndoOutcome(entry=undo, summary=f"Redid: {again}.")


def _produced_since(session: Session, before_id: int, team_id: int) -> list[int]:
    query = select(AuditEntry.id).where(
        col(AuditEntry.id) > before_id,
        col(AuditEntry.action).not_in((UNDO_ACTION, REDO_ACTION)),
        AuditEntry.team_id == team_id,
    )
    return [int(i or 0) for i in session.exec(query)]


def _reapply(
    session: Session, history: _History, produced: Sequence[AuditEntry], actor: str
) -> dict[str, int]:
    """Revert an undo's own changes (newest first); the new ids of rows that got one."""
    produced = sorted(produced, key=lambda e: e.id or 0, reverse=True)
    created = [e for e in produced if e.action in (RESTORE_ACTION, "initiative.create")]
    if created:  # the undo brought rows back: delete them again
        ids = [_current_id(history, e.entity_id or 0) for e in created]
        delete_initiatives(session, initiative_ids=ids, actor=actor)
    deleted = [e for e in produced if e.action == "initiative.delete"]
    recreated: dict[str, int] = {}
    if deleted:  # the undo deleted rows (a creation or a paste undone): bring them back
        recreated = _restore(session, [e.before or {} for e in reversed(deleted)], actor)
    for e in produced:
        if e.action == "initiative.update":
            _revert_update(session, _current_id(history, e.entity_id or 0), e.before or {}, actor)
    return recreated


def _revert(
    session: Session, history: _History, entry: AuditEntry, team_id: int, actor: str
) -> tuple[AuditEntry, str]:
    """Make the reverting change; the undo's marks are committed with its last write."""
    if entry.action == "initiative.paste":
        ids = [_current_id(history, int(i)) for i in (entry.after or {}).get("initiative_ids", [])]
        present = sorted(existing_initiative_ids(session, ids), key=ids.index)
        # One commit for all the rows and the marks: needs between pasted rows go with them,
        # and a row another initiative needs by now refuses the whole undo.
        marker = _mark(session, entry, team_id, actor, None)
        delete_initiatives(session, initiative_ids=present, actor=actor)
        return marker, f"Removed the {counted(len(present), 'pasted initiative')} again."
    if entry.action == "initiative.update":
        initiative_id = _current_id(history, entry.entity_id or 0)
        marker = _mark(session, entry, team_id, actor, initiative_id)
        _revert_update(session, initiative_id, entry.before or {}, actor)
        return marker, f"Put back the earlier {_changed_fields(entry)} of {_quoted_title(entry)}."
    if entry.action == "initiative.create":
        initiative_id = _current_id(history, entry.entity_id or 0)
        marker = _mark(session, entry, team_id, actor, initiative_id)
        delete_initiative(session, initiative_id=initiative_id, actor=actor)
        return marker, f"Removed {_quoted_title(entry)} again."
    old_id = _current_id(history, entry.entity_id or 0)
    marker = _mark(session, entry, team_id, actor, old_id)
    recreated = _restore(session, [(entry.before or {}) | {"id": old_id}], actor)
    marker.after = (marker.after or {}) | {"recreated": recreated}
    if recreated:
        marker.entity_id = recreated[str(old_id)]
    session.add(marker)
    session.commit()
    return marker, f"Brought back {_quoted_title(entry)}."


def _mark(
    session: Session, entry: AuditEntry, team_id: int, actor: str, entity_id: int | None
) -> AuditEntry:
    """Add the undo's own entry and mark the reverted one; the next commit stores both."""
    entry.undone_at = utcnow()
    session.add(entry)
    return audit.record(
        session,
        actor=actor,
        action=UNDO_ACTION,
        entity="initiative",
        entity_id=entity_id,
        team_id=team_id,
        summary=f"Undid: {entry.summary}",
        after={"undid": entry.id},
    )


def _changed_fields(entry: AuditEntry) -> str:
    names = sorted(field_in_words(name) for name in (entry.before or {}))
    return and_list(names) if names else "values"


def _max_entry_id(session: Session) -> int:
    last = session.exec(select(AuditEntry).order_by(col(AuditEntry.id).desc()).limit(1)).first()
    return last.id or 0 if last is not None else 0


def _quoted_title(entry: AuditEntry) -> str:
    # Summaries written by the store end with the title in curly quotes.
    match = re.search(r"“(.+)”", entry.summary)
    return f"“{match[1]}”" if match else "the initiative"


def _effort_in(effort: dict[str, Any]) -> dict[str, Any]:
    return {k: effort.get(k) for k in ("likely", "low", "high")}


def _revert_update(
    session: Session, initiative_id: int, before: dict[str, Any], actor: str
) -> None:
    record = get_initiative(session, initiative_id=initiative_id)
    values: dict[str, Any] = {"version": record.row.version}
    for name in _UPDATABLE:
        if name not in before:
            continue
        value = before[name]
        if name == "effort" and isinstance(value, dict):
            value = _effort_in(value)
        elif name == "other_efforts" and isinstance(value, list):
            value = [_effort_in(line) | {"team_id": line.get("team_id")} for line in value]
        elif name == "period_id" and value is not None and session.get(Period, value) is None:
            value = None  # the period was deleted since; the initiative goes to the backlog
        values[name] = value
    update_in, errors = parse_form(InitiativeUpdate, values)
    if update_in is None:
        field, message = next(iter(errors.items()))
        raise InputError(f"{field}: the earlier value cannot be restored ({message}).", field=field)
    update_initiative(session, initiative_id=initiative_id, initiative_in=update_in, actor=actor)


def _restore(session: Session, snapshots: Sequence[dict[str, Any]], actor: str) -> dict[str, int]:
    """Store deleted initiatives again from their delete entries' `before`, under their ids.

    Needs on initiatives deleted since, effort lines of teams deleted since and a deleted
    period are left out (the initiative goes to the backlog). Not committed. Returns the new
    ids of those whose old id was taken (SQLite only), as {old id: new id}.
    """
    wanted = {int(s.get("id") or 0) for s in snapshots}
    needed = {int(n) for s in snapshots for n in s.get("needs", [])}
    present = existing_initiative_ids(session, needed) | wanted
    restoring: list[Restoring] = []
    for before in snapshots:
        period_id = before.get("period_id")
        if period_id is not None and session.get(Period, period_id) is None:
            period_id = None
        values = {
            "team_id": before.get("team_id"),
            "period_id": period_id,
            "title": before.get("title"),
            "notes": before.get("notes", ""),
            "effort": _effort_in(before.get("effort") or {}),
            "other_efforts": [
                _effort_in(line) | {"team_id": line.get("team_id")}
                for line in before.get("other_efforts", [])
                if _team_exists(session, line.get("team_id"))
            ],
            "value": before.get("value"),
            "confidence": before.get("confidence"),
            "state": before.get("state", "candidate"),
            "either_or": before.get("either_or"),
            "needs": [int(n) for n in before.get("needs", []) if int(n) in present],
        }
        create_in, errors = parse_form(InitiativeCreate, values)
        if create_in is None:
            field, message = next(iter(errors.items()))
            raise InputError(f"{field}: the deleted initiative cannot be restored ({message}).")
        restoring.append(
            Restoring(
                initiative_id=int(before.get("id") or 0),
                initiative_in=create_in,
                position=before.get("position"),
                created_at=_timestamp(before.get("created_at")),
                version=int(before.get("version") or 1),
            )
        )
    records = restore_initiatives(session, restoring=restoring, actor=actor)
    return {
        str(r.initiative_id): record.row.id or 0
        for r, record in zip(restoring, records, strict=True)
        if record.row.id != r.initiative_id
    }


def _team_exists(session: Session, team_id: Any) -> bool:
    return isinstance(team_id, int) and session.get(Team, team_id) is not None


def _timestamp(value: Any) -> dt.datetime | None:
    if not isinstance(value, str):
        return None
    try:
        return dt.datetime.fromisoformat(value)
    except ValueError:
        return None
