"""The account commands of the `loadline` command line."""

from __future__ import annotations

import pytest
from fastapi.testclient import TestClient

from server.app import create_app
from server.cli import main
from server.config import Settings


def test_create_user_then_api_token_signs_in(
    settings: Settings, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> None:
    monkeypatch.setenv("DATABASE_URL", settings.database_url)
    monkeypatch.setenv("LOADLINE_NEW_PASSWORD", "a-long-enough-password")
    assert main(["create-user", "Planner", "--role", "editor"]) == 0
    assert "Created editor “Planner”" in capsys.readouterr().out
    assert main(["api-token", "Planner"]) == 0
    token = capsys.readouterr().out.strip().splitlines()[-1]
    app = create_app(settings)
    with TestClient(app, headers={"Authorization": f"Bearer {token}"}) as client:
        assert client.post("/api/v1/teams", json={"name": "Via token"}).status_code == 201
    app.state.engine.dispose()
    assert main(["api-token", "nobody"]) == 2
    assert "No user named “nobody”" in capsys.readouterr().err
    monkeypatch.setenv("LOADLINE_NEW_PASSWORD", "short")
    assert main(["create-user", "Other"]) == 2


def test_a_database_without_tables_is_one_line_not_a_traceback(
    tmp_path, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> None:
    monkeypatch.setenv("DATABASE_URL", f"sqlite:///{tmp_path / 'fresh.db'}")
    assert main(["api-token", "admin"]) == 2
    err = capsys.readouterr().err
    assert err.startswith("loadline: the database is not ready (no such table: user_account)")
    assert "loadline migrate" in err
    assert "Traceback" not in err
