"""Selector messages name initiatives by key (their database id): reword them with titles.

Used where a selector message reaches a person: the plan page, and the store when it refuses
marks (pins, rule-outs, needs, either-or sets) that no plan could honour.
"""

from __future__ import annotations

import re
from collections.abc import Mapping, Sequence

_QUOTED_KEY = re.compile(r"initiative '(\d+)'")
# A conflict message starts "initiative '<key>': <field>: " and goes on either with its own
# subject ("pinned '3' needs ruled-out '4'") or without one ("is pinned, but so is '5' ...").
_CONFLICT_PREFIX = re.compile(r"^initiative '(\d+)': (?:either_or|needs):? ")
_BARE_KEY = re.compile(r"'(\d+)'")
_LEAVE_TOO = " would leave the plan too"
_LEAVERS = re.compile(r"; ([^;“”]+)" + re.escape(_LEAVE_TOO))


def with_titles(
    text: str, titles: Mapping[str, str], keys: Sequence[str] = (), also: Sequence[str] = ()
) -> str:
    """Name initiatives by title in a selector message that names them by key; `keys` and
    `also` are lists of keys it names bare (an explanation's displaces and moves_with)."""
    text = _QUOTED_KEY.sub(lambda m: f"“{titles.get(m[1], m[1])}”", text)
    for listed in (keys, also):
        if not listed:
            continue
        joined = ", ".join(listed)
        named = ", ".join(f"“{titles.get(k, k)}”" for k in listed)
        for before, after in (
            (f"displace {joined}.", f"displace {named}."),
            (f"displace {joined} and", f"displace {named} and"),
            (f"bring in {joined}", f"bring in {named}"),
            (f"; {joined} would take its place", f"; {named} would take its place"),
            (f"includes {joined}, needed", f"includes {named}, needed"),
        ):
            text = text.replace(before, after)
    return _titled_keys(text, titles)


def _titled_keys(text: str, titles: Mapping[str, str]) -> str:
    # Only keys of known initiatives: an either-or set may be named with digits too.
    text = _BARE_KEY.sub(lambda m: f"“{titles[m[1]]}”" if m[1] in titles else m[0], text)
    return titled_leavers(text, titles)


def titled_leavers(text: str, titles: Mapping[str, str]) -> str:
    """Title the keys of an explanation's "; a, b would leave the plan too"."""

    def named(match: re.Match[str]) -> str:
        keys = match[1].split(", ")
        if not all(key in titles for key in keys):
            return match[0]
        return "; " + ", ".join(f"“{titles[key]}”" for key in keys) + _LEAVE_TOO

    return _LEAVERS.sub(named, text)


def titled_refusal(message: str, field: str, titles: Mapping[str, str]) -> str:
    """A selector refusal (message and field) in titles: marks conflicts as sentences."""
    if field in {"either_or", "needs"}:
        return conflict_with_titles(message, titles)
    return with_titles(message, titles)


def conflict_with_titles(text: str, titles: Mapping[str, str]) -> str:
    """A selector's marks conflict as a sentence about titles, without keys or field names."""
    match = _CONFLICT_PREFIX.match(text)
    if match is not None:
        rest = text[match.end() :]
        subject = f"“{titles.get(match[1], match[1])}” " if rest.startswith("is ") else ""
        text = subject + rest
    text = _titled_keys(text, titles)
    return text[:1].upper() + text[1:] + ("" if text.endswith(".") else ".")
