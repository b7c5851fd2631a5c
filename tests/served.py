"""The app as uvicorn serves it, for tests that count what a request leaves behind."""

from __future__ import annotations

import gc
from collections.abc import Callable
from typing import Any

from fastapi import FastAPI

DEBUG_EXTENSION = "http.response.debug"


def as_served(app: FastAPI) -> Any:
    """The app without the test client's debug extension, which uvicorn does not offer.

    With it, each template response also hands its context to the test client's own closures,
    a reference cycle of the harness rather than of the application.
    """

    async def served(scope: dict[str, Any], receive: Any, send: Any) -> None:
        extensions = scope.get("extensions") or {}
        if DEBUG_EXTENSION in extensions:
            kept = {name: value for name, value in extensions.items() if name != DEBUG_EXTENSION}
            scope = {**scope, "extensions": kept}
        await app(scope, receive, send)

    return served


def unreachable_after(action: Callable[[], object]) -> int:
    """Objects the garbage collector finds in reference cycles after running action."""
    gc.collect()
    action()
    return gc.collect()
