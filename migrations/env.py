"""Alembic environment: Loadline's tables, its database URL, batch mode for SQLite."""

from __future__ import annotations

from alembic import context
from sqlmodel import SQLModel

import server.models  # noqa: F401  (registers the tables on SQLModel.metadata)
from server.config import Settings
from server.db import make_engine

config = context.config
target_metadata = SQLModel.metadata


def _url() -> str:
    return config.attributes.get("database_url") or Settings.from_env().database_url


def run_migrations_offline() -> None:
    context.configure(
        url=_url(),
        target_metadata=target_metadata,
        literal_binds=True,
        compare_type=True,
        render_as_batch=True,
    )
    with context.begin_transaction():
        context.run_migrations()


def run_migrations_online() -> None:
    connection = config.attributes.get("connection")
    if connection is not None:
        _run(connection)
        return
    engine = make_engine(Settings.from_env(database_url=_url()))
    with engine.connect() as conn:
        _run(conn)
    engine.dispose()


def _run(connection) -> None:  # type: ignore[no-untyped-def]
    # SQLite's batch mode copies a table, drops it and renames the copy: with foreign keys on,
    # the drop would delete (or detach) the rows of the tables that refer to it. They are off
    # while the migrations run (SQLite ignores the pragma inside a transaction, so it is set
    # before) and checked when they are done.
    sqlite = connection.dialect.name == "sqlite"
    if sqlite:
        connection.exec_driver_sql("PRAGMA foreign_keys=OFF")
        connection.commit()
    try:
        context.configure(
            connection=connection,
            target_metadata=target_metadata,
            compare_type=True,
            render_as_batch=True,
        )
        with context.begin_transaction():
            context.run_migrations()
            if sqlite:
                broken = connection.exec_driver_sql("PRAGMA foreign_key_check").fetchall()
                if broken:
                    raise RuntimeError(f"the migration left rows without their parent: {broken}")
    finally:
        if sqlite:
            connection.exec_driver_sql("PRAGMA foreign_keys=ON")
            connection.commit()


if context.is_offline_mode():
    run_migrations_offline()
else:
    run_migrations_online()
