"""Property-based fuzzing of every operation in the app's own OpenAPI document.

Schemathesis generates requests from /openapi.json and sends them in-process (ASGI) as the
admin account. Every answer must be free of server errors and must match the documented
response schema. The run is bounded and derandomized so that CI sees the same cases every time.
"""

from __future__ import annotations

import re
import shutil
import uuid
from collections.abc import Iterator

import pytest
import schemathesis
from fastapi import FastAPI
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from schemathesis.checks import not_a_server_error, response_schema_conformance
from sqlmodel import Session

from server import demo
from server.app import create_app
from tests.conftest import (
    POSTGRES_ADMIN_URL,
    _postgres_admin,
    _postgres_url,
    bearer,
    make_settings,
)

EXAMPLES_PER_OPERATION = 15
# Ids of a freshly loaded demo workspace are small, so path ids are often drawn from this range
# to reach stored rows rather than only 404 answers.
STORED_ID_RANGE = (1, 40)
PATH_PARAMETER = re.compile(r"\{(\w+)\}")
CHECKS = [not_a_server_error, response_schema_conformance]


def _operation_labels() -> list[tuple[str, str]]:
    """(method, path) of every documented operation; deletions last so they remove less."""
    document = create_app(make_settings("sqlite://")).openapi()
    labels = [
        (method.upper(), path)
        for path, methods in document["paths"].items()
        for method in methods
        if method in {"get", "post", "put", "patch", "delete"}
    ]
    return sorted(labels, key=lambda label: label[0] == "DELETE")


OPERATIONS = _operation_labels()


@pytest.fixture(scope="module")
def fuzz_app(database_template: str, tmp_path_factory: pytest.TempPathFactory) -> Iterator[FastAPI]:
    """One application on its own copy of the migrated database, holding the demo workspace."""
    if POSTGRES_ADMIN_URL:
        name = f"loadline_fuzz_{uuid.uuid4().hex[:8]}"
        _postgres_admin(f'CREATE DATABASE "{name}" TEMPLATE "{database_template}"')
        url = _postgres_url(name)
    else:
        path = tmp_path_factory.mktemp("fuzz") / "loadline.db"
        shutil.copyfile(database_template, path)
        url = f"sqlite:///{path}"
    application = create_app(make_settings(url))
    with Session(application.state.engine) as session:
        demo.load(session)
        session.commit()
    yield application
    application.state.engine.dispose()
    if POSTGRES_ADMIN_URL:
        _postgres_admin(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)')


@pytest.fixture(scope="module")
def fuzz_schema(fuzz_app: FastAPI) -> schemathesis.BaseSchema:
    return schemathesis.openapi.from_asgi("/openapi.json", fuzz_app, headers=bearer("admin"))


def test_every_operation_is_fuzzed() -> None:
    # A guard against the document shrinking unnoticed (e.g. routes dropped from the schema).
    assert len(OPERATIONS) >= 40


@pytest.mark.parametrize(("method", "path"), OPERATIONS, ids=[f"{m} {p}" for m, p in OPERATIONS])
def test_operation_answers_without_server_error_and_as_documented(
    fuzz_schema: schemathesis.BaseSchema, method: str, path: str
) -> None:
    operation = fuzz_schema[path][method]
    id_names = [name for name in PATH_PARAMETER.findall(path) if name.endswith("_id")]
    headers = bearer("admin")

    @settings(
        max_examples=EXAMPLES_PER_OPERATION,
        deadline=None,
        derandomize=True,
        database=None,
        suppress_health_check=list(HealthCheck),
    )
    @given(case=operation.as_strategy(), data=st.data())
    def run(case: schemathesis.Case, data: st.DataObject) -> None:
        for name in id_names:
            stored = st.integers(*STORED_ID_RANGE)
            case.path_parameters[name] = data.draw(stored | st.just(case.path_parameters[name]))
        case.call_and_validate(headers=headers, checks=CHECKS)

    run()
