"""Bad input on every endpoint: the right status, the field named, and nothing stored.

Every case is sent to one application holding one small workspace, built once for this module
(each case must leave it as it was, so sharing it is part of the check). A snapshot of every row
of every table is taken before each case and compared after, so a refused request that changed
anything fails.
"""

from __future__ import annotations

import shutil
import uuid
from collections.abc import Iterator
from dataclasses import asdict, dataclass
from string import Template
from typing import Any

import pytest
from fastapi import FastAPI
from fastapi.testclient import TestClient
from sqlmodel import Session

from server.app import create_app
from tests.api.conftest import Workspace, build_workspace, read_snapshot
from tests.api.support import error_fields, error_items
from tests.conftest import (
    POSTGRES_ADMIN_URL,
    _postgres_admin,
    _postgres_url,
    bearer,
    make_settings,
)


@dataclass(frozen=True)
class Ref:
    """A stored row's id, filled in from the workspace when the case runs."""

    name: str


TEAM, OTHER_TEAM, MEMBER, PERIOD = Ref("team"), Ref("other_team"), Ref("member"), Ref("period")
INITIATIVE, DEPENDANT = Ref("initiative"), Ref("dependant")


@dataclass(frozen=True)
class Case:
    method: str
    path: str  # $team, $period ... are replaced by workspace ids
    body: Any  # a JSON-able value with Refs, or raw text sent as application/json
    status: int
    field: str  # the field the answer must name (a prefix for list items: "needs" ~ "needs.0")


def _resolve(value: Any, ids: dict[str, int]) -> Any:
    if isinstance(value, Ref):
        return ids[value.name]
    if isinstance(value, dict):
        return {key: _resolve(item, ids) for key, item in value.items()}
    if isinstance(value, list):
        return [_resolve(item, ids) for item in value]
    return value


HUGE = 2**31  # one past the largest INTEGER id
PERIOD_OK = {"name": "Sprint 9", "kind": "sprint", "start_date": "2027-05-03"}
PERIOD_OK_END = PERIOD_OK | {"end_date": "2027-05-14"}
MEMBER_OK = {"team_id": TEAM, "name": "Eli"}
AVAILABILITY_OK = {"member_id": MEMBER, "period_id": PERIOD}
CAPACITY = "/api/v1/teams/$team/periods/$period/capacity"
SETTINGS = {"focus_factor": 0.7, "reserve_pct": 15}
INITIATIVE_OK = {"team_id": TEAM, "period_id": PERIOD, "title": "Fenders", "value": 5}


def _initiative(**fields: Any) -> dict[str, Any]:
    return INITIATIVE_OK | {"effort": {"likely": 3}} | fields


def _effort(**effort: Any) -> dict[str, Any]:
    return INITIATIVE_OK | {"effort": effort}


def _patch(**fields: Any) -> dict[str, Any]:
    return {"version": 1} | fields


RAW_INITIATIVE = (
    '{"team_id": $team, "period_id": $period, "title": "Raw", "value": 5, "effort": %s}'
)

