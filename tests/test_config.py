"""Settings: every one documented, unsafe ones refused, environment values parsed."""

from __future__ import annotations

import dataclasses
from pathlib import Path

import pytest
from sqlalchemy import text

from server import config
from server.config import PROJECT_ROOT, Settings, documented_settings
from server.db import make_engine

STRONG_SECRET = "q3T9w1x7Zr2mV8cK5pLs0dYh4bNf6gJe"


@pytest.fixture(autouse=True)
def data_dir(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Path:
    """Point the data folder at a temporary one, so no test writes into the project."""
    folder = tmp_path / "data"
    monkeypatch.setattr(config, "DEFAULT_DATA_DIR", folder)
    return folder


def test_every_setting_is_documented_in_developers_md() -> None:
    guide = PROJECT_ROOT / "DEVELOPERS.md"
    assert guide.is_file(), "DEVELOPERS.md is missing"
    text_of_guide = guide.read_text(encoding="utf-8")
    missing = [name for name, _help in documented_settings() if name not in text_of_guide]
    assert missing == [], f"settings not described in DEVELOPERS.md: {missing}"


def test_every_setting_has_an_environment_name_and_help() -> None:
    documented = documented_settings()
    assert len(documented) == len(dataclasses.fields(Settings))
    for name, help_text in documented:
        assert name.isupper(), name
        assert len(help_text) > 20, f"{name} has no real help text"
    names = [name for name, _ in documented]
    assert len(set(names)) == len(names)


@pytest.mark.parametrize("placeholder", ["", "change-me", "changeme", "secret", "dev"])
def test_production_refuses_a_placeholder_secret(placeholder: str) -> None:
    env = {"LOADLINE_ENV": "production", "LOADLINE_SECRET_KEY": placeholder}
    with pytest.raises(ValueError, match="LOADLINE_SECRET_KEY"):
        Settings.from_env(env)


def test_production_refuses_a_short_secret() -> None:
    env = {"LOADLINE_ENV": "production", "LOADLINE_SECRET_KEY": "x" * 31}
    with pytest.raises(ValueError, match="at least 32"):
        Settings.from_env(env)


def test_production_accepts_a_real_secret_and_keeps_it() -> None:
    settings = Settings.from_env(
        {"LOADLINE_ENV": "production", "LOADLINE_SECRET_KEY": STRONG_SECRET}
    )
    assert settings.secret_key == STRONG_SECRET
    assert settings.environment == "production"


def test_development_without_a_secret_makes_one_and_keeps_it(data_dir: Path) -> None:
    first = Settings.from_env({})
    assert len(first.secret_key) >= 32
    assert first.secret_key not in {"", "change-me", "changeme", "secret", "dev"}
    # Every worker process reads the same key, so a form opened on one is accepted by another.
    kept = data_dir / "secret_key"
    assert kept.read_text().strip() == first.secret_key
    assert kept.stat().st_mode & 0o077 == 0  # readable by the owner only
    assert Settings.from_env({}).secret_key == first.secret_key
    kept.unlink()
    assert Settings.from_env({}).secret_key != first.secret_key  # a new folder, a new key


def test_database_url_defaults_to_sqlite_under_the_data_folder(data_dir: Path) -> None:
    settings = Settings.from_env({})
    assert settings.database_url == f"sqlite:///{data_dir / 'loadline.db'}"
    assert settings.is_sqlite


def test_environment_values_are_read_and_parsed() -> None:
    settings = Settings.from_env(
        {
            "DATABASE_URL": "postgresql+psycopg://planner@db.example:5432/loadline",
            "LOADLINE_RESOLUTION": "0.25",
            "LOADLINE_MAX_BODY_BYTES": "1000",
            "LOADLINE_SQLITE_BUSY_TIMEOUT_MS": "250",
        }
    )
    assert settings.database_url == "postgresql+psycopg://planner@db.example:5432/loadline"
    assert not settings.is_sqlite
    assert settings.resolution_days == 0.25
    assert settings.max_body_bytes == 1000
    assert settings.sqlite_busy_timeout_ms == 250


def test_explicit_overrides_win_over_the_environment() -> None:
    settings = Settings.from_env({"DATABASE_URL": "sqlite:///a.db"}, database_url="sqlite:///b.db")
    assert settings.database_url == "sqlite:///b.db"


@pytest.mark.parametrize(
    ("env", "named"),
    [
        ({"LOADLINE_MAX_BODY_BYTES": "lots"}, "LOADLINE_MAX_BODY_BYTES"),
        ({"LOADLINE_RESOLUTION": "half"}, "LOADLINE_RESOLUTION"),
        ({"LOADLINE_RESOLUTION": "0"}, "LOADLINE_RESOLUTION"),
        ({"LOADLINE_RESOLUTION": "-0.5"}, "LOADLINE_RESOLUTION"),
        ({"LOADLINE_RESOLUTION": "11"}, "LOADLINE_RESOLUTION"),
        ({"LOADLINE_ENV": "staging"}, "LOADLINE_ENV"),
        ({"LOADLINE_SQLITE_BUSY_TIMEOUT_MS": "5s"}, "LOADLINE_SQLITE_BUSY_TIMEOUT_MS"),
    ],
)
def test_bad_environment_values_are_refused_by_name(env: dict[str, str], named: str) -> None:
    with pytest.raises(ValueError, match=named):
        Settings.from_env(env)


def test_sqlite_connections_get_wal_foreign_keys_and_the_busy_timeout(
    settings: Settings,
) -> None:
    if not settings.is_sqlite:
        pytest.skip("SQLite pragmas only")
    engine = make_engine(dataclasses.replace(settings, sqlite_busy_timeout_ms=1234))
    with engine.connect() as conn:
        assert conn.execute(text("PRAGMA journal_mode")).scalar() == "wal"
        assert conn.execute(text("PRAGMA foreign_keys")).scalar() == 1
        assert conn.execute(text("PRAGMA busy_timeout")).scalar() == 1234
    engine.dispose()
