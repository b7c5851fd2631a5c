"""Either-or set names typed another way ("Search", "search ", "SEARCH") are one set.

The app, the CLI and the stateless HTTP endpoint read set names alike, so one file or request
gives the plan the app would. `name_key` is also the rule the store compares titles by.
"""

from __future__ import annotations

from collections.abc import Iterable


def name_key(name: str) -> str:
    """How names are compared: runs of spaces as one, trimmed, case folded."""
    return " ".join(name.split()).casefold()


class SetNames:
    """The first spelling of each set name, by `name_key`; `known` spellings come first."""

    def __init__(self, known: Iterable[str] = ()) -> None:
        self._first: dict[str, str] = {}
        for name in known:
            self.spelling(name)

    def spelling(self, name: str | None) -> str | None:
        """The set's first spelling for `name` (None stays None: no set)."""
        if name is None:
            return None
        return self._first.setdefault(name_key(name), name)
