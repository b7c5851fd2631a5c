"""Scenarios: changes <-> options, solves that differ as they should, changed inputs in words,
and refused values (field named, nothing stored)."""

from __future__ import annotations

import itertools
import math

import pytest
from fastapi.testclient import TestClient
from scipy import stats
from sqlmodel import Session

from server.errors import InputError
from server.planning.plans import PlanOptions
from server.planning.scenarios import (
    ScenarioChanges,
    changes_from_json,
    changes_from_options,
    check_for_team,
    describe,
    options_for,
    parse_changes_form,
    solve_scenario,
)
from server.planning.snapshots import inputs_of, solve_live
from tests.factories import make_member, make_team
from tests.pages.html_tree import parse_html
from tests.pages.parsed_page import Form, ids_are_unique_and_labels_point_at_fields, parse
from tests.plans.conftest import (
    EXPECTED_CAPACITY,
    INITIATIVES,
    Workspace,
    counts,
    error_fields,
    error_text,
    post_scenario_form,
)

RESOLUTION = 0.5


def _solve(session: Session, ws: Workspace, **changes: object):
    return solve_scenario(
        session,
        team_id=ws.team_id,
        period_id=ws.period_id,
        changes=ScenarioChanges(**changes),  # type: ignore[arg-type]
        resolution=RESOLUTION,
    )


def _brute_force(items: list[tuple[float, float]], capacity: float, forced: set[int]) -> float:
    """Best value over all subsets containing `forced` (reference), capacity rounded down."""
    limit = math.floor(capacity / RESOLUTION + 1e-9) * RESOLUTION
    best = -1.0
    for mask in itertools.product((0, 1), repeat=len(items)):
        if any(not mask[i] for i in forced):
            continue
        effort = sum(e for (e, _), m in zip(items, mask, strict=True) if m)
        if effort <= limit + 1e-9:
            best = max(best, sum(v for (_, v), m in zip(items, mask, strict=True) if m))
    return best


def test_changes_round_trip_through_json_and_options() -> None:
    changes = ScenarioChanges(
        capacity_days=8,
        focus_factor=0.6,
        reserve_pct=20,
        confidence=0.8,
        days_off={3: 2.5},
        forced_in=[4, 2, 4],
        forced_out=[7],
    )
    stored = changes.to_json()
    assert stored["days_off"] == {"3": 2.5}
    assert stored["forced_in"] == [2, 4]
    assert changes_from_json(stored) == changes
    options = options_for(changes, resolution=0.25)
    assert options == PlanOptions(
        resolution=0.25,
        confidence=0.8,
        capacity_days=8,
        focus_factor=0.6,
        reserve_pct=20,
        days_off={3: 2.5},
        forced_in=frozenset({2, 4}),
        forced_out=frozenset({7}),
    )
    assert changes_from_options(options) == changes
    assert ScenarioChanges().to_json() == {}
    assert ScenarioChanges().is_empty


def test_fewer_capacity_days_never_give_more_value(session: Session, workspace: Workspace) -> None:
    items = [(v[1], v[3]) for v in INITIATIVES.values()]
    previous = math.inf
    for days in (14.0, 11.9, 10.0, 8.5, 6.0, 3.0, 1.0, 0.5):
        outcome = _solve(session, workspace, capacity_days=days)
        value = outcome.plan.selection.value
        assert value <= previous
        assert value == pytest.approx(_brute_force(items, days, set()))  # reference: brute force
        assert outcome.plan.selection.effort <= days + 1e-9
        previous = value


def test_members_days_off_lower_capacity_by_the_worked_example(
    session: Session, workspace: Workspace
) -> None:
    ola = workspace.members[0].id or 0
    outcome = _solve(session, workspace, days_off={ola: 5})
    # By hand: Ola 10 - 5 = 5 days, Ines 8: 13 x 0.7 x 0.85 = 7.735 days.
    assert outcome.plan.capacity.capacity_days == pytest.approx(13 * 0.7 * 0.85)
    assert outcome.live.capacity.capacity_days == pytest.approx(EXPECTED_CAPACITY)
    assert outcome.plan.selection.value <= outcome.live.selection.value
    focus = _solve(session, workspace, focus_factor=0.5, reserve_pct=0)
    assert focus.plan.capacity.capacity_days == pytest.approx(18 * 0.5)


