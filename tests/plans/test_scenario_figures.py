"""A scenario's page states one capacity and one headroom: its figures against the live plan
and its Totals agree, in days as entered, and rounding to the resolution is said once."""

from __future__ import annotations

import math

import pytest
from fastapi.testclient import TestClient
from sqlmodel import Session

from tests.factories import make_member, make_period, make_team
from tests.pages.html_tree import Node, parse_html
from tests.plans.conftest import add_initiative

RESOLUTION = 0.5
CAPACITY = 99.75  # not a multiple of the resolution
# (title, effort, value): no effort a multiple of 0.5, so each rounds up.
ROWS = [("Route search", 40.3, 10.0), ("Stop alerts", 30.2, 8.0), ("Fare capping", 26.7, 7.0)]
ROWS_TOO_BIG = [("Depot dashboard", 20.1, 3.0)]


def _figures(root: Node) -> dict[str, str]:
    """The scenario column of the figures table: row label -> shown text."""
    table = root.find("table", cls="snap-effect")
    assert table is not None
    figures = {}
    for tr in table.find_all("tr"):
        th, cells = tr.find("th"), tr.find_all("td")
        if th is not None and len(cells) == 2:
            figures[th.text()] = cells[1].text()
    return figures


def _totals(root: Node) -> dict[str, str]:
    totals = root.find("dl", cls="snap-totals")
    assert totals is not None
    return {
        div.find("dt").text(): div.find("dd").text()  # type: ignore[union-attr]
        for div in totals.find_all("div")
    }


def test_scenario_figures_and_totals_agree_when_nothing_is_a_multiple_of_the_resolution(
    form_client: TestClient, session: Session
) -> None:
    team = make_team(session, "Quay")
    period = make_period(session, name="Quay quarter")
    make_member(session, team, "Ola")
    for title, effort, value in ROWS + ROWS_TOO_BIG:
        add_initiative(session, team, period, title, effort, value)
    created = form_client.post(
        f"/teams/{team.id}/scenarios",
        data={
            "csrf_token": form_client.csrf,  # type: ignore[attr-defined]
            "period_id": str(period.id),
            "name": "Quarter with a contractor",
            "capacity_days": f"{CAPACITY}",
        },
        follow_redirects=False,
    )
    assert created.status_code == 303, created.text
    page = form_client.get(created.headers["location"])
    assert page.status_code == 200
    root = parse_html(page.text)

    # By hand: in 0.5-day steps the capacity counts 99.5 days and the efforts 40.5 + 30.5 +
    # 27 = 98, so the three fit and the fourth (20.5) does not; in days as entered the chosen
    # work is 97.2 days and the headroom 99.75 - 97.2 = 2.55.
    effort = math.fsum(e for _, e, _ in ROWS)
    assert effort == pytest.approx(97.2)
    figures, totals = _figures(root), _totals(root)
    assert figures["Value"] == totals["Value"] == "25"
    assert figures["Effort (days)"] + " days" == totals["Effort"] == "97.2 days"
    assert figures["Capacity (days)"] + " days" == totals["Capacity"]
    assert figures["Headroom (days)"] + " days" == totals["Headroom"]
    assert float(figures["Capacity (days)"]) == pytest.approx(CAPACITY, abs=0.005)
    assert float(figures["Headroom (days)"]) == pytest.approx(CAPACITY - effort, abs=0.005)

    # Rounding is said once, with the capacity the selector counts (all four efforts round up).
    note = root.by_id("rounding-note").text()
    assert "counts 99.5 days of the capacity and rounds 4 efforts up" in note
    assert page.text.count("0.5-day steps") == 1
    assert "were rounded up" not in page.text  # the stored warning says it no more
