"""Turn pydantic validation errors into field-named messages for people and the API."""

from __future__ import annotations

import re
from collections.abc import Mapping, Sequence
from typing import Any, TypeVar

from pydantic import BaseModel, ValidationError

from server.text_rules import VISIBLE_TEXT, WEEKMASK

ModelT = TypeVar("ModelT", bound=BaseModel)
# A model-level message naming its field first: "low: ...", "effort.team_id: ...".
_PREFIXED = re.compile(
    r"^(?:Value error, )?(?P<field>[a-z_]+(?:\.[a-z_]+)*): (?P<message>.+)$", re.DOTALL
)
_LOCATION_WORDS = {"body", "query", "path", "form"}
REQUIRED_MESSAGE = "This field is required."


def field_and_message(error: Mapping[str, Any]) -> tuple[str, str]:
    """Name the field an error is about and phrase the problem in plain words."""
    location = [str(part) for part in error.get("loc", ()) if str(part) not in _LOCATION_WORDS]
    message = str(error.get("msg", "is not valid"))
    match = _PREFIXED.match(message)
    if match:  # model-level checks put the field name in front of their message
        return ".".join([*location, match["field"]]) or match["field"], match["message"]
    message = message.removeprefix("Value error, ")
    if error.get("type") == "json_invalid":  # its location is a character offset, not a field
        return "body", "The body is not valid JSON."
    field = ".".join(location) or "body"
    if error.get("type") == "missing":
        message = REQUIRED_MESSAGE
    elif error.get("type") == "extra_forbidden":
        message = "This field is not recognised."
    elif error.get("type") in {"float_parsing", "int_parsing", "float_type", "int_type"}:
        message = "Enter a number."
    elif error.get("type") == "finite_number":
        message = "Enter a finite number."
    else:
        message = _plain_words(error) or message
    return field, message


# Messages for the usual pydantic error types, phrased for the person at the form.
_PATTERN_MESSAGES = {
    VISIBLE_TEXT: (
        "Use visible characters only (no line breaks, tabs, control characters or "
        "text-direction overrides)."
    ),
    WEEKMASK: "Enter seven digits, Monday first: 1 for a working day, 0 for a day off.",
}


def _plain_words(error: Mapping[str, Any]) -> str | None:
    kind = str(error.get("type", ""))
    ctx = error.get("ctx") or {}

    def bound(name: str) -> str:
        value = ctx.get(name)
        if isinstance(value, float) and value.is_integer() and abs(value) < 1e15:
            value = int(value)  # 1,000,000, not 1e+06
        return (
            f"{value:,}"
            if isinstance(value, int)
            else f"{value:,g}"
            if isinstance(value, float)
            else str(value)
        )

    if kind == "string_too_short":
        least = ctx.get("min_length", 1)
        return "Enter some text." if least == 1 else f"Enter at least {least} characters."
    if kind == "string_too_long":
        return f"Keep it to {ctx.get('max_length')} characters at most."
    if kind == "string_pattern_mismatch":
        return _PATTERN_MESSAGES.get(
            str(ctx.get("pattern")), "This text is not in the form expected."
        )
    if kind == "greater_than":
        return f"Enter a number above {bound('gt')}."
    if kind == "greater_than_equal":
        return f"Enter a number of at least {bound('ge')}."
    if kind == "less_than":
        return f"Enter a number below {bound('lt')}."
    if kind == "less_than_equal":
        return f"Enter a number of at most {bound('le')}."
    if kind in {"date_parsing", "date_from_datetime_parsing", "date_type"}:
        return "Enter a date as YYYY-MM-DD (for example 2027-03-01)."
    if kind in {"bool_parsing", "bool_type"}:
        return "Enter true or false."
    if kind in {"string_type"}:
        return "Enter text."
    if kind == "int_from_float":
        return "Enter a whole number."
    if kind in {"list_type", "tuple_type", "set_type"}:
        return "Enter a list (a JSON array)."
    if kind in {"dict_type", "model_type", "model_attributes_type"}:
        return "Enter an object with named fields (a JSON object)."
    if kind == "too_long":
        return f"Give at most {bound('max_length')} items ({bound('actual_length')} given)."
    if kind == "too_short":
        return f"Give at least {bound('min_length')} items ({bound('actual_length')} given)."
    if kind in {"literal_error", "enum"}:
        expected = ctx.get("expected")
        return f"Choose one of {expected}." if expected else None
    return None


def api_errors(errors: Sequence[Mapping[str, Any]]) -> list[dict[str, Any]]:
    """FastAPI's error shape (loc, msg, type) with the field named and the message plain."""
    out = []
    for error in errors:
        field, message = field_and_message(error)
        loc = list(error.get("loc", ()))
        named = field.split(".")[-1]
        if named not in [str(part) for part in loc]:
            loc.append(named)
        out.append(
            {
                "loc": loc,
                "msg": f"{field}: {message}",
                "type": error.get("type", "value_error"),
                "field": field,
            }
        )
    return out


def parse_form(
    model: type[ModelT], data: Mapping[str, Any]
) -> tuple[ModelT | None, dict[str, str]]:
    """Validate form values; return the model or a message per field (first one wins)."""
    try:
        return model.model_validate(data), {}
    except ValidationError as exc:
        messages: dict[str, str] = {}
        for error in exc.errors():
            field, message = field_and_message(error)
            messages.setdefault(field, message)
        return None, messages
