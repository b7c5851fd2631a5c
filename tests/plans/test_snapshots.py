"""Saved plans: what the snapshot holds, its digest, immutability, and what changed since."""

from __future__ import annotations

import hashlib
import itertools
import json
import math

import numpy as np
import pytest
from fastapi.testclient import TestClient
from scipy import stats
from sqlmodel import Session

from server.errors import ConflictError
from server.models import SavedPlan
from server.planning.plans import PlanOptions, plan_for
from server.planning.scenarios import ScenarioChanges, capture
from server.planning.snapshots import drift_of, view_of
from server.schemas import CapacitySettingsIn, EffortIn, MemberUpdate, TeamUpdate
from server.store import plans as store
from server.store.initiatives import delete_initiative
from server.store.periods import set_capacity_settings
from server.store.teams import delete_team, update_member, update_team
from tests.factories import set_days_off
from tests.pages.parsed_page import parse
from tests.plans.conftest import (
    EXPECTED_CAPACITY,
    INITIATIVES,
    Workspace,
    add_initiative,
    edit,
    publish,
    save_live,
)

RESOLUTION = 0.5


def _save(session: Session, ws: Workspace, name: str = "Baseline") -> SavedPlan:
    snapshot = capture(
        session,
        team_id=ws.team_id,
        period_id=ws.period_id,
        changes=ScenarioChanges(),
        resolution=RESOLUTION,
    )
    return store.save_plan(session, name=name, snapshot=snapshot, scenario_changes={})


def _brute_force(efforts: list[float], values: list[float], capacity: float) -> float:
    """Best value over all subsets (reference for small cases), capacity rounded down."""
    limit = math.floor(capacity / RESOLUTION) * RESOLUTION
    best = 0.0
    for mask in itertools.product((0, 1), repeat=len(efforts)):
        effort = sum(e for e, m in zip(efforts, mask, strict=True) if m)
        if effort <= limit + 1e-9:
            best = max(best, sum(v for v, m in zip(values, mask, strict=True) if m))
    return best


def test_snapshot_holds_every_input_and_the_optimal_result(
    session: Session, workspace: Workspace
) -> None:
    db_plan = _save(session, workspace)
    view = view_of(db_plan.inputs, db_plan.result)
    cap = view.inputs.capacity
    # Worked example, by hand (see conftest): 18 available days x 0.7 x 0.85.
    assert cap.capacity_days == pytest.approx(EXPECTED_CAPACITY)
    assert cap.gross_days == pytest.approx(18)
    assert {m.name: m.days_off for m in cap.members} == {"Ola": 0, "Ines": 2}
    assert [i.title for i in view.inputs.initiatives] == list(INITIATIVES)
    for i in view.inputs.initiatives:
        low, likely, high, value = INITIATIVES[i.title]
        assert (i.effort.low, i.effort.likely, i.effort.high) == (low, likely, high)
        assert (i.estimate.low, i.estimate.high) == (low or likely, high or likely)
        assert i.value == value
        assert i.state == "candidate"
    assert view.inputs.options.resolution == RESOLUTION
    assert view.result.method.startswith("dp")
    assert db_plan.created_at is not None

    efforts = [v[1] for v in INITIATIVES.values()]
    values = [v[3] for v in INITIATIVES.values()]
    best = _brute_force(efforts, values, EXPECTED_CAPACITY)  # reference: brute force
    assert view.result.value == pytest.approx(best)
    chosen_effort = sum(i.planned_effort for i in view.chosen)
    assert chosen_effort <= EXPECTED_CAPACITY
    assert view.result.effort == pytest.approx(chosen_effort)
    assert view.result.headroom == pytest.approx(EXPECTED_CAPACITY - chosen_effort)
    # Every point of the stored capacity curve is the brute-force best at that capacity.
    curve = view.result.curve
    assert curve is not None
    for days, value in zip(curve.capacity_days, curve.values, strict=True):
        assert value == pytest.approx(_brute_force(efforts, values, days))
    assert {e.key for e in view.result.explanations} == {i.key for i in view.inputs.initiatives}
    assert all("“" in e.reason or "displace" not in e.reason for e in view.result.explanations)


