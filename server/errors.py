"""Errors the persistence and planning layers raise; the web layer maps them to statuses."""

from __future__ import annotations

from typing import Any


class LoadlineError(Exception):
    """Base of errors that carry a message fit to show a person."""

    status_code = 400

    def __init__(self, message: str, *, field: str | None = None) -> None:
        super().__init__(message)
        self.message = message
        self.field = field

    def detail(self) -> dict[str, Any]:
        body: dict[str, Any] = {"message": self.message}
        if self.field:
            body["field"] = self.field
        return body


class InputError(LoadlineError):
    """A value is not acceptable; `field` names it."""

    status_code = 422


class NotFoundError(LoadlineError):
    status_code = 404


class ConflictError(LoadlineError):
    """The request clashes with what is stored (a duplicate name, a dependent row)."""

    status_code = 409


class StaleVersionError(ConflictError):
    """An update was based on an older version; carries the current values."""

    def __init__(self, message: str, *, current: dict[str, Any]) -> None:
        super().__init__(message, field="version")
        self.current = current

    def detail(self) -> dict[str, Any]:
        return {**super().detail(), "current": self.current}
