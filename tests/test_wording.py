"""Counts with their noun: the one rule behind every "1 initiative" and "3 initiatives"."""

from __future__ import annotations

import pytest

from server.wording import counted


@pytest.mark.parametrize(
    ("count", "expected"),
    [(0, "0 initiatives"), (1, "1 initiative"), (2, "2 initiatives"), (1200, "1,200 initiatives")],
)
def test_the_noun_follows_the_count(count: int, expected: str) -> None:
    assert counted(count, "initiative") == expected


def test_an_irregular_plural_is_given() -> None:
    assert counted(1, "entry", "entries") == "1 entry"
    assert counted(3, "entry", "entries") == "3 entries"
