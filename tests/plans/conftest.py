"""Fixtures of the plan tests: a small team and period with initiatives, made through the
persistence layer, and helpers to edit, publish and read pages."""

from __future__ import annotations

from dataclasses import dataclass
from html.parser import HTMLParser
from typing import Any

import httpx
import pytest
from fastapi.testclient import TestClient
from sqlmodel import Session, func, select

from server.models import (
    AuditEntry,
    Initiative,
    Member,
    Period,
    Publication,
    SavedPlan,
    Scenario,
    Team,
)
from server.schemas import EffortIn, InitiativeCreate, InitiativeUpdate
from server.store.initiatives import (
    InitiativeRecord,
    create_initiative,
    get_initiative,
    update_initiative,
)
from tests.factories import make_member, make_period, make_team, set_days_off


@dataclass
class Workspace:
    team: Team
    period: Period
    members: list[Member]
    initiatives: dict[str, InitiativeRecord]

    @property
    def team_id(self) -> int:
        return self.team.id or 0

    @property
    def period_id(self) -> int:
        return self.period.id or 0

    def id_of(self, title: str) -> int:
        return self.initiatives[title].row.id or 0


# title -> (low, likely, high, value); low and high None: a single estimate.
INITIATIVES: dict[str, tuple[float | None, float, float | None, float]] = {
    "Route search": (2.0, 3.0, 5.0, 12.0),
    "Stop alerts": (None, 2.0, None, 7.0),
    "Fare capping": (3.0, 4.0, 8.0, 15.0),
    "Depot dashboard": (None, 5.0, None, 9.0),
    "Offline timetable": (1.0, 1.5, 3.0, 4.0),
    "Accessibility audit": (None, 2.5, None, 8.0),
}
# Worked example: two full-time members, 10 working days (Mon 1 to Fri 12 March 2027), Ines
# 2 days off: (10 + 8) x focus 0.7 = 12.6; minus reserve 15 % (1.89) = 10.71 days.
EXPECTED_CAPACITY = (10 + 8) * 0.7 * (1 - 0.15)


def add_initiative(
    session: Session,
    team: Team,
    period: Period,
    title: str,
    likely: float,
    value: float,
    low: float | None = None,
    high: float | None = None,
    **fields: object,
) -> InitiativeRecord:
    return create_initiative(
        session,
        initiative_in=InitiativeCreate(
            team_id=team.id or 0,
            period_id=period.id,
            title=title,
            effort=EffortIn(likely=likely, low=low, high=high),
            value=value,
            **fields,  # type: ignore[arg-type]
        ),
    )


def build_workspace(session: Session, name: str = "Harbour") -> Workspace:
    team = make_team(session, name)
    period = make_period(session, name=f"Sprint of {name}")
    members = [make_member(session, team, "Ola"), make_member(session, team, "Ines")]
    set_days_off(session, members[1], period, 2)
    records = {
        title: add_initiative(session, team, period, title, likely, value, low, high)
        for title, (low, likely, high, value) in INITIATIVES.items()
    }
    return Workspace(team=team, period=period, members=members, initiatives=records)


@pytest.fixture
def workspace(session: Session) -> Workspace:
    return build_workspace(session)


def edit(session: Session, initiative_id: int, **changes: object) -> InitiativeRecord:
    """Change an initiative through the persistence layer, based on its current version."""
    current = get_initiative(session, initiative_id=initiative_id)
    return update_initiative(
        session,
        initiative_id=initiative_id,
        initiative_in=InitiativeUpdate(version=current.row.version, **changes),  # type: ignore[arg-type]
    )


def counts(session: Session) -> dict[str, int]:
    """Rows per table this feature writes, to show a refused request changed nothing."""
    session.expire_all()
    return {
        model.__name__: int(session.exec(select(func.count()).select_from(model)).one())
        for model in (SavedPlan, Scenario, Publication, AuditEntry, Initiative)
    }


def error_items(response: httpx.Response) -> list[dict[str, Any]]:
    """The errors of an answer: a list of field errors, or one domain error."""
    detail = response.json()["detail"]
    return detail if isinstance(detail, list) else [detail]


def error_fields(response: httpx.Response) -> list[str]:
    return [str(item.get("field")) for item in error_items(response)]


def error_text(response: httpx.Response) -> str:
    return " ".join(str(item.get("msg") or item.get("message")) for item in error_items(response))


def post_scenario_form(
    client: TestClient, team_id: int, period_id: int, **fields: str
) -> httpx.Response:
    """Send the new-scenario form as a browser would (redirects not followed)."""
    return client.post(
        f"/teams/{team_id}/scenarios",
        data={"csrf_token": client.csrf, "period_id": str(period_id), **fields},  # type: ignore[attr-defined]
        follow_redirects=False,
    )


def save_live(client: TestClient, ws: Workspace, name: str = "Baseline", **body: object) -> dict:
    response = client.post(
        "/api/v1/plans",
        json={"name": name, "team_id": ws.team_id, "period_id": ws.period_id, **body},
    )
    assert response.status_code == 201, response.text
    return response.json()


def publish(client: TestClient, plan_id: int) -> dict:
    response = client.post(f"/api/v1/plans/{plan_id}/publications")
    assert response.status_code == 201, response.text
    return response.json()


class LinkCollector(HTMLParser):
    """Every URL-bearing attribute and every tag of a page."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.urls: list[tuple[str, str, str]] = []  # (tag, attribute, value)
        self.tags: list[str] = []
        self.metas: list[dict[str, str]] = []

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self.tags.append(tag)
        values = {k: v or "" for k, v in attrs}
        if tag == "meta":
            self.metas.append(values)
        for name in ("href", "src", "action", "formaction", "hx-get", "hx-post", "data"):
            if name in values:
                self.urls.append((tag, name, values[name]))


def collect(html: str) -> LinkCollector:
    collector = LinkCollector()
    collector.feed(html)
    return collector
