"""Error responses documented on every API route."""

from __future__ import annotations

from typing import Any

from pydantic import BaseModel


class ErrorDetail(BaseModel):
    message: str
    field: str | None = None
    current: dict[str, Any] | None = None


class ErrorBody(BaseModel):
    detail: ErrorDetail


ERRORS: dict[int | str, dict[str, Any]] = {
    404: {"model": ErrorBody, "description": "Unknown id."},
    409: {
        "model": ErrorBody,
        "description": "Clashes with stored data (duplicate, stale version).",
    },
}