def test_forced_in_appears_and_forced_out_does_not(session: Session, workspace: Workspace) -> None:
    live = _solve(session, workspace).live
    assert live is not None
    left_out = next(r for r in live.rows if not r.chosen)
    chosen = next(r for r in live.rows if r.chosen)
    outcome = _solve(session, workspace, forced_in=[left_out.id], forced_out=[chosen.id])
    plan = outcome.plan
    assert left_out.key in plan.selection.chosen
    assert chosen.key not in plan.selection.chosen
    assert left_out.title in outcome.entered
    assert chosen.title in outcome.left
    items = [(r.effort_days, r.value) for r in plan.rows if r.id != chosen.id]
    forced = {
        i for i, r in enumerate(r for r in plan.rows if r.id != chosen.id) if r.id == left_out.id
    }
    assert plan.selection.value == pytest.approx(
        _brute_force(items, plan.capacity.capacity_days, forced)
    )
    assert outcome.value_change == pytest.approx(plan.selection.value - live.selection.value)
    assert outcome.value_change <= 0  # the live plan was optimal without the forcing
    # Explained as forced by the what-if: it read "Pinned: always in the plan; without the
    # pin …" for a candidate that nobody pinned.
    reasons = {r.id: r.explanation.reason for r in plan.rows if r.explanation}
    assert reasons[left_out.id].startswith("Forced in: in this plan by the what-if;")
    assert "pin" not in reasons[left_out.id]
    assert reasons[chosen.id].startswith("Forced out: kept out of this plan by the what-if;")
    assert "Ruled out" not in reasons[chosen.id]


def test_confidence_level_plans_with_beta_quantiles(session: Session, workspace: Workspace) -> None:
    outcome = _solve(session, workspace, confidence=0.8)
    for row in outcome.plan.rows:
        low, likely, high, _ = INITIATIVES[row.title]
        if low is None or high is None:
            assert row.effort_days == likely
            continue
        alpha = 1 + 4 * (likely - low) / (high - low)
        beta = 1 + 4 * (high - likely) / (high - low)
        # Reference: scipy.stats.beta.ppf for the PERT-beta shape parameters.
        expected = low + (high - low) * stats.beta.ppf(0.8, alpha, beta)
        assert row.effort_days == pytest.approx(expected, rel=1e-9)
    assert outcome.plan.p50_value is not None
    assert outcome.plan.selection.value <= outcome.plan.p50_value


def test_changed_inputs_are_listed_against_live_values(
    session: Session, workspace: Workspace
) -> None:
    ines = workspace.members[1].id or 0
    depot = workspace.id_of("Depot dashboard")
    outcome = _solve(
        session,
        workspace,
        capacity_days=9,
        focus_factor=0.6,
        reserve_pct=25,
        confidence=0.9,
        days_off={ines: 4},
        forced_in=[depot],
    )
    texts = [c.text for c in outcome.changed]
    assert texts == [
        "Confidence level: P90 (live: likely estimates)",
        "Capacity: 9 days (live: 10.71 days)",
        "Focus factor: 0.6 (live: 0.7)",
        "Reserve: 25 % (live: 15 %)",
        "Ines: days off: 4 days (live: 2 days)",
        "“Depot dashboard”: forced in (live: left out)",
    ]
    base = inputs_of(session, outcome.live)
    assert describe(ScenarioChanges(), base) == []
    # A forced initiative deleted since: said to be gone, not "left out".
    gone = describe(ScenarioChanges(forced_in=[99_999]), base)
    assert [c.text for c in gone] == [
        "initiative 99999: forced in (live: no longer in this team's plan, so not forced)"
    ]
    removed = describe(ScenarioChanges(days_off={4711: 3}), base)
    assert [c.text for c in removed] == [
        "A removed member (id 4711): days off: 3 days (live: no longer on the team)"
    ]


def test_parse_changes_form_reads_levels_and_keeps_blanks_live() -> None:
    changes, errors = parse_changes_form(
        {
            "name": "x",
            "capacity_days": "",
            "focus_factor": " 0.65 ",
            "confidence": "P80",
            "days_off.7": "3",
            "days_off.8": "",
            "forced.4": "in",
            "forced.5": "out",
            "forced.6": "",
        }
    )
    assert errors == {}
    assert changes == ScenarioChanges(
        focus_factor=0.65, confidence=0.8, days_off={7: 3}, forced_in=[4], forced_out=[5]
    )
    bad, errors = parse_changes_form(
        {"focus_factor": "1.5", "confidence": "P120", "days_off.7": "-1", "forced.4": "maybe"}
    )
    assert bad is None
    assert set(errors) == {"focus_factor", "confidence", "days_off.7", "forced.4"}
    # A sentence of its own beside the field's label, not a fragment of one.
    assert errors["confidence"] == "Must be a level from P1 to P99, e.g. P80 (got P120)."


