"""Saved plans keep the capacity curve the live plan page shows, binary-program plans too.

Reference: brute force over every subset of the small coupled plan of the curve-table tests
(tests/pages/test_curve_table.py), independent of the selector.
"""

from __future__ import annotations

from collections.abc import Iterator

import pytest
from fastapi.testclient import TestClient
from sqlmodel import Session

from server.models import SavedPlan
from server.planning import curve_chart
from server.planning.snapshots import view_of
from tests.pages.html_tree import parse_html
from tests.pages.test_curve_table import (
    COUPLED,
    RESOLUTION,
    brute_breakpoints,
    brute_value,
    coupled_setup,
    open_plan,
)
from tests.pages.test_plan_pages import Setup
from tests.plans.conftest import Workspace, save_live

LAST_DAYS = 25.0  # 20 days of capacity; the curve runs to capacity + 25 %
NO_CURVE = "No capacity curve is stored for this plan"
NO_CURVES = "None of these plans has a capacity curve stored"


@pytest.fixture(autouse=True)
def _fresh_curves() -> Iterator[None]:
    # probed_curve is cached per problem: a lowered solve limit must not leak between tests.
    curve_chart.probed_curve.cache_clear()
    yield
    curve_chart.probed_curve.cache_clear()


def _save_from_form(client: TestClient, setup: Setup, name: str) -> int:
    saved = client.post(
        "/plans",
        data={
            "csrf_token": client.csrf,  # type: ignore[attr-defined]
            "team_id": str(setup.team.id),
            "period_id": str(setup.period.id),
            "name": name,
        },
        follow_redirects=False,
    )
    assert saved.status_code == 303, saved.text
    return int(saved.headers["location"].rsplit("/", 1)[1])


def test_binary_program_plan_keeps_its_curve_when_saved(
    form_client: TestClient, session: Session
) -> None:
    setup = coupled_setup(session)
    _, live = open_plan(form_client, setup.url)
    assert live["totals"]["method"] == "milp-highs"  # the selector itself gives no curve
    plan_id = _save_from_form(form_client, setup, "Coupled")

    curve = form_client.get(f"/api/v1/plans/{plan_id}").json()["result"]["curve"]
    assert curve is not None
    assert curve["sampled"] is False
    for days, value in zip(curve["capacity_days"], curve["values"], strict=True):
        assert value == brute_value(COUPLED, round(days / RESOLUTION)), days
    steps = [
        (days, value)
        for i, (days, value) in enumerate(zip(curve["capacity_days"], curve["values"], strict=True))
        if i == 0 or value != curve["values"][i - 1]
    ]
    assert steps == brute_breakpoints(COUPLED, LAST_DAYS)
    # The same steps as the live plan page's curve.
    assert steps == [(s["capacity_days"], s["value"]) for s in live["curve"]["steps"]]

    page = form_client.get(f"/plans/{plan_id}").text
    assert NO_CURVE not in page
    assert 'class="cmp-line"' in page
    assert "The curves as numbers" in page

    other = _save_from_form(form_client, setup, "Coupled again")
    compared = form_client.get(f"/compare?plans={plan_id},{other}")
    assert compared.status_code == 200
    assert NO_CURVES not in compared.text
    assert compared.text.count('<polyline class="cmp-line"') == 2


def test_a_curve_found_only_in_part_is_saved_as_a_sample(
    form_client: TestClient, session: Session, monkeypatch: pytest.MonkeyPatch
) -> None:
    setup = coupled_setup(session)
    monkeypatch.setattr(curve_chart, "MAX_CURVE_SOLVES", 3)
    plan_id = _save_from_form(form_client, setup, "Coupled, sampled")
    curve = form_client.get(f"/api/v1/plans/{plan_id}").json()["result"]["curve"]
    assert curve["sampled"] is True
    # Each sampled point is exact, though not every breakpoint is there.
    for days, value in zip(curve["capacity_days"], curve["values"], strict=True):
        assert value == brute_value(COUPLED, round(days / RESOLUTION)), days
    assert (
        "a sample: exact at the capacities listed below"
        in form_client.get(f"/plans/{plan_id}").text
    )


def _old_copy(session: Session, plan_id: int, name: str, curve: dict | None) -> int:
    """A plan stored as an older version wrote it: the same snapshot with another curve."""
    saved = session.get(SavedPlan, plan_id)
    assert saved is not None
    copy = SavedPlan(
        name=name,
        period_id=saved.period_id,
        team_ids=list(saved.team_ids),
        scenario_changes=dict(saved.scenario_changes),
        inputs=dict(saved.inputs),
        result={**saved.result, "curve": curve},
        inputs_digest=saved.inputs_digest,
    )
    session.add(copy)
    session.commit()
    return copy.id or 0


def test_snapshots_saved_without_a_curve_or_its_sample_flag_still_read(
    form_client: TestClient, session: Session
) -> None:
    setup = coupled_setup(session)
    new = _save_from_form(form_client, setup, "Coupled")
    stored = form_client.get(f"/api/v1/plans/{new}").json()["result"]["curve"]
    old = _old_copy(session, new, "Saved before curves were kept", None)
    flagless = _old_copy(
        session,
        new,
        "Saved before the sample flag",
        {"capacity_days": stored["capacity_days"], "values": stored["values"]},
    )

    flagless_plan = session.get(SavedPlan, flagless)
    assert flagless_plan is not None
    view = view_of(flagless_plan.inputs, flagless_plan.result)
    assert view.result.curve is not None
    assert view.result.curve.sampled is False
    assert NO_CURVE not in form_client.get(f"/plans/{flagless}").text

    assert NO_CURVE in form_client.get(f"/plans/{old}").text
    compared = form_client.get(f"/compare?plans={old},{flagless}").text
    assert "A: no capacity curve stored" in compared
    assert compared.count('<polyline class="cmp-line"') == 1
    older = _old_copy(session, new, "Also saved before", None)
    assert NO_CURVES in form_client.get(f"/compare?plans={old},{older}").text


def test_a_plans_chart_is_named_by_the_plan_for_a_screen_reader(
    workspace: Workspace, client: TestClient
) -> None:
    """It read "Capacity curves of Plan" on every saved plan's page."""
    plan = save_live(client, workspace, "Harbour baseline")
    other = save_live(client, workspace, "Lean")
    saved = parse_html(client.get(f"/plans/{plan['id']}").text)
    assert "Capacity curve of “Harbour baseline”" in [t.text() for t in saved.find_all("title")]
    compared = parse_html(client.get(f"/compare?plans={plan['id']},{other['id']}").text)
    titles = [t.text() for t in compared.find_all("title")]
    assert "Capacity curves of A (“Harbour baseline”), B (“Lean”)" in titles
