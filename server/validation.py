"""Turn pydantic validation errors into field-named messages for people and the API."""

from __future__ import annotations

import re
from collections.abc import Mapping, Sequence
from typing import Any, TypeVar

from pydantic import BaseModel, ValidationError

ModelT = TypeVar("ModelT", bound=BaseModel)
_PREFIXED = re.compile(r"^(?:Value error, )?(?P<field>[a-z_]+): (?P<message>.+)$", re.DOTALL)
_LOCATION_WORDS = {"body", "query", "path", "form"}


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
        message = "This field is required."
    elif error.get("type") == "extra_forbidden":
        message = "This field is not recognised."
    elif error.get("type") in {"float_parsing", "int_parsing", "float_type", "int_type"}:
        message = "Enter a number."
    elif error.get("type") == "finite_number":
        message = "Enter a finite number."
    return field, message


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
