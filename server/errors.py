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

    def headers(self) -> dict[str, str]:
        """Response headers that go with the error (none unless a subclass says so)."""
        return {}


class InputError(LoadlineError):
    """A value is not acceptable; `field` names it."""

    status_code = 422


class NotFoundError(LoadlineError):
    status_code = 404


class DeletedError(NotFoundError):
    """The row was deleted (its audit entry says so): named by title, with the team whose
    Changes list has the entry."""

    def __init__(self, message: str, *, field: str, title: str, team_id: int | None) -> None:
        super().__init__(message, field=field)
        self.title = title
        self.team_id = team_id


class ConflictError(LoadlineError):
    """The request clashes with what is stored (a duplicate name, a dependent row)."""

    status_code = 409


class StaleVersionError(ConflictError):
    """An update was based on an older version; carries the current values."""

    def __init__(
        self, message: str, *, current: dict[str, Any], changed: str | None = None
    ) -> None:
        super().__init__(message, field="version")
        self.current = current
        # The sentence naming what changed, without a form's advice (refuse_if_changed).
        self.changed = changed

    def detail(self) -> dict[str, Any]:
        return {**super().detail(), "current": self.current}


class NothingStoredError(ConflictError):
    """A replace-only write found no row to replace. `found` names what is missing, without
    advice: the caller that asked for replace-only (an If-Match: * on the API) says what to do."""

    def __init__(self, found: str) -> None:
        super().__init__(f"{found} Nothing was saved.")
        self.found = found


class AlreadyStoredError(ConflictError):
    """A create-only write found the row already stored; carries its values.

    `found` is the sentence naming what is stored, without advice: the caller that asked for
    create-only (an If-None-Match: * on the API) says what to do instead.
    """

    def __init__(self, found: str, *, current: dict[str, Any]) -> None:
        super().__init__(f"{found} Nothing was saved.")
        self.found = found
        self.current = current

    def detail(self) -> dict[str, Any]:
        return {**super().detail(), "current": self.current}
