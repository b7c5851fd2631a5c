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


def see_other(url: str) -> RedirectResponse:
    """303 after a post, so reloading the page that follows does not post again."""
    return RedirectResponse(url, status_code=303)
