"""Reading the API's error answers."""

from __future__ import annotations

from typing import Any

import httpx


def error_items(response: httpx.Response) -> list[dict[str, Any]]:
    """The error items of an answer: a list of validation errors, or one domain error."""
    detail = response.json()["detail"]
    return detail if isinstance(detail, list) else [detail]


def error_fields(response: httpx.Response) -> list[str]:
    return [str(item.get("field")) for item in error_items(response)]


def error_text(response: httpx.Response) -> str:
    return " ".join(str(item.get("msg") or item.get("message")) for item in error_items(response))
