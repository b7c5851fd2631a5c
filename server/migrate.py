"""Apply Alembic migrations from code (the command line and the tests use this)."""

from __future__ import annotations

from alembic import command
from alembic.config import Config

from server.config import PROJECT_ROOT, Settings

MIGRATIONS_DIR = PROJECT_ROOT / "migrations"


def alembic_config(database_url: str) -> Config:
    config = Config(str(MIGRATIONS_DIR / "alembic.ini"))
    config.set_main_option("script_location", str(MIGRATIONS_DIR))
    config.attributes["database_url"] = database_url
    return config


def upgrade(settings: Settings, revision: str = "head") -> None:
    command.upgrade(alembic_config(settings.database_url), revision)


def downgrade(settings: Settings, revision: str) -> None:
    command.downgrade(alembic_config(settings.database_url), revision)
