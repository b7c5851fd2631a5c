"""Posted HTML forms: fields read as text, and the redirect that follows a successful post."""

from __future__ import annotations

from typing import Any

from fastapi.responses import RedirectResponse


def form_text(form: Any, name: str, *, strip: bool = True) -> str:
    """The field as text ("" when missing or a file); strip=False keeps passwords and notes."""
    value = form.get(name, "")
    if not isinstance(value, str):
        return ""
    return value.strip() if strip else value


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
