"""Wording shared by messages and pages: counts with their noun, names in quotes."""

from __future__ import annotations


def counted(count: int, singular: str, plural: str | None = None) -> str:
    """'1 initiative', '0 initiatives', '1,200 rows': the count, then the noun it calls for.

    `plural` is needed only where adding "s" is wrong ("1 entry", "2 entries").
    """
    noun = singular if count == 1 else (plural or f"{singular}s")
    return f"{count:,} {noun}"


def quoted(name: object) -> str:
    """A name inside a sentence, in the curly quotes the pages use: “Quay wall”."""
    return f"“{name}”"
