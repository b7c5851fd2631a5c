"""Database engine, SQLite pragmas and the per-request session."""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

from sqlalchemy import event
from sqlalchemy.engine import Engine, make_url
from sqlmodel import Session, create_engine

from server.config import Settings


def make_engine(settings: Settings) -> Engine:
    """Create the engine for the configured database.

    SQLite gets WAL (readers never block the writer during a live meeting), enforced foreign
    keys (SQLite ignores them by default) and a busy timeout so concurrent writers wait instead
    of failing at once.
    """
    url = make_url(settings.database_url)
    if url.get_backend_name() != "sqlite":
        return create_engine(url, pool_pre_ping=True)

    if url.database and url.database != ":memory:":
        Path(url.database).parent.mkdir(parents=True, exist_ok=True)
    engine = create_engine(
        url,
        connect_args={
            "check_same_thread": False,
            "timeout": settings.sqlite_busy_timeout_ms / 1000,
        },
    )
    busy_ms = int(settings.sqlite_busy_timeout_ms)

    @event.listens_for(engine, "connect")
    def _sqlite_pragmas(dbapi_connection, _record) -> None:  # type: ignore[no-untyped-def]
        cursor = dbapi_connection.cursor()
        cursor.execute("PRAGMA journal_mode=WAL")
        cursor.execute("PRAGMA foreign_keys=ON")
        cursor.execute(f"PRAGMA busy_timeout={busy_ms}")
        cursor.execute("PRAGMA synchronous=NORMAL")
        cursor.close()

    return engine


def session_scope(engine: Engine) -> Iterator[Session]:
    """Yield one session; used by the request dependency and by the command line."""
    with Session(engine, expire_on_commit=False) as session:
        yield session


class _DeferredCommitSession(Session):
    """A session whose commit only flushes, so callers' commits join one transaction."""

    def commit(self) -> None:
        self.flush()


@contextmanager
def one_transaction(engine: Engine) -> Iterator[Session]:
    """Run several persistence calls as one transaction: all their changes, or none.

    Persistence functions commit as they go; inside this block their commits only flush, and
    the one real commit happens when the block ends (a rollback when it raises).
    """
    with _DeferredCommitSession(engine, expire_on_commit=False) as session:
        try:
            yield session
        except BaseException:
            session.rollback()
            raise
        Session.commit(session)
