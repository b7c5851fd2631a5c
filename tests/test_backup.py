"""Backups: the SQLite online copy and the JSON workspace export/restore round trip."""

from __future__ import annotations

import sqlite3
import threading
from collections.abc import Callable
from pathlib import Path

import pytest
from sqlalchemy import func, select
from sqlmodel import Session

from server import demo, migrate
from server.backup import (
    backup_sqlite,
    export_workspace,
    read_export,
    restore_workspace,
    write_export,
)
from server.config import Settings
from server.db import make_engine
from server.errors import ConflictError, InputError
from server.models import Initiative, Period, Team
from server.schemas import InitiativeUpdate
from server.store.initiatives import update_initiative
from tests.conftest import make_settings
from tests.factories import make_initiative, make_period, make_team


def _fresh(tmp_path: Path, name: str) -> Settings:
    settings = make_settings(f"sqlite:///{tmp_path / name}")
    migrate.upgrade(settings)
    return settings


def _without_time(export: dict) -> dict:
    return {k: v for k, v in export.items() if k != "exported_at"}


@pytest.mark.parametrize("target_kind", ["same", "sqlite"])
def test_export_restores_into_empty_database_identically(
    settings: Settings, tmp_path: Path, empty_database_url: Callable[[], str], target_kind: str
) -> None:
    source = make_engine(settings)
    assert demo.load_if_empty(source)
    exported = export_workspace(source)

    # "same": a second database of the kind under test (PostgreSQL in the PostgreSQL run);
    # "sqlite": always SQLite, so the PostgreSQL run also restores across kinds.
    url = empty_database_url() if target_kind == "same" else f"sqlite:///{tmp_path / 'r.db'}"
    target_settings = make_settings(url)
    migrate.upgrade(target_settings)
    target = make_engine(target_settings)
    counts = restore_workspace(target, exported)

    assert counts["initiative"] == len(exported["tables"]["initiative"]) > 0
    assert _without_time(export_workspace(target)) == _without_time(exported)
    # New rows after a restore get fresh ids (sequences moved past the restored ones).
    with Session(target) as session:
        session.add(Initiative(team_id=1, title="after restore", value=1))
        session.commit()
        assert session.exec(select(func.count()).select_from(Initiative)).one()[0] == (
            counts["initiative"] + 1
        )
    source.dispose()
    target.dispose()


def test_restore_refuses_a_database_with_data(settings: Settings) -> None:
    engine = make_engine(settings)
    demo.load_if_empty(engine)
    exported = export_workspace(engine)
    with pytest.raises(InputError, match="not empty"):
        restore_workspace(engine, exported)
    engine.dispose()


def test_restore_refuses_other_files_and_revisions(settings: Settings, tmp_path: Path) -> None:
    engine = make_engine(settings)
    with pytest.raises(InputError) as wrong_format:
        restore_workspace(engine, {"format": "something-else"})
    assert wrong_format.value.field == "format"
    exported = export_workspace(engine)
    exported["schema_revision"] = "0000"
    with pytest.raises(InputError) as wrong_revision:
        restore_workspace(engine, exported)
    assert wrong_revision.value.field == "schema_revision"
    bad = tmp_path / "bad.json"
    bad.write_bytes(b"\xff\xfe not json")
    with pytest.raises(InputError):
        read_export(bad)
    engine.dispose()


def test_file_round_trip(settings: Settings, tmp_path: Path) -> None:
    engine = make_engine(settings)
    demo.load_if_empty(engine)
    path = write_export(engine, tmp_path / "out" / "workspace.json")
    assert read_export(path)["tables"]["team"]
    engine.dispose()


def test_a_restore_keys_titles_itself_and_parts_twins_as_migration_0003_does(
    settings: Settings, empty_database_url: Callable[[], str]
) -> None:
    source = make_engine(settings)
    with Session(source) as session:
        team, period = make_team(session), make_period(session)
        team_id, period_id = team.id, period.id
        make_initiative(session, team, period, "Fare capping")
        make_initiative(session, team, period, "Stop alerts")
    exported = export_workspace(source)
    # An edited file: both rows are "Fare capping", and their keys say something else.
    for row in exported["tables"]["initiative"]:
        row["title"] = "Fare capping"
        row["title_key"] = "not the key"
    target_settings = make_settings(empty_database_url())
    migrate.upgrade(target_settings)
    target = make_engine(target_settings)
    assert restore_workspace(target, exported)["initiative"] == 2
    with Session(target) as session:
        rows = session.exec(select(Initiative).order_by(Initiative.id)).scalars().all()
        assert [(r.title, r.title_key, r.version) for r in rows] == [
            ("Fare capping", "fare capping", 1),
            ("Fare capping (2)", "fare capping (2)", 2),
        ]
        with pytest.raises(ConflictError, match="“fare capping” already exists in team Harbour"):
            make_initiative(
                session, session.get(Team, team_id), session.get(Period, period_id), "fare capping"
            )
        session.rollback()
        renamed = update_initiative(
            session,
            initiative_id=rows[1].id or 0,
            initiative_in=InitiativeUpdate(version=2, title="Stop alerts"),
        )
        assert (renamed.row.title, renamed.row.title_key) == ("Stop alerts", "stop alerts")
    source.dispose()
    target.dispose()


def test_online_backup_is_consistent_while_writes_go_on(tmp_path: Path) -> None:
    settings = _fresh(tmp_path, "live.db")
    engine = make_engine(settings)
    demo.load_if_empty(engine)
    stop = threading.Event()

    def keep_writing() -> None:
        with Session(engine) as session:
            n = 0
            while not stop.is_set() and n < 2000:
                session.add(Initiative(team_id=1, title=f"busy {n}", value=1))
                session.commit()
                n += 1

    writer = threading.Thread(target=keep_writing)
    writer.start()
    try:
        copy = backup_sqlite(settings.database_url, tmp_path / "copy.db")
    finally:
        stop.set()
        writer.join()
    with sqlite3.connect(copy) as conn:
        assert conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
        assert conn.execute("SELECT count(*) FROM team").fetchone()[0] == len(demo.TEAMS)
    with pytest.raises(InputError, match="already exists"):
        backup_sqlite(settings.database_url, copy)
    engine.dispose()


def test_backup_refuses_postgresql_urls(tmp_path: Path) -> None:
    with pytest.raises(InputError, match="pg_dump"):
        backup_sqlite("postgresql+psycopg://u@127.0.0.1:1/x", tmp_path / "x.db")
