"""Wording shared by messages and pages: counts with their noun, days with their unit, names
in quotes."""

from __future__ import annotations

from decimal import ROUND_HALF_UP, Decimal
from typing import Any

_HUNDREDTH = Decimal("0.01")

# An initiative's state as pages and messages say it.
STATE_LABELS = {"candidate": "candidate", "pinned": "pinned", "ruled_out": "ruled out"}


def counted(count: int, singular: str, plural: str | None = None) -> str:
    """'1 initiative', '0 initiatives', '1,200 rows': the count, then the noun it calls for.

    `plural` is needed only where adding "s" is wrong ("1 entry", "2 entries").
    """
    noun = singular if count == 1 else (plural or f"{singular}s")
    return f"{count:,} {noun}"


def possessive(name: object) -> str:
    """ "Ines's", but "Fares and Payments'": the possessive of a name in a sentence."""
    text = str(name)
    return f"{text}'" if text.endswith(("s", "S")) else f"{text}'s"


def quoted(name: object) -> str:
    """A name inside a sentence, in the curly quotes the pages use: “Quay wall”."""
    return f"“{name}”"


def days(value: float | None) -> str:
    """Show person-days with at most two decimals: 12, 12.5, 0.25 (a quarter-day step shown
    as 0.2 would misstate it); below 0.005 but not 0, "< 0.01" (an effort shown as "0" would
    read as no effort at all)."""
    if value is None:
        return "–"
    # Half up from the value as ten significant digits, so 7.735 computed as 7.734999... shows
    # as 7.74, the figure worked by hand, not 7.73.
    rounded = float(Decimal(f"{float(value):.10g}").quantize(_HUNDREDTH, ROUND_HALF_UP))
    if rounded == 0 and value != 0:
        return "< 0.01" if value > 0 else "> −0.01"
    return f"{rounded:g}" if abs(rounded) < 1e6 else f"{rounded:,.0f}"


def day_word(value: float | None) -> str:
    """The unit after a number of days as `days` shows it: "1 day", "0.5 days", "2 days"."""
    return "day" if value is not None and days(value) == "1" else "days"


def in_days(value: float | None) -> str:
    """A number of days with its unit: "1 day", "12.5 days"."""
    return f"{days(value)} {day_word(value)}"


def ordinal(value: float) -> str:
    """A percentile in words, its figure as `days` writes it: 80 -> "80th", 1 -> "1st",
    22 -> "22nd", 13 -> "13th", 97.5 -> "97.5th"."""
    text = days(value)
    if not text.isdigit():
        return f"{text}th"
    n = int(text)
    suffix = "th" if n % 100 in (11, 12, 13) else {1: "st", 2: "nd", 3: "rd"}.get(n % 10, "th")
    return f"{text}{suffix}"


def against_p50(value_given_up: float) -> str:
    """What planning at a confidence level does to the value, against the P50 plan.

    Above P50 the efforts are safer and the plan is worth less; below it they are optimistic
    (under their medians) and the plan is worth more, which is no saving.
    """
    if value_given_up > 0:
        return f"gives up {days(value_given_up)} value"
    if value_given_up < 0:
        return (
            f"adds {days(-value_given_up)} value, on efforts below their medians: an "
            "optimistic plan"
        )
    return "gives up no value"


def audit_value(value: Any) -> str:
    """A stored value of the audit trail in words: no float noise, lists and records joined."""
    if value is None:
        return "–"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        return f"{value:.10g}"
    if isinstance(value, list):
        return "; ".join(audit_value(item) for item in value) or "none"
    if isinstance(value, dict):
        return ", ".join(f"{str(k).replace('_', ' ')} {audit_value(v)}" for k, v in value.items())
    return str(value)


# Field names as the pages label them.
FIELD_LABELS = {
    "allocation": "share",
    "capacity_days": "capacity",
    "forced_in": "forced in",
    "forced_out": "forced out",
    "availability": "days off",
    "changes": "changes",
    "confidence": "confidence",
    "days_off": "days off",
    "default_spread": "default spread",
    "effort": "effort",
    "either_or": "either-or set",
    "end_date": "end date",
    "focus_factor": "focus factor",
    "kind": "kind",
    "name": "name",
    "needs": "needs",
    "non_working_dates": "non-working dates",
    "notes": "notes",
    "other_efforts": "other teams' effort",
    "period_id": "period",
    "reserve_pct": "reserve",
    "start_date": "start date",
    "state": "state",
    "team_id": "team",
    "title": "title",
    "value": "value score",
    "weekmask": "working weekdays",
}


def field_label(name: str) -> str:
    """A stored field as the pages label it: "reserve", not "reserve_pct"."""
    return FIELD_LABELS.get(name, name.replace("_", " "))