@pytest.mark.parametrize(
    ("changes", "field"),
    [
        ({"focus_factor": 1.5}, "focus_factor"),
        ({"focus_factor": 0}, "focus_factor"),
        ({"reserve_pct": 100}, "reserve_pct"),
        ({"reserve_pct": -1}, "reserve_pct"),
        ({"confidence": 1.0}, "confidence"),
        ({"confidence": 0}, "confidence"),
        ({"capacity_days": -3}, "capacity_days"),
        ({"capacity_days": 0}, "capacity_days"),
        ({"capacity_days": "lots"}, "capacity_days"),
        # Found in use: true was stored as a capacity of 1 day.
        ({"capacity_days": True}, "capacity_days"),
        ({"confidence": True}, "confidence"),
        ({"days_off": {"1": -2}}, "days_off"),
        ({"forced_in": [1], "forced_out": [1]}, "forced_out"),
        ({"unknown": 1}, "unknown"),
        # A set capacity replaces the computed one: these beside it would change nothing.
        ({"capacity_days": 50, "focus_factor": 0.5}, "capacity_days"),
        ({"capacity_days": 50, "reserve_pct": 10}, "capacity_days"),
    ],
)
def test_api_refuses_bad_scenario_values_naming_the_field(
    client: TestClient,
    session: Session,
    workspace: Workspace,
    changes: dict[str, object],
    field: str,
) -> None:
    before = counts(session)
    response = client.post(
        "/api/v1/scenarios",
        json={
            "name": "Bad",
            "team_id": workspace.team_id,
            "period_id": workspace.period_id,
            "changes": changes,
        },
    )
    assert response.status_code == 422, response.text
    fields = error_fields(response)
    assert any(field in f for f in fields), fields
    assert counts(session) == before


def test_changes_naming_outsiders_are_refused(
    client: TestClient, session: Session, workspace: Workspace
) -> None:
    other = make_team(session, "Lighthouse")
    stranger = make_member(session, other, "Kim")
    base = {"name": "Bad", "team_id": workspace.team_id, "period_id": workspace.period_id}
    before = counts(session)
    cases = [
        ({"days_off": {str(stranger.id): 1}}, "days_off"),
        ({"days_off": {str(workspace.members[0].id): 11}}, "days_off"),  # 10 working days
        ({"forced_in": [99_999]}, "forced_in"),
        ({"forced_out": [99_999]}, "forced_out"),
    ]
    for changes, field in cases:
        response = client.post("/api/v1/scenarios", json={**base, "changes": changes})
        assert response.status_code == 422, response.text
        assert error_fields(response) == [field]
        assert field in error_text(response)
    with pytest.raises(InputError):
        check_for_team(
            session,
            team_id=workspace.team_id,
            period_id=workspace.period_id,
            changes=ScenarioChanges(days_off={stranger.id or 0: 1}),
        )
    assert counts(session) == before


def client_scenario(client: TestClient, scenario_id: int) -> dict:
    response = client.get(f"/api/v1/scenarios/{scenario_id}")
    assert response.status_code == 200, response.text
    return response.json()


