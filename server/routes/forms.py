"""Posted HTML forms: fields read as text, percentages, re-showing a refused form, and the
redirect that follows a successful post. Shared by the page routes."""

from __future__ import annotations

from typing import Any

from fastapi import Request
from fastapi.responses import RedirectResponse, Response

from server.deps import TemplatesDep
from server.errors import LoadlineError

# Refusals of a share typed as a percentage (member share, confidence) and of the spread.
SHARE_RULE = "Enter a percentage above 0 and at most 100."
SPREAD_RULE = "Enter a percentage from 0 to below 100."


def form_text(form: Any, name: str, *, strip: bool = True) -> str:
    """The field as text ("" when missing or a file); strip=False keeps passwords and notes."""
    value = form.get(name, "")
    if not isinstance(value, str):
        return ""
    return value.strip() if strip else value


def optional_text(form: Any, name: str) -> str | None:
    """The field as text, or None when it is blank."""
    return form_text(form, name) or None


def optional_int(value: str) -> int | None:
    """A whole number typed as digits, else None (a blank or hand-edited field)."""
    return int(value) if value.isdigit() else None


def based_on(form: Any) -> str | None:
    """The fingerprint of the stored values the form was built from (None: none sent)."""
    return form_text(form, "based_on") or None


def render(
    templates: TemplatesDep,
    request: Request,
    name: str,
    context: dict[str, Any],
    status_code: int = 200,
) -> Response:
    return templates.TemplateResponse(request, name, context, status_code=status_code)


def store_or_errors(action: Any) -> tuple[Any, dict[str, str]]:
    """Run a persistence call; a refused change becomes a message beside its field."""
    try:
        return action(), {}
    except LoadlineError as exc:
        return None, {exc.field or "form": exc.message}


def refusal_status(errors: dict[str, str]) -> int:
    """409 when the form was refused for a colleague's change in between, else 422."""
    return 409 if "version" in errors else 422


def percent_to_share(raw: str | None) -> Any:
    """A percentage typed on a page ("80", "80 %") as the share the API takes (0.8).

    Text that is not a number passes through, so the schema refuses it with its own message.
    """
    if raw is None:
        return None
    try:
        return float(raw.rstrip("% ")) / 100
    except ValueError:
        return raw


def refused_as_percentage(
    errors: dict[str, str], field: str, page_field: str, rule: str
) -> dict[str, str]:
    """Move a refused share to the page's percentage field, phrased as a percentage.

    The schema checks a share (0.8); the page asks for a percentage (80), so a range message
    of the schema would name the wrong numbers: the page's rule is said instead.
    """
    if field in errors:
        del errors[field]
        errors[page_field] = rule
    return errors


def see_other(url: str) -> RedirectResponse:
    """303 after a post, so reloading the page that follows does not post again."""
    return RedirectResponse(url, status_code=303)
