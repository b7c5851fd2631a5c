"""Either-or set names typed another way ("Search", "search ", "SEARCH") are one set.

The app compares set names as it compares titles; the CLI and the stateless HTTP endpoint
do the same here, so one file or request gives the plan the app would.
"""

from __future__ import annotations


class SetNames:
    """The first spelling of each set name, by its key (runs of spaces as one, no case)."""

    def __init__(self) -> None:
        self._first: dict[str, str] = {}

    def spelling(self, name: str | None) -> str | None:
        """The set's first spelling for `name` (None stays None: no set)."""
        if name is None:
            return None
        return self._first.setdefault(" ".join(name.split()).casefold(), name)
