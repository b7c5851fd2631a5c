"""The capacity curve's table and chart on the plan page, against brute force at every step.

Reference: brute force over every subset of a small plan (needs and either-or sets included)
at every capacity step from 0 to the end of the curve, independent of the selector. The table
must list exactly the capacities where the best value changes, and the chart must step there.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Iterator, Sequence
from dataclasses import dataclass

import pytest
from fastapi.testclient import TestClient
from sqlmodel import Session

from server.planning import curve_chart
from server.planning.plans import PlanOptions, plan_for
from server.schemas import CapacitySettingsIn
from server.selector import Curve
from server.store.periods import set_capacity_settings
from tests.factories import make_initiative, make_member, make_period, make_team
from tests.pages.html_tree import Node, parse_html
from tests.pages.test_plan_pages import ROWS, Setup, build

RESOLUTION = 0.5


@dataclass(frozen=True)
class Row:
    title: str
    effort: float
    value: float
    either_or: str | None = None
    needs: tuple[str, ...] = ()


# An initiative needing two others, and needs next to an either-or set: the binary program
# plans this, so the curve is found by solving again rather than read from a DP row.
COUPLED = [
    Row("Ticket API", 3.0, 10.0),
    Row("Ticket search", 2.0, 6.0, needs=("Ticket API",)),
    Row("Card reader", 4.0, 15.0, either_or="reader"),
    Row("Phone reader", 5.0, 17.0, either_or="reader"),
    Row("Tap to pay", 1.5, 4.0, needs=("Ticket API", "Card reader")),
    Row("Fare rules", 6.0, 20.0),
    Row("Fare preview", 2.5, 7.0, needs=("Fare rules",)),
    Row("Receipts", 3.5, 9.0),
]


@pytest.fixture(autouse=True)
def _fresh_curves() -> Iterator[None]:
    # probed_curve is cached per problem; a test that lowers the solve limit must not see (or
    # leave behind) a curve read under another limit.
    curve_chart.probed_curve.cache_clear()
    yield
    curve_chart.probed_curve.cache_clear()


def brute_value(rows: Sequence[Row], units: int) -> float | None:
    """Best value of any subset fitting `units` resolution steps; None if none fits."""
    best = None
    for size in range(len(rows) + 1):
        for subset in itertools.combinations(rows, size):
            titles = {r.title for r in subset}
            if any(not set(r.needs) <= titles for r in subset):
                continue
            sets = [r.either_or for r in subset if r.either_or]
            if len(sets) != len(set(sets)):
                continue
            if sum(math.ceil(r.effort / RESOLUTION) for r in subset) > units:
                continue
            value = sum(r.value for r in subset)
            best = value if best is None else max(best, value)
    return best


def brute_breakpoints(rows: Sequence[Row], last_days: float) -> list[tuple[float, float]]:
    """Every (capacity, value) where the best value changes, from 0 to last_days."""
    found: list[tuple[float, float]] = []
    for k in range(int(last_days / RESOLUTION) + 1):
        value = brute_value(rows, k)
        if value is not None and (not found or found[-1][1] != value):
            found.append((k * RESOLUTION, value))
    return found


def coupled_setup(session: Session) -> Setup:
    """Two full-time members over 10 working days (focus 1, no reserve): 20 days."""
    team = make_team(session)
    period = make_period(session)
    for k in range(2):
        make_member(session, team, f"Member {k + 1}")
    set_capacity_settings(
        session,
        team_id=team.id or 0,
        period_id=period.id or 0,
        settings_in=CapacitySettingsIn(focus_factor=1.0, reserve_pct=0.0),
    )
    ids: dict[str, int] = {}
    for row in COUPLED:
        record = make_initiative(
            session,
            team,
            period,
            row.title,
            row.effort,
            row.value,
            either_or=row.either_or,
            needs=[ids[t] for t in row.needs],
        )
        ids[row.title] = record.row.id or 0
    return Setup(team, period, ids)


def curve_rows(root: Node) -> list[tuple[float, float]]:
    table = root.by_id("curve-table")
    return [
        (float(cells[0].text()), float(cells[1].text()))
        for tr in table.find_all("tr")
        if len(cells := tr.find_all("td")) == 2
    ]


def open_plan(client: TestClient, url: str) -> tuple[Node, dict]:
    response = client.get(url)
    assert response.status_code == 200, response.text[:500]
    figures = client.get(url, headers={"Accept": "application/json"}).json()
    return parse_html(response.text), figures


def assert_every_step_listed(
    listed: list[tuple[float, float]], rows: Sequence[Row], last_days: float
) -> None:
    # Each row is the best value from its capacity on, until the capacity of the next row.
    ends = [c for c, _ in listed[1:]] + [last_days + RESOLUTION]
    for (start, value), end in zip(listed, ends, strict=True):
        for k in range(round(start / RESOLUTION), round(end / RESOLUTION)):
            assert brute_value(rows, k) == value, (k * RESOLUTION, value)
    # Below the first row no plan fits, or the first row starts at 0.
    first = round(listed[0][0] / RESOLUTION)
    assert first == 0 or brute_value(rows, first - 1) is None
    assert listed == brute_breakpoints(rows, last_days)


def chart_path(root: Node) -> str:
    path = root.find("path", cls="curve-line")
    assert path is not None
    return path.get("d") or ""


def expected_path(breakpoints: list[tuple[float, float]], last_days: float, today: float) -> str:
    days = [c for c, _ in breakpoints] + [last_days]
    values = [v for _, v in breakpoints] + [breakpoints[-1][1]]
    return curve_chart.build_chart(Curve(tuple(days), tuple(values)), today).line_path


def test_binary_program_curve_lists_every_breakpoint(
    form_client: TestClient, session: Session
) -> None:
    setup = coupled_setup(session)
    root, figures = open_plan(form_client, setup.url)
    assert figures["totals"]["method"] == "milp-highs"
    assert figures["curve"]["sampled"] is False
    listed = curve_rows(root)
    last_days = 25.0  # the curve runs to capacity + 25 %
    assert_every_step_listed(listed, COUPLED, last_days)
    assert len(listed) > 5  # enough steps that a sample of 16 would miss some
    caption = root.by_id("curve-table").find("caption").text()  # type: ignore[union-attr]
    assert "holds from that row until the next" in caption
    # The chart steps at the same capacities, to the same values.
    assert chart_path(root) == expected_path(brute_breakpoints(COUPLED, last_days), last_days, 20)
    assert [(s["capacity_days"], s["value"]) for s in figures["curve"]["steps"]] == listed


def test_dp_curve_lists_every_breakpoint(form_client: TestClient, session: Session) -> None:
    setup = build(session)
    root, figures = open_plan(form_client, setup.url)
    assert figures["totals"]["method"].startswith("dp")
    rows = [Row(title, effort, value) for title, effort, value in ROWS]
    listed = curve_rows(root)
    assert_every_step_listed(listed, rows, 25.0)
    assert chart_path(root) == expected_path(brute_breakpoints(rows, 25.0), 25.0, 20)


def test_too_many_breakpoints_are_shown_as_a_sample(
    form_client: TestClient, session: Session, monkeypatch: pytest.MonkeyPatch
) -> None:
    setup = coupled_setup(session)
    monkeypatch.setattr(curve_chart, "MAX_CURVE_SOLVES", 3)
    root, figures = open_plan(form_client, setup.url)
    assert figures["curve"]["sampled"] is True
    caption = root.by_id("curve-table").find("caption").text()  # type: ignore[union-attr]
    assert "sample" in caption
    assert "holds" not in caption
    assert "sample capacities" in root.by_id("curve-note").text()
    listed = curve_rows(root)
    every = brute_breakpoints(COUPLED, 25.0)
    assert len(listed) < len(every) + 10  # a sample, not every step
    for capacity, value in listed:  # each sampled point is exact
        assert brute_value(COUPLED, round(capacity / RESOLUTION)) == value, capacity
    # Today's capacity is among the points, and no step is drawn between samples.
    assert (20.0, brute_value(COUPLED, 40)) in listed
    assert root.find("path", cls="curve-area") is None
    assert root.find("path", cls="curve-range") is not None
    assert len(root.find_all("circle", cls="curve-point")) == len(listed)


def test_probing_takes_one_solve_per_step(session: Session) -> None:
    setup = coupled_setup(session)
    plan = plan_for(
        session,
        team_id=setup.team.id or 0,
        period_id=setup.period.id or 0,
        options=PlanOptions(explain=False),
    )
    probed = curve_chart.probed_curve(plan.problem, 25.0)
    assert probed.complete
    # One solve per step of the curve, and one more that finds nothing fits below it (or 0).
    steps = brute_breakpoints(COUPLED, 25.0)
    assert probed.solves <= len(steps) + 1
    assert probed.curve.capacity_days == tuple(k * RESOLUTION for k in range(51))


@pytest.mark.parametrize(
    ("days", "values", "today"),
    [((0.0, 10.0), (0.0, 0.0), 10.0), ((0.0,), (0.0,), 0.0), ((0.0, 4.0), (0.0, 7.0), 0.0)],
)
def test_an_empty_plan_or_no_capacity_gets_axes_of_plain_numbers(
    days: tuple[float, ...], values: tuple[float, ...], today: float
) -> None:
    # Reported: an empty plan's value axis read "5e-10" and "1e-09".
    chart = curve_chart.build_chart(Curve(days, values), today)
    labels = [tick.label for tick in (*chart.x_ticks, *chart.y_ticks)]
    assert labels
    assert not [label for label in labels if "e" in label], labels
    assert float(chart.y_ticks[0].label) == 0
