"""Settings read from the environment, each with its help text.

Nothing here runs at import time: `Settings.from_env()` is called by the application factory and
the command line, so each test can build its own settings.
"""

from __future__ import annotations

import os
import secrets
from dataclasses import dataclass, field, fields, replace
from pathlib import Path

PROJECT_ROOT = Path(__file__).resolve().parent.parent
DEFAULT_DATA_DIR = PROJECT_ROOT / "data"
MIN_SECRET_LENGTH = 32
_PLACEHOLDER_SECRETS = {"", "change-me", "changeme", "secret", "dev"}


def _setting(default: object, help_text: str, env: str) -> object:
    return field(default=default, metadata={"help": help_text, "env": env})


@dataclass(frozen=True)
class Settings:
    """Runtime settings; every field is documented in DEVELOPERS.md (a test checks that)."""

    database_url: str = _setting(
        "",
        "SQLAlchemy URL of the database. Empty: an SQLite file data/loadline.db under the "
        "project folder. PostgreSQL: postgresql+psycopg://user@host:port/dbname.",
        "DATABASE_URL",
    )  # type: ignore[assignment]
    secret_key: str = _setting(
        "",
        "Secret used to sign CSRF tokens. Empty in development: a random key kept in "
        "data/secret_key and shared by every worker. Required when LOADLINE_ENV=production.",
        "LOADLINE_SECRET_KEY",
    )  # type: ignore[assignment]
    environment: str = _setting(
        "development",
        "development or production. Production refuses to start without a real secret key.",
        "LOADLINE_ENV",
    )  # type: ignore[assignment]
    resolution_days: float = _setting(
        0.5,
        "Effort grain, in days, that the selector plans in (efforts round up, capacity down).",
        "LOADLINE_RESOLUTION",
    )  # type: ignore[assignment]
    max_body_bytes: int = _setting(
        2_000_000,
        "Largest request body accepted, in bytes; larger requests get 413.",
        "LOADLINE_MAX_BODY_BYTES",
    )  # type: ignore[assignment]
    sqlite_busy_timeout_ms: int = _setting(
        5000,
        "How long an SQLite connection waits for a lock before reporting the database busy.",
        "LOADLINE_SQLITE_BUSY_TIMEOUT_MS",
    )  # type: ignore[assignment]

    proxy_user_header: str = _setting(
        "",
        "Name of a header carrying the signed-in user name, set by a trusted reverse proxy "
        "(company single sign-on). Empty: off. The user must have a Loadline account.",
        "LOADLINE_PROXY_USER_HEADER",
    )  # type: ignore[assignment]
    trusted_proxies: str = _setting(
        "",
        "Comma-separated addresses of reverse proxies whose user name header is believed; "
        "the header from any other address is ignored.",
        "LOADLINE_TRUSTED_PROXIES",
    )  # type: ignore[assignment]

    @classmethod
    def from_env(cls, environ: dict[str, str] | None = None, **overrides: object) -> Settings:
        """Build settings from environment variables, then apply explicit overrides."""
        env = os.environ if environ is None else environ
        values: dict[str, object] = {}
        for f in fields(cls):
            raw = env.get(f.metadata["env"])
            if raw is None or raw == "":
                continue
            values[f.name] = _parse(f.type, raw, f.metadata["env"])
        values.update(overrides)
        return cls(**values).validated()

    def validated(self) -> Settings:
        """Refuse settings that would run unsafely; fill in development defaults."""
        if self.environment not in {"development", "production"}:
            raise ValueError("LOADLINE_ENV must be 'development' or 'production'")
        if not 0 < self.resolution_days <= 10:
            raise ValueError("LOADLINE_RESOLUTION must be between 0 and 10 days")
        secret = self.secret_key
        if self.environment == "production" and len(secret) < MIN_SECRET_LENGTH:
            raise ValueError(
                f"LOADLINE_SECRET_KEY must be at least {MIN_SECRET_LENGTH} random characters "
                "in production"
            )
        if secret in _PLACEHOLDER_SECRETS:
            if self.environment == "production":
                raise ValueError(
                    "LOADLINE_SECRET_KEY must be set to a long random value in production"
                )
            secret = _local_secret()
        url = self.database_url or f"sqlite:///{DEFAULT_DATA_DIR / 'loadline.db'}"
        return replace(self, database_url=url, secret_key=secret)

    @property
    def is_sqlite(self) -> bool:
        return self.database_url.startswith("sqlite")


def _local_secret() -> str:
    """A development secret kept in the data folder, so every worker process shares it."""
    path = DEFAULT_DATA_DIR / "secret_key"
    if not path.exists():
        path.parent.mkdir(parents=True, exist_ok=True)
        draft = path.with_name(f"secret_key.{os.getpid()}")
        draft.write_text(secrets.token_urlsafe(32))
        draft.chmod(0o600)
        try:
            os.link(draft, path)  # atomic: the first process to get here wins
        except FileExistsError:
            pass
        finally:
            draft.unlink()
    return path.read_text().strip()


def _parse(kind: object, raw: str, name: str) -> object:
    try:
        if kind in (int, "int"):
            return int(raw)
        if kind in (float, "float"):
            return float(raw)
    except ValueError as exc:
        raise ValueError(f"{name} must be a number, got {raw!r}") from exc
    return raw


def documented_settings() -> list[tuple[str, str]]:
    """Environment variable names with their help text, for docs and the docs test."""
    return [(f.metadata["env"], f.metadata["help"]) for f in fields(Settings)]
