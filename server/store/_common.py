"""Helpers shared by the persistence modules."""

from __future__ import annotations

import hashlib
import json
from collections.abc import Callable, Iterable, Mapping, Sequence
from typing import Any, TypeVar

from sqlalchemy.exc import IntegrityError
from sqlmodel import Session, SQLModel

from server.errors import ConflictError, NotFoundError, StaleVersionError
from server.selector.set_names import name_key

RowT = TypeVar("RowT", bound=SQLModel)

# What an edit is based on: one fingerprint (a form's `based_on`), a set of them (the
# entity tags of an If-Match header, any of which may match), or None (no condition).
BasedOn = str | frozenset[str] | None


def same_name(rows: Iterable[RowT], name: str, row_id: int | None) -> RowT | None:
    """The first of `rows` (with `name` and `id`) other than `row_id` whose name clashes."""
    wanted = name_key(name)
    for row in rows:
        if name_key(row.name) == wanted and row.id != row_id:  # type: ignore[attr-defined]
            return row
    return None


def and_list(parts: Sequence[str]) -> str:
    """'a', 'a and b', 'a, b and c': a list inside a sentence."""
    return parts[0] if len(parts) == 1 else f"{', '.join(parts[:-1])} and {parts[-1]}"


def first_named(names: Sequence[str], limit: int = 10) -> list[str]:
    """The first `limit` names, and the rest counted as "N more", for a refusal's list."""
    if len(names) <= limit:
        return list(names)
    return [*names[:limit], f"{len(names) - limit} more"]


def fingerprint(values: Mapping[str, Any]) -> str:
    """A short digest of the stored values a form was built from (sent back as `based_on`)."""
    canonical = json.dumps(values, sort_keys=True, default=str, separators=(",", ":"))
    return hashlib.sha256(canonical.encode()).hexdigest()[:16]


def refuse_if_changed(based_on: BasedOn, current: Mapping[str, Any], what: str, now: str) -> None:
    """Refuse an edit made on a form built from values someone has changed since.

    Rows without a version column (capacity settings, members, teams, days off, periods,
    scenarios) are guarded this way: the form carries the fingerprint of what it showed (the
    JSON API: the entity tags of If-Match), and a save on top of a newer change is refused
    instead of silently undoing it. None: the caller sent no fingerprint, so the last write
    wins as before. `now` says the stored values in words, so the person sees what the
    colleague changed before saving again; the error's `changed` is that sentence alone.
    """
    if based_on is None:
        return
    accepted = frozenset({based_on}) if isinstance(based_on, str) else based_on
    if fingerprint(current) not in accepted:
        changed = f"{what} changed while you were editing: now {now}."
        raise StaleVersionError(
            f"{changed} Your values were not saved; they are in the form again. Save again to "
            "apply them over that change.",
            current=dict(current),
            changed=changed,
        )


def get_or_404(session: Session, model: type[RowT], row_id: int | None, label: str) -> RowT:
    """Fetch a row by id or raise NotFoundError naming what was looked for."""
    row = session.get(model, row_id) if row_id is not None else None
    if row is None:
        raise NotFoundError(f"No {label} with id {row_id}.", field=f"{label.replace(' ', '_')}_id")
    return row


# Looks the rows a write refers to up again (raising NotFoundError for one that is gone).
Recheck = Callable[[Session], object] | None


def _refused(session: Session, message: str, field: str, recheck: Recheck) -> ConflictError:
    """The refusal of a write the database turned down; nothing of it is stored.

    A row it refers to may have been deleted by another writer since the write looked it up
    (a foreign key, not a clash): `recheck` then raises the NotFoundError the same request
    gets once the deletion is done, rather than a clash message that is not true.
    """
    session.rollback()
    if recheck is not None:
        recheck(session)
    return ConflictError(message, field=field)


def commit_or_conflict(session: Session, message: str, field: str, recheck: Recheck = None) -> None:
    """Commit; a unique-constraint clash becomes a ConflictError and nothing is stored."""
    try:
        session.commit()
    except IntegrityError as exc:
        raise _refused(session, message, field, recheck) from exc


def flush_or_conflict(session: Session, message: str, field: str, recheck: Recheck = None) -> None:
    """Flush (to learn a new row's id before its audit entry); a clash becomes a ConflictError."""
    try:
        session.flush()
    except IntegrityError as exc:
        raise _refused(session, message, field, recheck) from exc