def test_fit_probability_in_the_snapshot_matches_an_independent_monte_carlo(
    session: Session, workspace: Workspace
) -> None:
    db_plan = _save(session, workspace)
    view = view_of(db_plan.inputs, db_plan.result)
    fit = view.result.fit
    assert fit is not None
    assert not fit.exact
    assert fit.draws == 10_000
    assert (
        fit.label
        == plan_for(
            session,
            team_id=workspace.team_id,
            period_id=workspace.period_id,
            options=PlanOptions(resolution=RESOLUTION),
        ).fit.label()
    )  # type: ignore[union-attr]  # seeded: the live plan shows the same figure
    # Reference: PERT-beta efforts drawn with scipy.stats.beta, shapes 1 + 4 (m - a) / (b - a)
    # and 1 + 4 (b - m) / (b - a) on [a, b] (Malcolm et al., Operations Research 7(5), 1959).
    rng = np.random.default_rng(20270301)
    draws = 200_000
    totals = np.zeros(draws)
    for i in view.chosen:
        a, m, b = i.estimate.low, i.estimate.likely, i.estimate.high
        if a == b:
            totals += m
            continue
        alpha, beta = 1 + 4 * (m - a) / (b - a), 1 + 4 * (b - m) / (b - a)
        totals += stats.beta(alpha, beta, loc=a, scale=b - a).rvs(draws, random_state=rng)
    reference = float(np.mean(totals <= view.result.capacity))
    error = math.sqrt(reference * (1 - reference) * (1 / draws + 1 / fit.draws))
    assert abs(fit.probability - reference) < 5 * error + 1e-3
    assert fit.standard_error == pytest.approx(
        math.sqrt(fit.probability * (1 - fit.probability) / fit.draws)
    )


def test_digest_is_the_sha256_of_the_canonical_stored_inputs(
    session: Session, workspace: Workspace
) -> None:
    db_plan = _save(session, workspace)
    session.expire_all()
    stored = session.get(SavedPlan, db_plan.id)
    assert stored is not None
    canonical = json.dumps(stored.inputs, sort_keys=True, separators=(",", ":"), ensure_ascii=False)
    assert stored.inputs_digest == hashlib.sha256(canonical.encode("utf-8")).hexdigest()
    # The same live data gives the same digest; a changed value a different one.
    again = _save(session, workspace, "Again")
    assert again.inputs_digest == stored.inputs_digest
    edit(session, workspace.id_of("Stop alerts"), value=7.5)
    assert _save(session, workspace, "Later").inputs_digest != stored.inputs_digest


def _edit_everything(session: Session, ws: Workspace, round_no: int) -> None:
    edit(session, ws.id_of("Route search"), value=30.0 + round_no)
    edit(session, ws.id_of("Fare capping"), effort=EffortIn(likely=2.0 + round_no, low=1, high=9))
    edit(session, ws.id_of("Depot dashboard"), state="pinned", title=f"Depot v{round_no}")
    set_days_off(session, ws.members[0], ws.period, 3 + round_no)
    set_capacity_settings(
        session,
        team_id=ws.team_id,
        period_id=ws.period_id,
        settings_in=CapacitySettingsIn(focus_factor=0.6, reserve_pct=10 + round_no),
    )
    add_initiative(session, ws.team, ws.period, f"Late idea {round_no}", 1.0, 50.0)


