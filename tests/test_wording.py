"""Wording: counts with their noun ("1 initiative", "3 initiatives") and bounds in refusals."""

from __future__ import annotations

import re
from pathlib import Path

import pytest
from pydantic import ValidationError

from server.schemas import InitiativeCreate
from server.validation import field_and_message
from server.wording import against_p50, counted, ordinal, possessive


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
    ("fields", "expected"),
    [
        ({"needs": "abc"}, ("needs", "Enter a list (a JSON array).")),
        ({"needs": list(range(1, 60))}, ("needs", "Give at most 50 items (59 given).")),
        ({"team_id": 1.5}, ("team_id", "Enter a whole number.")),
        ({"effort": [1]}, ("effort", "Enter an object with named fields (a JSON object).")),
    ],
)
def test_pydantic_messages_are_said_in_the_forms_words(
    fields: dict[str, object], expected: tuple[str, str]
) -> None:
    """These read "Input should be a valid list", "List should have at most 50 items after
    validation, not 59", "... instance of EffortIn" (a class name) before."""
    body = {"team_id": 1, "title": "Quay wall", "effort": 1, "value": 1} | fields
    with pytest.raises(ValidationError) as refused:
        InitiativeCreate.model_validate(body)
    assert field_and_message(refused.value.errors()[0]) == expected


@pytest.mark.parametrize(
    ("name", "expected"),
    [("Ines", "Ines'"), ("Ola", "Ola's"), ("Fares and Payments", "Fares and Payments'")],
)
def test_a_name_ending_in_s_takes_an_apostrophe_only(name: str, expected: str) -> None:
    """ "Fares and Payments's share" read on the plan page."""
    assert possessive(name) == expected


@pytest.mark.parametrize(
    ("value", "expected"),
    [
        (1, "1st"),
        (2, "2nd"),
        (3, "3rd"),
        (4, "4th"),
        (11, "11th"),
        (12, "12th"),
        (13, "13th"),
        (21, "21st"),
        (22, "22nd"),
        (50, "50th"),
        (80, "80th"),
        (97.5, "97.5th"),
        (99, "99th"),
    ],
)
def test_a_percentile_takes_its_english_ordinal(value: float, expected: str) -> None:
    assert ordinal(value) == expected


def test_planning_below_p50_adds_value_and_says_it_is_optimistic() -> None:
    assert against_p50(12.5) == "gives up 12.5 value"
    assert against_p50(0) == "gives up no value"
    below = against_p50(-50)
    assert below.startswith("adds 50 value")
    assert "optimistic" in below
    assert "-" not in below


# A refusal raised as "field: message": the page strips the field and shows the message alone,
# so the message is a sentence. The selector's own messages ("key field: ...") and the command
# line's "loadline: ..." follow their own conventions and are not scanned.
_LOWERCASE_REFUSAL = re.compile(r"(?:InputError|ValueError)\(\s*f?\"[a-z_.]+: [a-z]")


def test_every_field_refusal_starts_as_a_sentence() -> None:
    server = Path(__file__).parents[1] / "server"
    found = [
        f"{path.relative_to(server)}: {match.group(0)}"
        for path in server.rglob("*.py")
        if "selector" not in path.parts and path.name != "cli.py"
        for match in _LOWERCASE_REFUSAL.finditer(path.read_text(encoding="utf-8"))
    ]
    assert found == []
