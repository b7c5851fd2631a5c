"""Wording: counts with their noun ("1 initiative", "3 initiatives") and bounds in refusals."""

from __future__ import annotations

import pytest
from pydantic import ValidationError

from server.schemas import InitiativeCreate
from server.validation import field_and_message
from server.wording import counted, possessive


@pytest.mark.parametrize(
    ("count", "expected"),
    [(0, "0 initiatives"), (1, "1 initiative"), (2, "2 initiatives"), (1200, "1,200 initiatives")],
)
def test_the_noun_follows_the_count(count: int, expected: str) -> None:
    assert counted(count, "initiative") == expected


def test_an_irregular_plural_is_given() -> None:
    assert counted(1, "entry", "entries") == "1 entry"
    assert counted(3, "entry", "entries") == "3 entries"


def test_a_range_bound_reads_as_people_write_numbers() -> None:
    """The value score's bound read "at most 1e+06" while the effort's read "10,000"."""
    with pytest.raises(ValidationError) as refused:
        InitiativeCreate(team_id=1, title="Quay wall", effort=1, value=1e9)  # type: ignore[arg-type]
    assert field_and_message(refused.value.errors()[0]) == (
        "value",
        "Enter a number of at most 1,000,000.",
    )


@pytest.mark.parametrize(
    ("name", "expected"),
    [("Ines", "Ines'"), ("Ola", "Ola's"), ("Fares and Payments", "Fares and Payments'")],
)
def test_a_name_ending_in_s_takes_an_apostrophe_only(name: str, expected: str) -> None:
    """ "Fares and Payments's share" read on the plan page."""
    assert possessive(name) == expected
