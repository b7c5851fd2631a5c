"""Shared fixtures: every test gets its own application on its own fresh database.

The database is migrated once per run into a template (an SQLite file, or a PostgreSQL template
database when LOADLINE_TEST_POSTGRES_URL names a server), then copied for each test.
"""

from __future__ import annotations

import os
import re
import shutil
import uuid
from collections.abc import Callable, Iterator
from pathlib import Path

import pytest
from fastapi import FastAPI
from fastapi.testclient import TestClient
from sqlalchemy import create_engine, text
from sqlalchemy.engine import make_url
from sqlmodel import Session

from server import migrate
from server.app import create_app
from server.config import Settings
from server.db import make_engine
from server.store.users import ROLES, create_user, start_session

POSTGRES_ADMIN_URL = os.environ.get("LOADLINE_TEST_POSTGRES_URL", "")
TEST_SECRET = "test-secret-key-not-for-production"
ACCOUNT_PASSWORD = "a-long-test-password"
# role -> bearer token of the account of that role, filled when the template is made.
ACCOUNT_TOKENS: dict[str, str] = {}
_CSRF_META = re.compile(r'<meta name="csrf-token" content="([0-9a-f]+)">')


def make_settings(database_url: str) -> Settings:
    return Settings.from_env({}, database_url=database_url, secret_key=TEST_SECRET)


def _postgres_url(database: str) -> str:
    return make_url(POSTGRES_ADMIN_URL).set(database=database).render_as_string(hide_password=False)


def _postgres_admin(sql: str) -> None:
    engine = create_engine(POSTGRES_ADMIN_URL, isolation_level="AUTOCOMMIT")
    with engine.connect() as conn:
        conn.execute(text(sql))
    engine.dispose()


@pytest.fixture(scope="session")
def database_template(tmp_path_factory: pytest.TempPathFactory) -> Iterator[str]:
    """A database migrated to head, to copy for each test."""
    if POSTGRES_ADMIN_URL:
        name = f"loadline_template_{uuid.uuid4().hex[:8]}"
        _postgres_admin(f'CREATE DATABASE "{name}"')
        settings = make_settings(_postgres_url(name))
        migrate.upgrade(settings)
        _add_accounts(settings)
        yield name
        _postgres_admin(f'DROP DATABASE IF EXISTS "{name}"')
        return
    path = tmp_path_factory.mktemp("template") / "template.db"
    settings = make_settings(f"sqlite:///{path}")
    migrate.upgrade(settings)
    _add_accounts(settings)
    yield str(path)


def _add_accounts(settings: Settings) -> None:
    """One account per role, with API tokens, in the template (hashing once per run)."""
    engine = make_engine(settings)
    with Session(engine) as session:
        for role in ROLES:
            user = create_user(session, username=role, password=ACCOUNT_PASSWORD, role=role)
            ACCOUNT_TOKENS[role] = start_session(session, user=user, api_token=True)
    engine.dispose()


@pytest.fixture
def database_url(database_template: str, tmp_path: Path) -> Iterator[str]:
    """A fresh database for one test, copied from the migrated template."""
    if POSTGRES_ADMIN_URL:
        name = f"loadline_test_{uuid.uuid4().hex[:10]}"
        _postgres_admin(f'CREATE DATABASE "{name}" TEMPLATE "{database_template}"')
        yield _postgres_url(name)
        _postgres_admin(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)')
        return
    path = tmp_path / "loadline.db"
    shutil.copyfile(database_template, path)
    yield f"sqlite:///{path}"


@pytest.fixture
def empty_database_url(tmp_path: Path) -> Iterator[Callable[[], str]]:
    """A factory of new, empty (not migrated) databases of the kind under test."""
    made: list[str] = []

    def make() -> str:
        if POSTGRES_ADMIN_URL:
            name = f"loadline_empty_{uuid.uuid4().hex[:10]}"
            _postgres_admin(f'CREATE DATABASE "{name}"')
            made.append(name)
            return _postgres_url(name)
        return f"sqlite:///{tmp_path / f'empty-{uuid.uuid4().hex[:8]}.db'}"

    yield make
    for name in made:
        _postgres_admin(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)')


@pytest.fixture
def settings(database_url: str) -> Settings:
    return make_settings(database_url)


@pytest.fixture
def app(settings: Settings) -> Iterator[FastAPI]:
    application = create_app(settings)
    yield application
    application.state.engine.dispose()


@pytest.fixture
def client(app: FastAPI) -> Iterator[TestClient]:
    """A client signed in as the admin account through its bearer token."""
    with TestClient(app, headers=bearer("admin")) as test_client:
        yield test_client


def bearer(role: str) -> dict[str, str]:
    return {"Authorization": f"Bearer {ACCOUNT_TOKENS[role]}"}


@pytest.fixture
def anonymous_client(app: FastAPI) -> Iterator[TestClient]:
    with TestClient(app) as test_client:
        yield test_client


@pytest.fixture
def session(app: FastAPI) -> Iterator[Session]:
    with Session(app.state.engine, expire_on_commit=False) as db_session:
        yield db_session


def csrf_token(client: TestClient, page: str = "/") -> str:
    """Open a page as a browser would and return the form token it carries."""
    response = client.get(page)
    match = _CSRF_META.search(response.text)
    assert match, f"no CSRF token on {page}"
    return match.group(1)


@pytest.fixture
def form_client(client: TestClient) -> TestClient:
    """A client that has opened a page, so its cookie and token are set; token in .csrf."""
    client.csrf = csrf_token(client)  # type: ignore[attr-defined]
    return client
