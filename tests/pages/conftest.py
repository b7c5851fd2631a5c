"""Clients signed in with a given role, for the pages' role checks."""

from __future__ import annotations

from collections.abc import Iterator

import pytest
from fastapi import FastAPI
from fastapi.testclient import TestClient

from tests.conftest import bearer


@pytest.fixture
def viewer(app: FastAPI) -> Iterator[TestClient]:
    with TestClient(app, headers=bearer("viewer")) as client:
        yield client


@pytest.fixture
def editor(app: FastAPI) -> Iterator[TestClient]:
    with TestClient(app, headers=bearer("editor")) as client:
        yield client
