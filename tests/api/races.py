"""Races made on purpose: another writer commits right after a step of the store."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import pytest
from fastapi import FastAPI
from sqlmodel import Session


def then_another_writer(
    monkeypatch: pytest.MonkeyPatch,
    module: object,
    name: str,
    app: FastAPI,
    write: Callable[[Session], object],
) -> None:
    """Patch `module.name` to run as usual once, then let another session commit `write`."""
    original = getattr(module, name)

    def step_then_lose_the_race(*args: Any, **kwargs: Any) -> Any:
        answer = original(*args, **kwargs)
        monkeypatch.setattr(module, name, original)
        with Session(app.state.engine) as other:
            write(other)
        return answer

    monkeypatch.setattr(module, name, step_then_lose_the_race)