def test_scenario_pages_create_show_change_and_save(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    listing = form_client.get(f"/teams/{workspace.team_id}/scenarios")
    assert listing.status_code == 200
    assert "New scenario from the live plan" in listing.text
    ola = workspace.members[0].id
    created = form_client.post(
        f"/teams/{workspace.team_id}/scenarios",
        data={
            "csrf_token": form_client.csrf,  # type: ignore[attr-defined]
            "period_id": str(workspace.period_id),
            "name": "Ola away",
            f"days_off.{ola}": "6",
            "confidence": "P80",
        },
        follow_redirects=False,
    )
    assert created.status_code == 303, created.text
    page = form_client.get(created.headers["location"])
    assert page.status_code == 200
    assert "Ola: days off: 6 days (live: 0 days)" in page.text
    assert "Confidence level: P80 (live: likely estimates)" in page.text
    # The scenario's fields and the save-as-plan form share a page: each label its own field.
    ids_are_unique_and_labels_point_at_fields(parse(page.text))
    scenario_id = int(created.headers["location"].rsplit("/", 1)[1])

    before = counts(session)
    refused = form_client.post(
        f"/scenarios/{scenario_id}",
        data={
            "csrf_token": form_client.csrf,  # type: ignore[attr-defined]
            "name": "Ola away",
            "focus_factor": "2",
        },
    )
    assert refused.status_code == 422
    assert 'value="2"' in refused.text  # the typed value is kept
    assert "at most 1" in refused.text
    assert counts(session) == before

    saved = form_client.post(
        "/plans",
        data={
            "csrf_token": form_client.csrf,  # type: ignore[attr-defined]
            "team_id": str(workspace.team_id),
            "period_id": str(workspace.period_id),
            "scenario_id": str(scenario_id),
            "name": "Ola away, frozen",
        },
        follow_redirects=False,
    )
    assert saved.status_code == 303
    plan_page = form_client.get(saved.headers["location"])
    assert "Ola: days off: 6 days (live: 0 days)" in plan_page.text
    assert "Scenario “Ola away”" in plan_page.text
    live = solve_live(
        session,
        team_id=workspace.team_id,
        period_id=workspace.period_id,
        options=options_for(
            ScenarioChanges(days_off={ola or 0: 6}, confidence=0.8), resolution=RESOLUTION
        ),
    )
    plan = form_client.get(f"/api/v1{saved.headers['location']}").json()
    assert plan["value"] == live.selection.value
    assert plan["scenario_changes"] == {"confidence": 0.8, "days_off": {str(ola): 6.0}}


def test_a_scenario_saved_over_a_colleagues_change_is_refused(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    csrf = form_client.csrf  # type: ignore[attr-defined]
    created = form_client.post(
        f"/teams/{workspace.team_id}/scenarios",
        data={"csrf_token": csrf, "period_id": str(workspace.period_id), "name": "Lean"},
        follow_redirects=False,
    )
    scenario_id = int(created.headers["location"].rsplit("/", 1)[1])
    url = f"/scenarios/{scenario_id}"
    token = Form(parse(form_client.get(url).text), url).value("based_on")
    first = form_client.post(
        url,
        data={"csrf_token": csrf, "based_on": token, "name": "Lean", "capacity_days": "9"},
        follow_redirects=False,
    )
    assert first.status_code == 303
    # The other manager, on the page as it was, renames it: that would drop the 9 days.
    stale = form_client.post(url, data={"csrf_token": csrf, "based_on": token, "name": "Leaner"})
    assert stale.status_code == 409
    shown = Form(parse(stale.text), url)
    assert shown.value("name") == "Leaner"
    said = " ".join(shown.errors())
    assert "was changed while you were editing" in said
    assert "changing capacity" in said, said
    assert "capacity days" not in said, said  # the page's word for it is "capacity"
    kept = client_scenario(form_client, scenario_id)
    assert (kept["name"], kept["changes"]["capacity_days"]) == ("Lean", 9)


def test_a_scenario_name_is_refused_in_the_schemas_words(
    workspace: Workspace, form_client: TestClient
) -> None:
    url = f"/teams/{workspace.team_id}/scenarios"
    csrf = form_client.csrf  # type: ignore[attr-defined]
    for name, message in (
        ("a\tb", "visible characters only"),
        ("x" * 201, "200 characters at most"),
    ):
        response = form_client.post(
            url, data={"csrf_token": csrf, "period_id": str(workspace.period_id), "name": name}
        )
        assert response.status_code == 422
        assert message in parse(response.text).text()


def test_a_plan_below_p50_says_its_ordinal_and_that_it_adds_value(
    workspace: Workspace, form_client: TestClient
) -> None:
    # Reported: "the 1th percentile ... so the extra certainty costs -50 value".
    made = post_scenario_form(
        form_client, workspace.team_id, workspace.period_id, name="Hopeful", confidence="P21"
    )
    assert made.status_code == 303, made.text[:300]
    page = form_client.get(made.headers["location"]).text
    text = " ".join(parse_html(page).text().split())
    assert "each effort at the 21st percentile of its estimate" in text
    assert "21th" not in text
    sentence = text.split("The P50 plan would be worth", 1)[1].split(".")[0]
    assert "-" not in sentence


def test_a_capacity_beside_days_off_is_refused_on_the_form_with_everything_kept(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    # Reported: capacity 50 days and focus factor 0.5 were stored and the focus factor listed
    # as changed, though the capacity made it count for nothing.
    before = counts(session)
    ola = workspace.members[0].id
    typed = {"capacity_days": "50", "focus_factor": "0.5", f"days_off.{ola}": "3"}
    refused = post_scenario_form(
        form_client, workspace.team_id, workspace.period_id, name="Both", **typed
    )
    assert refused.status_code == 422
    text = " ".join(parse_html(refused.text).by_id("error-summary").text().split())
    assert "focus factor and days off set here would change nothing" in text
    for value in typed.values():
        assert f'value="{value}"' in refused.text
    assert counts(session) == before
    saved = form_client.post(
        "/api/v1/plans",
        json={
            "name": "Both",
            "team_id": workspace.team_id,
            "period_id": workspace.period_id,
            "changes": {"capacity_days": 50, "reserve_pct": 10},
        },
    )
    assert saved.status_code == 422
    assert error_fields(saved) == ["capacity_days"]
    assert counts(session) == before


def test_days_off_over_the_period_are_refused_with_the_other_fields_at_once(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    """Four problems were listed, and 99 days off in a 10-day period only once they were
    fixed: one round trip for each kind of mistake."""
    before = counts(session)
    ola = workspace.members[0].id
    typed = {"focus_factor": "much", f"days_off.{ola}": "99"}
    refused = post_scenario_form(
        form_client, workspace.team_id, workspace.period_id, name="Both", **typed
    )
    assert refused.status_code == 422
    text = " ".join(parse_html(refused.text).by_id("error-summary").text().split())
    assert "Enter a number" in text
    assert "99 days off for" in text, text
    assert counts(session) == before
