"""The one exception the selector raises for input it cannot plan with."""

from __future__ import annotations


class SelectorInputError(ValueError):
    """Input the selector refuses, naming the item (key, None for the problem) and the field."""

    def __init__(
        self, message: str, *, field: str, key: str | None = None, row: int | None = None
    ) -> None:
        super().__init__(message)
        self.message = message
        self.field = field
        self.key = key
        self.row = row  # line of the CSV file the input came from, when it came from one

    @classmethod
    def for_item(cls, key: str, field: str, problem: str) -> SelectorInputError:
        """Build the error for one item's field, with both named in the message."""
        return cls(f"initiative {key!r}: {field} {problem}", field=field, key=key)

    @classmethod
    def for_problem(cls, field: str, problem: str) -> SelectorInputError:
        """Build the error for a problem-level field such as capacity or resolution."""
        return cls(f"{field} {problem}", field=field, key=None)
