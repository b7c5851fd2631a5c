"""Jinja2 filters and globals shared by every page."""

from __future__ import annotations

from typing import Any

from fastapi.templating import Jinja2Templates
from jinja2 import pass_context

from server.access import allowed
from server.wording import (
    STATE_LABELS,
    against_p50,
    counted,
    day_word,
    days,
    in_days,
    ordinal,
    possessive,
)


def number(value: float | None) -> str:
    if value is None:
        return "–"
    rounded = round(float(value), 2)
    return f"{rounded:g}"


def percent(value: float | None, digits: int = 0) -> str:
    if value is None:
        return "–"
    return f"{value * 100:.{digits}f} %"


def form_number(value: float | None) -> str:
    """A stored number as a form field shows it: every digit that was typed (33.333), no
    float noise. The display filters round, and a form saved back would store the rounding."""
    return "" if value is None else f"{float(value):.10g}"


def share_percent(value: float | None) -> str:
    """A share typed as a percentage, shown as typed: 0.125 -> "12.5 %" (percent rounds)."""
    return "–" if value is None else f"{number(value * 100)} %"


# Errors not tied to one input: shown without a field label.
_FORM_WIDE = {"form", "body", "version"}


def bare_message(message: str, field: str) -> str:
    """The message without the "field: " its layer put in front (the page shows the label)."""
    for prefix in (f"{field}: ", f"{field.replace('_', ' ')}: "):
        if message.startswith(prefix):
            return message[len(prefix) :]
    return message


def error_line(field: str, message: str) -> str:
    """One line for an error of the whole form: "days off: ...", or the message alone."""
    text = bare_message(message, field)
    return text if field in _FORM_WIDE else f"{field.replace('_', ' ')}: {text}"


@pass_context
def may(context: Any, path: str, method: str = "POST") -> bool:
    """Whether the signed-in person may send this request: the access table decides, so a
    page offers a control only to those whose request would be accepted."""
    request = context.get("request")
    user = getattr(request.state, "user", None) if request is not None else None
    return allowed(user, method, path)


def configure_templates(templates: Jinja2Templates) -> None:
    env = templates.env
    env.filters["days"] = days
    env.filters["day_word"] = day_word
    env.filters["in_days"] = in_days
    env.filters["possessive"] = possessive
    env.filters["number"] = number
    env.filters["percent"] = percent
    env.filters["share_percent"] = share_percent
    env.filters["bare_message"] = bare_message
    env.filters["error_line"] = error_line
    env.filters["counted"] = counted
    env.filters["form_number"] = form_number
    env.filters["ordinal"] = ordinal
    env.filters["against_p50"] = against_p50
    env.globals["STATE_LABELS"] = STATE_LABELS
    env.globals["may"] = may
    env.trim_blocks = True
    env.lstrip_blocks = True