CASES: dict[str, Case] = {
    # --- teams -------------------------------------------------------------------------
    "team name blank": Case("POST", "/api/v1/teams", {"name": ""}, 422, "name"),
    "team name only spaces": Case("POST", "/api/v1/teams", {"name": "   "}, 422, "name"),
    "team name 81 chars": Case("POST", "/api/v1/teams", {"name": "t" * 81}, 422, "name"),
    "team name missing": Case("POST", "/api/v1/teams", {}, 422, "name"),
    "team name a number": Case("POST", "/api/v1/teams", {"name": 7}, 422, "name"),
    "team unknown field": Case(
        "POST", "/api/v1/teams", {"name": "Tug", "colour": "red"}, 422, "colour"
    ),
    "team spread NaN": Case(
        "POST", "/api/v1/teams", '{"name": "Tug", "default_spread": NaN}', 422, "default_spread"
    ),
    "team spread 1": Case(
        "POST", "/api/v1/teams", {"name": "Tug", "default_spread": 1}, 422, "default_spread"
    ),
    "team duplicate": Case("POST", "/api/v1/teams", {"name": "harbour"}, 409, "name"),
    "team rename 81 chars": Case("PATCH", "/api/v1/teams/$team", {"name": "t" * 81}, 422, "name"),
    "team rename duplicate": Case(
        "PATCH", "/api/v1/teams/$other_team", {"name": "HARBOUR"}, 409, "name"
    ),
    "team unknown id": Case("PATCH", "/api/v1/teams/4711", {"name": "Tug"}, 404, "team_id"),
    "team id not a number": Case("GET", "/api/v1/teams/first", None, 422, "team_id"),
    "body not JSON": Case("POST", "/api/v1/teams", "{name: Tug", 422, "body"),
    "body a list": Case("POST", "/api/v1/teams", [{"name": "Tug"}], 422, "body"),
    # --- members -----------------------------------------------------------------------
    "member allocation 0": Case(
        "POST", "/api/v1/members", MEMBER_OK | {"allocation": 0}, 422, "allocation"
    ),
    "member allocation 1.5": Case(
        "POST", "/api/v1/members", MEMBER_OK | {"allocation": 1.5}, 422, "allocation"
    ),
    "member allocation text": Case(
        "POST", "/api/v1/members", MEMBER_OK | {"allocation": "half"}, 422, "allocation"
    ),
    "member allocation 'nan'": Case(
        "POST", "/api/v1/members", MEMBER_OK | {"allocation": "nan"}, 422, "allocation"
    ),
    "member allocation true": Case(
        "POST", "/api/v1/members", MEMBER_OK | {"allocation": True}, 422, "allocation"
    ),
    "member name 81 chars": Case(
        "POST", "/api/v1/members", MEMBER_OK | {"name": "m" * 81}, 422, "name"
    ),
    "member duplicate": Case("POST", "/api/v1/members", MEMBER_OK | {"name": "ola"}, 409, "name"),
    "member unknown team": Case(
        "POST", "/api/v1/members", MEMBER_OK | {"team_id": 4711}, 404, "team_id"
    ),
    "member team id text": Case(
        "POST", "/api/v1/members", MEMBER_OK | {"team_id": "Harbour"}, 422, "team_id"
    ),
    "member update allocation -1": Case(
        "PATCH", "/api/v1/members/$member", {"allocation": -1}, 422, "allocation"
    ),
    "member update unknown field": Case(
        "PATCH", "/api/v1/members/$member", {"team_id": OTHER_TEAM}, 422, "team_id"
    ),
    # --- periods -----------------------------------------------------------------------
    "period end before start": Case(
        "POST", "/api/v1/periods", PERIOD_OK | {"end_date": "2027-05-02"}, 422, "end_date"
    ),
    "period over 400 days": Case(
        "POST", "/api/v1/periods", PERIOD_OK | {"end_date": "2028-06-06"}, 422, "end_date"
    ),
    "period non-working date outside": Case(
        "POST",
        "/api/v1/periods",
        PERIOD_OK_END | {"non_working_dates": ["2027-05-17"]},
        422,
        "non_working_dates",
    ),
    "period non-working date impossible": Case(
        "POST",
        "/api/v1/periods",
        PERIOD_OK_END | {"non_working_dates": ["2027-02-30"]},
        422,
        "non_working_dates",
    ),
    "period start not a date": Case(
        "POST", "/api/v1/periods", PERIOD_OK_END | {"start_date": "next Monday"}, 422, "start_date"
    ),
    "period end missing": Case("POST", "/api/v1/periods", PERIOD_OK, 422, "end_date"),
    "period kind unknown": Case(
        "POST", "/api/v1/periods", PERIOD_OK_END | {"kind": "month"}, 422, "kind"
    ),
    "period weekmask short": Case(
        "POST", "/api/v1/periods", PERIOD_OK_END | {"weekmask": "11111"}, 422, "weekmask"
    ),
    "period weekmask no day": Case(
        "POST", "/api/v1/periods", PERIOD_OK_END | {"weekmask": "0000000"}, 422, "weekmask"
    ),
    "period name 81 chars": Case(
        "POST", "/api/v1/periods", PERIOD_OK_END | {"name": "p" * 81}, 422, "name"
    ),
    "period duplicate": Case(
        "POST", "/api/v1/periods", PERIOD_OK_END | {"name": "SPRINT 1"}, 409, "name"
    ),
    "period update end before start": Case(
        "PATCH", "/api/v1/periods/$period", {"end_date": "2027-02-26"}, 422, "end_date"
    ),
    "period update over 400 days": Case(
        "PATCH", "/api/v1/periods/$period", {"end_date": "2028-04-05"}, 422, "end_date"
    ),
    "period update date outside": Case(
        "PATCH",
        "/api/v1/periods/$period",
        {"non_working_dates": ["2027-04-01"]},
        422,
        "non_working_dates",
    ),
    "period update unknown": Case("PATCH", "/api/v1/periods/4711", {"name": "x"}, 404, "period_id"),
    # --- availability ------------------------------------------------------------------
    "days off negative": Case(
        "POST", "/api/v1/availability", AVAILABILITY_OK | {"days_off": -1}, 422, "days_off"
    ),
    "days off over working days": Case(
        "POST", "/api/v1/availability", AVAILABILITY_OK | {"days_off": 11}, 422, "days_off"
    ),
    "days off absurd": Case(
        "POST", "/api/v1/availability", AVAILABILITY_OK | {"days_off": 1e12}, 422, "days_off"
    ),
    "days off Infinity": Case(
        "POST",
        "/api/v1/availability",
        '{"member_id": $member, "period_id": $period, "days_off": Infinity}',
        422,
        "days_off",
    ),
    "days off 'inf'": Case(
        "POST", "/api/v1/availability", AVAILABILITY_OK | {"days_off": "inf"}, 422, "days_off"
    ),
    "days off text": Case(
        "POST", "/api/v1/availability", AVAILABILITY_OK | {"days_off": "a week"}, 422, "days_off"
    ),
    "availability share 0": Case(
        "POST", "/api/v1/availability", AVAILABILITY_OK | {"allocation": 0}, 422, "allocation"
    ),
    "availability unknown member": Case(
        "POST", "/api/v1/availability", AVAILABILITY_OK | {"member_id": 4711}, 404, "member_id"
    ),
    "availability unknown period": Case(
        "POST", "/api/v1/availability", AVAILABILITY_OK | {"period_id": 4711}, 404, "period_id"
    ),
    "availability with a reason": Case(
        "POST", "/api/v1/availability", AVAILABILITY_OK | {"reason": "ill"}, 422, "reason"
    ),
    "availability update over working days": Case(
        "PATCH", "/api/v1/availability/$availability", {"days_off": 10.5}, 422, "days_off"
    ),
    "availability update NaN": Case(
        "PATCH", "/api/v1/availability/$availability", '{"days_off": NaN}', 422, "days_off"
    ),
    # --- capacity settings -------------------------------------------------------------
    "focus factor 0": Case(
        "PUT", CAPACITY, {"focus_factor": 0, "reserve_pct": 15}, 422, "focus_factor"
    ),
    "focus factor 1.5": Case(
        "PUT", CAPACITY, {"focus_factor": 1.5, "reserve_pct": 15}, 422, "focus_factor"
    ),
    "focus factor -1": Case(
        "PUT", CAPACITY, {"focus_factor": -1, "reserve_pct": 15}, 422, "focus_factor"
    ),
    "focus factor NaN": Case(
        "PUT", CAPACITY, '{"focus_factor": NaN, "reserve_pct": 15}', 422, "focus_factor"
    ),
    "focus factor text": Case(
        "PUT", CAPACITY, {"focus_factor": "high", "reserve_pct": 15}, 422, "focus_factor"
    ),
    "reserve 100": Case(
        "PUT", CAPACITY, {"focus_factor": 0.7, "reserve_pct": 100}, 422, "reserve_pct"
    ),
    "reserve -5": Case(
        "PUT", CAPACITY, {"focus_factor": 0.7, "reserve_pct": -5}, 422, "reserve_pct"
    ),
    "reserve 'nan'": Case(
        "PUT", CAPACITY, {"focus_factor": 0.7, "reserve_pct": "nan"}, 422, "reserve_pct"
    ),
    "capacity unknown field": Case(
        "PUT", CAPACITY, {"focus_factor": 0.7, "reserve_pct": 15, "overtime": 2}, 422, "overtime"
    ),
    "capacity unknown period": Case(
        "PUT", "/api/v1/teams/$team/periods/4711/capacity", SETTINGS, 404, "period_id"
    ),
    # --- initiatives -------------------------------------------------------------------
    "effort NaN": Case(
        "POST", "/api/v1/initiatives", RAW_INITIATIVE % '{"likely": NaN}', 422, "effort.likely"
    ),
    "effort bare NaN": Case("POST", "/api/v1/initiatives", RAW_INITIATIVE % "NaN", 422, "effort"),
    "effort 'nan'": Case(
        "POST", "/api/v1/initiatives", _effort(likely="nan"), 422, "effort.likely"
    ),
    "effort -Infinity": Case(
        "POST",
        "/api/v1/initiatives",
        RAW_INITIATIVE % '{"likely": -Infinity}',
        422,
        "effort.likely",
    ),
    "effort 'abc'": Case(
        "POST", "/api/v1/initiatives", _effort(likely="abc"), 422, "effort.likely"
    ),
    "effort -3": Case("POST", "/api/v1/initiatives", _effort(likely=-3), 422, "effort.likely"),
    "effort 0": Case("POST", "/api/v1/initiatives", _effort(likely=0), 422, "effort.likely"),
    "effort absurd": Case("POST", "/api/v1/initiatives", _effort(likely=1e9), 422, "effort.likely"),
    "effort true": Case("POST", "/api/v1/initiatives", _effort(likely=True), 422, "effort.likely"),
    "effort a string": Case(
        "POST", "/api/v1/initiatives", _initiative(effort="3 days"), 422, "effort"
    ),
    "effort missing": Case("POST", "/api/v1/initiatives", INITIATIVE_OK, 422, "effort"),
    "low above likely": Case(
        "POST", "/api/v1/initiatives", _effort(low=4, likely=3, high=5), 422, "effort.low"
    ),
    "likely above high": Case(
        "POST", "/api/v1/initiatives", _effort(low=1, likely=6, high=5), 422, "effort.high"
    ),
    "low without high": Case(
        "POST", "/api/v1/initiatives", _effort(low=1, likely=3), 422, "effort.high"
    ),
    "high without low": Case(
        "POST", "/api/v1/initiatives", _effort(likely=3, high=5), 422, "effort.low"
    ),
    "effort unknown field": Case(
        "POST", "/api/v1/initiatives", _effort(likely=3, best=2), 422, "effort.best"
    ),
    "title blank": Case("POST", "/api/v1/initiatives", _initiative(title=" "), 422, "title"),
    "title 201 chars": Case(
        "POST", "/api/v1/initiatives", _initiative(title="i" * 201), 422, "title"
    ),
    "notes 4001 chars": Case(
        "POST", "/api/v1/initiatives", _initiative(notes="n" * 4001), 422, "notes"
    ),
    "either-or 81 chars": Case(
        "POST", "/api/v1/initiatives", _initiative(either_or="e" * 81), 422, "either_or"
    ),
    "value 0": Case("POST", "/api/v1/initiatives", _initiative(value=0), 422, "value"),
    "value negative": Case("POST", "/api/v1/initiatives", _initiative(value=-4), 422, "value"),
    "value text": Case("POST", "/api/v1/initiatives", _initiative(value="high"), 422, "value"),
    "value Infinity": Case(
        "POST",
        "/api/v1/initiatives",
        '{"team_id": $team, "title": "Raw", "effort": 2, "value": Infinity}',
        422,
        "value",
    ),
    "confidence 1.5": Case(
        "POST", "/api/v1/initiatives", _initiative(confidence=1.5), 422, "confidence"
    ),
    "state unknown": Case("POST", "/api/v1/initiatives", _initiative(state="done"), 422, "state"),
    "initiative unknown field": Case(
        "POST", "/api/v1/initiatives", _initiative(priority="P1"), 422, "priority"
    ),
    "initiative unknown team": Case(
        "POST", "/api/v1/initiatives", _initiative(team_id=4711), 422, "team_id"
    ),
    "initiative unknown period": Case(
        "POST", "/api/v1/initiatives", _initiative(period_id=4711), 422, "period_id"
    ),
    "needs not a list": Case("POST", "/api/v1/initiatives", _initiative(needs="1,2"), 422, "needs"),
    "needs not ids": Case("POST", "/api/v1/initiatives", _initiative(needs=["Quay"]), 422, "needs"),
    "needs unknown id": Case(
        "POST", "/api/v1/initiatives", _initiative(needs=[4711]), 422, "needs"
    ),
    "other effort for the owner": Case(
        "POST",
        "/api/v1/initiatives",
        _initiative(other_efforts=[{"team_id": TEAM, "likely": 2}]),
        422,
        "other_efforts",
    ),
    "other effort unknown team": Case(
        "POST",
        "/api/v1/initiatives",
        _initiative(other_efforts=[{"team_id": 4711, "likely": 2}]),
        422,
        "other_efforts",
    ),
    "other effort negative": Case(
        "POST",
        "/api/v1/initiatives",
        _initiative(other_efforts=[{"team_id": OTHER_TEAM, "likely": -2}]),
        422,
        "other_efforts",
    ),
    "other effort twice": Case(
        "POST",
        "/api/v1/initiatives",
        _initiative(
            other_efforts=[
                {"team_id": OTHER_TEAM, "likely": 2},
                {"team_id": OTHER_TEAM, "likely": 3},
            ]
        ),
        422,
        "other_efforts",
    ),
    "update without version": Case(
        "PATCH", "/api/v1/initiatives/$initiative", {"title": "New"}, 422, "version"
    ),
    "update version 0 (versions start at 1)": Case(
        "PATCH", "/api/v1/initiatives/$initiative", {"version": 0, "title": "New"}, 422, "version"
    ),
    "update needs cycle": Case(
        "PATCH", "/api/v1/initiatives/$initiative", _patch(needs=[DEPENDANT]), 422, "needs"
    ),
    "update needs itself": Case(
        "PATCH", "/api/v1/initiatives/$initiative", _patch(needs=[INITIATIVE]), 422, "needs"
    ),
    "update effort 'inf'": Case(
        "PATCH",
        "/api/v1/initiatives/$initiative",
        _patch(effort={"likely": "inf"}),
        422,
        "effort.likely",
    ),
    "update low above likely": Case(
        "PATCH",
        "/api/v1/initiatives/$initiative",
        _patch(effort={"low": 9, "likely": 3, "high": 12}),
        422,
        "effort.low",
    ),
    "update title 201 chars": Case(
        "PATCH", "/api/v1/initiatives/$initiative", _patch(title="i" * 201), 422, "title"
    ),
    "update unknown period": Case(
        "PATCH", "/api/v1/initiatives/$initiative", _patch(period_id=4711), 422, "period_id"
    ),
    "update unknown field": Case(
        "PATCH", "/api/v1/initiatives/$initiative", _patch(team_id=OTHER_TEAM), 422, "team_id"
    ),
    "update unknown initiative": Case(
        "PATCH", "/api/v1/initiatives/4711", _patch(title="New"), 404, "initiative_id"
    ),
    "list period not a number": Case(
        "GET", "/api/v1/initiatives?period_id=first", None, 422, "period_id"
    ),
    "list scope unknown": Case("GET", "/api/v1/initiatives?scope=everything", None, 422, "scope"),
    # --- deleting what is still used --------------------------------------------------------
    "delete a needed initiative": Case(
        "DELETE", "/api/v1/initiatives/$initiative", None, 409, "initiative_id"
    ),
    "delete a period in use": Case("DELETE", "/api/v1/periods/$period", None, 409, "period_id"),
    # --- ids no INTEGER column can hold: refused naming the field, not looked up ------------
    "member team id too large": Case(
        "POST", "/api/v1/members", MEMBER_OK | {"team_id": HUGE}, 422, "team_id"
    ),
    "availability member id too large": Case(
        "POST", "/api/v1/availability", AVAILABILITY_OK | {"member_id": HUGE}, 422, "member_id"
    ),
    "initiative team id too large": Case(
        "POST", "/api/v1/initiatives", _initiative(team_id=HUGE), 422, "team_id"
    ),
    "initiative period id too large": Case(
        "POST", "/api/v1/initiatives", _initiative(period_id=HUGE), 422, "period_id"
    ),
    "initiative needs an id too large": Case(
        "POST", "/api/v1/initiatives", _initiative(needs=[HUGE]), 422, "needs"
    ),
    "initiative other team id too large": Case(
        "POST",
        "/api/v1/initiatives",
        _initiative(other_efforts=[{"team_id": HUGE, "likely": 2}]),
        422,
        "other_efforts",
    ),
    "update version -1": Case(
        "PATCH", "/api/v1/initiatives/$initiative", {"version": -1, "value": 2}, 422, "version"
    ),
    "update version too large": Case(
        "PATCH", "/api/v1/initiatives/$initiative", {"version": HUGE, "value": 2}, 422, "version"
    ),
    "update needs an id 0": Case(
        "PATCH", "/api/v1/initiatives/$initiative", _patch(needs=[0]), 422, "needs"
    ),
}


