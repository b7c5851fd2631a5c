"""Backups: a consistent copy of a live SQLite database, and a JSON export of the workspace.

The SQLite copy uses SQLite's online backup API, so it is consistent even while the server
writes. The JSON export holds every table's rows and restores into an empty database of
either kind (SQLite or PostgreSQL) at the same schema revision.
"""

from __future__ import annotations

import datetime as dt
import json
import sqlite3
from pathlib import Path
from typing import Any

from alembic.runtime.migration import MigrationContext
from sqlalchemy import Date, DateTime, func, select, text
from sqlalchemy.engine import Engine, make_url
from sqlmodel import SQLModel

import server.models  # noqa: F401  (registers the tables)
from server.errors import InputError
from server.store.initiatives import parted_titles, title_key

FORMAT = "loadline-workspace"
FORMAT_VERSION = 1
# Sign-in state is not workspace data: a restored workspace starts with nobody signed in.
SKIPPED_TABLES = frozenset({"user_session", "login_failure"})


def backup_sqlite(database_url: str, destination: Path) -> Path:
    """Copy a live SQLite database with the online backup API."""
    url = make_url(database_url)
    if url.get_backend_name() != "sqlite" or not url.database:
        raise InputError(
            "backup copies SQLite databases; for PostgreSQL use pg_dump, or export-workspace.",
            field="database_url",
        )
    destination.parent.mkdir(parents=True, exist_ok=True)
    if destination.exists():
        raise InputError(f"{destination} already exists; choose a new file.", field="destination")
    source = sqlite3.connect(url.database)
    target = sqlite3.connect(destination)
    try:
        with target:
            source.backup(target)
        check = target.execute("PRAGMA integrity_check").fetchone()[0]
    finally:
        target.close()
        source.close()
    if check != "ok":
        raise RuntimeError(f"the backup failed its integrity check: {check}")
    return destination


def _tables() -> list[Any]:
    return [t for t in SQLModel.metadata.sorted_tables if t.name not in SKIPPED_TABLES]


def _revision(engine: Engine) -> str | None:
    with engine.connect() as conn:
        return MigrationContext.configure(conn).get_current_revision()


def _plain(value: Any) -> Any:
    if isinstance(value, dt.datetime | dt.date):
        return value.isoformat()
    return value


def export_workspace(engine: Engine) -> dict[str, Any]:
    """Every table's rows as JSON-ready data, in an order that restores cleanly."""
    tables: dict[str, list[dict[str, Any]]] = {}
    with engine.connect() as conn:
        for table in _tables():
            rows = conn.execute(select(table).order_by(*table.primary_key.columns)).mappings()
            tables[table.name] = [{k: _plain(v) for k, v in row.items()} for row in rows]
    return {
        "format": FORMAT,
        "format_version": FORMAT_VERSION,
        "schema_revision": _revision(engine),
        "exported_at": dt.datetime.now(dt.UTC).isoformat(),
        "tables": tables,
    }


def _typed(table: Any, row: dict[str, Any]) -> dict[str, Any]:
    out = {}
    for column in table.columns:
        if column.name not in row:
            continue
        value = row[column.name]
        kind = getattr(column.type, "impl", column.type)  # see through type decorators
        if value is not None and isinstance(kind, DateTime):
            value = dt.datetime.fromisoformat(value)
        elif value is not None and isinstance(kind, Date):
            value = dt.date.fromisoformat(value)
        out[column.name] = value
    return out


def restore_workspace(engine: Engine, data: dict[str, Any]) -> dict[str, int]:
    """Load an export into an empty database at the same revision; all or nothing."""
    if data.get("format") != FORMAT or data.get("format_version") != FORMAT_VERSION:
        raise InputError("This file is not a Loadline workspace export.", field="format")
    revision = _revision(engine)
    if data.get("schema_revision") != revision:
        raise InputError(
            f"The export is at schema revision {data.get('schema_revision')}, the database at "
            f"{revision}; migrate the database to the same revision first.",
            field="schema_revision",
        )
    counts: dict[str, int] = {}
    with engine.begin() as conn:
        for table in _tables():
            if conn.execute(select(func.count()).select_from(table)).scalar_one():
                raise InputError(
                    f"The database is not empty (table {table.name} has rows); restore only "
                    "into an empty database.",
                    field="database",
                )
        # Rows go in as exported, past the store's checks. The title key is computed again
        # from the title, never taken from the file, and twins (an edited file may hold them;
        # the title indexes refuse them) are parted as migration 0003 parts them.
        for table in _tables():
            rows = [_typed(table, row) for row in data.get("tables", {}).get(table.name, [])]
            if table.name == "initiative":
                _keyed_titles(rows)
            if rows:
                conn.execute(table.insert(), rows)
            counts[table.name] = len(rows)
        if conn.dialect.name == "postgresql":
            # Ids were restored as they were; move each sequence past the largest one.
            for table in _tables():
                if "id" in table.columns:
                    conn.execute(
                        text(
                            f"SELECT setval(pg_get_serial_sequence('{table.name}', 'id'), "
                            f'COALESCE((SELECT MAX(id) FROM "{table.name}"), 0) + 1, false)'
                        )
                    )
    return counts


def _keyed_titles(rows: list[dict[str, Any]]) -> None:
    """Give restored initiatives their title key, renaming later twins apart."""
    renamed = parted_titles(
        (row["id"], row["team_id"], row.get("period_id"), row["title"]) for row in rows
    )
    for row in rows:
        if row["id"] in renamed:
            row["title"] = renamed[row["id"]]
            row["version"] = row.get("version", 1) + 1
        row["title_key"] = title_key(row["title"])


def write_export(engine: Engine, destination: Path) -> Path:
    destination.parent.mkdir(parents=True, exist_ok=True)
    destination.write_text(json.dumps(export_workspace(engine), indent=1, ensure_ascii=False))
    return destination


def read_export(source: Path) -> dict[str, Any]:
    try:
        data = json.loads(source.read_text(encoding="utf-8"))
    except (UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise InputError(f"{source} is not a readable JSON export: {exc}", field="file") from exc
    if not isinstance(data, dict):
        raise InputError("This file is not a Loadline workspace export.", field="format")
    return data
