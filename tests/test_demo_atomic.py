"""The demo loads all or nothing."""

from __future__ import annotations

import pytest
from sqlalchemy import func, select
from sqlmodel import Session

from server import demo
from server.config import Settings
from server.db import make_engine
from server.models import Initiative, Period, Team


def test_a_failure_halfway_leaves_nothing(
    settings: Settings, monkeypatch: pytest.MonkeyPatch
) -> None:
    engine = make_engine(settings)
    broken = dict(demo.INITIATIVES)
    broken["Platform"] = [
        *broken["Platform"],
        ("Needs a missing one", 3, 5, "candidate", None, ["Nope"]),
    ]
    monkeypatch.setattr(demo, "INITIATIVES", broken)
    with pytest.raises(KeyError):
        demo.load_if_empty(engine)
    with Session(engine) as session:
        for table in (Team, Period, Initiative):
            assert session.exec(select(func.count()).select_from(table)).one()[0] == 0
    monkeypatch.undo()
    assert demo.load_if_empty(engine)
    engine.dispose()