@pytest.fixture(scope="module")
def shared_app(
    database_template: str, tmp_path_factory: pytest.TempPathFactory
) -> Iterator[FastAPI]:
    """One application on its own copy of the migrated database, for the whole table."""
    if POSTGRES_ADMIN_URL:
        name = f"loadline_bad_input_{uuid.uuid4().hex[:8]}"
        _postgres_admin(f'CREATE DATABASE "{name}" TEMPLATE "{database_template}"')
        url = _postgres_url(name)
    else:
        path = tmp_path_factory.mktemp("bad_input") / "loadline.db"
        shutil.copyfile(database_template, path)
        url = f"sqlite:///{path}"
    application = create_app(make_settings(url))
    yield application
    application.state.engine.dispose()
    if POSTGRES_ADMIN_URL:
        _postgres_admin(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)')


@pytest.fixture(scope="module")
def shared_workspace(shared_app: FastAPI) -> Workspace:
    with Session(shared_app.state.engine, expire_on_commit=False) as session:
        return build_workspace(session)


@pytest.fixture(scope="module")
def shared_client(shared_app: FastAPI, shared_workspace: Workspace) -> Iterator[TestClient]:
    with TestClient(shared_app, headers=bearer("admin")) as test_client:
        yield test_client


def test_the_table_is_large_enough() -> None:
    assert len(CASES) >= 40


@pytest.mark.parametrize("case", CASES.values(), ids=CASES.keys())
def test_bad_input_is_refused_and_changes_nothing(
    shared_app: FastAPI, shared_client: TestClient, shared_workspace: Workspace, case: Case
) -> None:
    client = shared_client
    ids = asdict(shared_workspace)
    path = Template(case.path).substitute(ids)
    before = read_snapshot(shared_app.state.engine)
    if isinstance(case.body, str):
        response = client.request(
            case.method,
            path,
            content=Template(case.body).substitute(ids),
            headers={"content-type": "application/json"},
        )
    else:
        response = client.request(case.method, path, json=_resolve(case.body, ids))

    assert response.status_code == case.status, response.text
    fields = error_fields(response)
    assert any(f == case.field or f.startswith(case.field + ".") for f in fields), fields
    for item in error_items(response):
        message = str(item.get("msg") or item.get("message") or "")
        assert message.strip(), "an error without a message"
        if "loc" in item:  # validation errors: the location ends with the named field
            assert item["field"].split(".")[-1] in [str(part) for part in item["loc"]], item
    assert read_snapshot(shared_app.state.engine) == before
