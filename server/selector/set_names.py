"""Either-or set names typed another way ("Search", "search ", "SEARCH") are one set.

The app, the CLI and the stateless HTTP endpoint read set names alike, so one file or request
gives the plan the app would. `name_key` is also the rule the store compares titles by.
"""

from __future__ import annotations

import hashlib
import unicodedata
from collections.abc import Iterable

# Past this many characters a key ends in a digest of the rest, so it fits a database column
# (a few characters fold to many: "ﷺ" to 18) and still tells every two names apart.
KEY_MAX = 600
_DIGEST_CHARS = 64


def name_key(name: str) -> str:
    """How names are compared: as the Unicode Standard's compatibility caseless match (section
    3.13, D146, from memory: NFKD(casefold(NFKD(casefold(NFD(name)))))), with runs of white
    space as one, the ends trimmed and invisible format characters (general category Cf:
    zero-width spaces and joiners, the soft hyphen) left out. So "café" typed with a
    combining accent, "CAFÉ", the full-width "ｃａｆé" and "ca\u200bfé" are one name: two
    names that read the same on a page cannot both be stored.
    """
    name = "".join(ch for ch in name if unicodedata.category(ch) != "Cf")
    folded = unicodedata.normalize("NFD", name).casefold()
    folded = unicodedata.normalize("NFKD", unicodedata.normalize("NFKD", folded).casefold())
    key = " ".join(folded.split())
    if len(key) <= KEY_MAX:
        return key
    digest = hashlib.sha256(key.encode()).hexdigest()
    return key[: KEY_MAX - _DIGEST_CHARS] + digest


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