def test_saved_and_published_pages_stay_byte_for_byte_the_same_after_edits(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    plan = save_live(form_client, workspace)
    page = f"/plans/{plan['id']}"
    saved_before = form_client.get(page)
    assert saved_before.status_code == 200
    assert "Fare capping" in saved_before.text

    _edit_everything(session, workspace, 1)
    assert form_client.get(page).content == saved_before.content

    link = publish(form_client, plan["id"])
    published_before = form_client.get(link["url"])
    assert published_before.status_code == 200
    saved_published = form_client.get(page).content
    _edit_everything(session, workspace, 2)
    delete_initiative(session, initiative_id=workspace.id_of("Stop alerts"))

    assert form_client.get(link["url"]).content == published_before.content
    assert form_client.get(page).content == saved_published
    # The live plan did move on, which is what makes the comparison meaningful.
    changes = form_client.get(f"/api/v1/plans/{plan['id']}/changes").json()
    assert changes["moved_on"] is True
    assert len(changes["changes"]) >= 6


def test_a_saved_plan_row_refuses_updates(session: Session, workspace: Workspace) -> None:
    db_plan = _save(session, workspace)
    original = dict(db_plan.result)
    db_plan.name = "Tampered"
    db_plan.result = {**original, "value": 1e6}
    session.add(db_plan)
    with pytest.raises(ConflictError):
        session.commit()
    session.rollback()
    session.expire_all()
    stored = session.get(SavedPlan, db_plan.id)
    assert stored is not None
    assert stored.name == "Baseline"
    assert stored.result == original


def test_drift_is_empty_until_live_data_moves_then_names_each_change(
    session: Session, workspace: Workspace
) -> None:
    db_plan = _save(session, workspace)
    unchanged = drift_of(
        session, inputs=db_plan.inputs, result=db_plan.result, digest=db_plan.inputs_digest
    )
    assert unchanged.available
    assert not unchanged.moved_on
    assert unchanged.changes == []

    edit(session, workspace.id_of("Route search"), value=13.0)
    edit(session, workspace.id_of("Fare capping"), effort=EffortIn(likely=6.0, low=3, high=8))
    edit(session, workspace.id_of("Offline timetable"), state="ruled_out")
    delete_initiative(session, initiative_id=workspace.id_of("Depot dashboard"))
    add_initiative(session, workspace.team, workspace.period, "Night buses", 1.0, 20.0)
    set_days_off(session, workspace.members[0], workspace.period, 4)
    drift = drift_of(
        session, inputs=db_plan.inputs, result=db_plan.result, digest=db_plan.inputs_digest
    )
    assert drift.moved_on
    texts = [c.text for c in drift.changes]
    by_field = {(c.subject, c.field): (c.before, c.after) for c in drift.changes}
    assert by_field[("Route search", "value")] == (12.0, 13.0)
    assert by_field[("Fare capping", "effort.likely")] == (4.0, 6.0)
    assert by_field[("Offline timetable", "state")] == ("candidate", "ruled_out")
    assert "“Offline timetable”: state candidate → ruled out" in texts  # the pages' words
    assert by_field[("Ola", "days_off")] == (0.0, 4.0)
    assert by_field[("capacity", "capacity_days")][0] == pytest.approx(EXPECTED_CAPACITY)
    assert by_field[("capacity", "capacity_days")][1] == pytest.approx((6 + 8) * 0.7 * 0.85)
    assert any("Depot dashboard" in t and "no longer" in t for t in texts)
    assert any("Night buses" in t and "added" in t for t in texts)
    live = plan_for(
        session,
        team_id=workspace.team_id,
        period_id=workspace.period_id,
        options=PlanOptions(resolution=RESOLUTION),
    )
    assert drift.live_value == live.selection.value
    assert "Night buses" in (drift.live_entered or [])


def test_changes_page_and_its_fragment(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    plan = save_live(form_client, workspace)
    same = form_client.get(f"/plans/{plan['id']}/changes")
    assert same.status_code == 200
    assert "as it was when this plan was saved" in same.text
    edit(session, workspace.id_of("Stop alerts"), value=70.0)
    page = form_client.get(f"/plans/{plan['id']}/changes")
    assert "Live data has moved on" in page.text
    assert "value score 7 → 70" in page.text
    fragment = form_client.get(f"/plans/{plan['id']}/changes", headers={"HX-Request": "true"})
    assert "<html" not in fragment.text
    assert "value score 7 → 70" in fragment.text
    saved_page = form_client.get(f"/plans/{plan['id']}").text
    assert f'hx-get="/plans/{plan["id"]}/changes"' in saved_page


def test_a_plan_outlives_its_team(session: Session, workspace: Workspace) -> None:
    db_plan = _save(session, workspace)
    delete_team(session, team_id=workspace.team_id, with_initiatives=True)
    session.expire_all()
    stored = store.get_plan(session, plan_id=db_plan.id or 0)
    assert view_of(stored.inputs, stored.result).team_names == "Harbour"
    drift = drift_of(
        session, inputs=stored.inputs, result=stored.result, digest=stored.inputs_digest
    )
    assert not drift.available
    assert "no longer exists" in drift.message


def test_a_saved_plan_shows_estimates_as_entered_and_marks_the_teams_spread(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    update_team(session, team_id=workspace.team_id, team_in=TeamUpdate(default_spread=0.2))
    plan = save_live(form_client, workspace)
    page = parse(form_client.get(f"/plans/{plan['id']}").text)
    cells = {
        row.find("th").text(): row.find("td").text()
        for table in page.find_all("table", cls="snap-initiatives")
        for row in table.find("tbody").find_all("tr")
    }
    # "Stop alerts" was entered as 2 days: the 20 % spread is marked, not shown as 1.6 / 2 / 2.4.
    assert cells["Stop alerts"] == "2 ±20 %"
    assert cells["Route search"] == "2 / 3 / 5"  # three numbers entered: shown as they were


def test_drift_names_a_renamed_member(session: Session, workspace: Workspace) -> None:
    db_plan = _save(session, workspace)
    ola = workspace.members[0]
    update_member(session, member_id=ola.id or 0, member_in=MemberUpdate(name="Ola N."))
    drift = drift_of(
        session, inputs=db_plan.inputs, result=db_plan.result, digest=db_plan.inputs_digest
    )
    assert drift.moved_on
    assert [c.text for c in drift.changes] == ["Renamed Ola to Ola N."]


def test_drift_says_shares_and_spreads_in_percent_as_the_pages_do(
    session: Session, workspace: Workspace
) -> None:
    """Found in use: "share on team 0.5 → 0.6" and "default spread 0.1 → 0.3"."""
    db_plan = _save(session, workspace)
    ola = workspace.members[0]
    update_member(session, member_id=ola.id or 0, member_in=MemberUpdate(allocation=0.6))
    update_team(session, team_id=workspace.team_id, team_in=TeamUpdate(default_spread=0.3))
    drift = drift_of(
        session, inputs=db_plan.inputs, result=db_plan.result, digest=db_plan.inputs_digest
    )
    texts = [c.text for c in drift.changes]
    assert "Ola: share on team 100 % → 60 %" in texts
    assert f"{workspace.team.name}: default spread of single estimates 0 % → 30 %" in texts


def test_a_saved_plan_of_a_deleted_team_links_only_to_pages_that_exist(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    plan = save_live(form_client, workspace)
    delete_team(session, team_id=workspace.team_id, with_initiatives=True)
    page = form_client.get(f"/plans/{plan['id']}")
    assert page.status_code == 200
    hrefs = [
        a.attrs["href"]
        for a in parse(page.text).find_all("a")
        if a.attrs.get("href", "").startswith("/") and not a.attrs["href"].startswith("/static")
    ]
    assert hrefs
    for href in hrefs:
        assert form_client.get(href.split("#")[0]).status_code == 200, href
    assert "no longer exists" in page.text
    listing = form_client.get(f"/plans?team_id={workspace.team_id}")
    assert "Saved plans of a deleted team" in parse(listing.text).text()
    assert form_client.get("/plans?team_id=4711").status_code == 404
