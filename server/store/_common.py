"""Helpers shared by the persistence modules."""

from __future__ import annotations

from typing import TypeVar

from sqlalchemy.exc import IntegrityError
from sqlmodel import Session, SQLModel

from server.errors import ConflictError, NotFoundError

RowT = TypeVar("RowT", bound=SQLModel)


def get_or_404(session: Session, model: type[RowT], row_id: int | None, label: str) -> RowT:
    """Fetch a row by id or raise NotFoundError naming what was looked for."""
    row = session.get(model, row_id) if row_id is not None else None
    if row is None:
        raise NotFoundError(f"No {label} with id {row_id}.", field=f"{label.replace(' ', '_')}_id")
    return row


def commit_or_conflict(session: Session, message: str, field: str) -> None:
    """Commit; a unique-constraint clash becomes a ConflictError and nothing is stored."""
    try:
        session.commit()
    except IntegrityError as exc:
        session.rollback()
        raise ConflictError(message, field=field) from exc


def flush_or_conflict(session: Session, message: str, field: str) -> None:
    """Flush (to learn a new row's id before its audit entry); a clash becomes a ConflictError."""
    try:
        session.flush()
    except IntegrityError as exc:
        session.rollback()
        raise ConflictError(message, field=field) from exc
