"""Marks no plan can honour are refused when stored; blocked work is planned and explained.

Marks are pins, rule-outs, needs and either-or sets. Reference for what contradicts: the
selector's own refusals (solve), which the store's check must match exactly; the expected
plans in the blocked cases are worked out by hand beside each test.
"""

from __future__ import annotations

import itertools
import random

import pytest
from fastapi.testclient import TestClient
from sqlmodel import Session, func, select

from server.errors import InputError
from server.models import Initiative, Scenario
from server.planning.plans import PlanOptions, plan_for
from server.schemas import InitiativeUpdate
from server.selector import Item, Problem, SelectorInputError, check_marks, solve
from server.store.initiatives import get_initiative, update_initiative
from server.store.plans import create_scenario
from tests.api.support import error_fields, error_text
from tests.factories import make_initiative, make_period, make_team
from tests.pages.test_plan_pages import (
    Setup,
    _capacity,
    decision,
    edit_url,
    page,
    post_form,
    row_fields,
)

# --- the selector's check agrees with solve --------------------------------------------------


def _random_marks(rng: random.Random, n: int) -> list[Item]:
    items = []
    for k in range(n):
        state = rng.choice(["free", "free", "pinned", "ruled_out"])
        needs = tuple(str(j) for j in range(k) if rng.random() < 0.2)  # earlier only: no cycle
        items.append(
            Item(
                key=str(k),
                effort=1.0,
                value=1.0,
                pinned=state == "pinned",
                ruled_out=state == "ruled_out",
                needs=needs,
                either_or=rng.choice([None, None, "A", "B"]),
            )
        )
    return items


def test_check_marks_refuses_exactly_what_solve_refuses() -> None:
    """Reference: solve itself, with room for every item, on 2,000 random sets of marks."""
    rng = random.Random(2026)
    refused = 0
    for _ in range(2000):
        items = _random_marks(rng, rng.randint(1, 7))
        try:
            solve(Problem(items=tuple(items), capacity=100.0))
            solved = True
        except SelectorInputError:
            solved = False
        try:
            check_marks(items)
            checked = True
        except SelectorInputError:
            checked = False
        assert checked == solved, items
        refused += not checked
    assert 200 < refused < 1800  # both outcomes are well represented


def test_check_marks_ignores_efforts_and_values() -> None:
    heavy = [Item("a", 500.0, 1.0, pinned=True), Item("b", 0.5, 9.0, pinned=True)]
    check_marks(heavy)  # over any capacity, but no contradiction among the marks


# --- the store refuses, through the API and the plan page -----------------------------------


def _count(session: Session) -> int:
    session.expire_all()
    return session.exec(select(func.count()).select_from(Initiative)).one()


def _create(client: TestClient, team: int, period: int, title: str, **fields: object):
    body = {"team_id": team, "period_id": period, "title": title, "effort": 2, "value": 5}
    return client.post("/api/v1/initiatives", json=body | fields)


def test_api_refuses_a_second_pin_in_an_either_or_set(client: TestClient, session: Session) -> None:
    team, period = make_team(session), make_period(session)
    t, p = team.id or 0, period.id or 0
    assert (
        _create(client, t, p, "Tide gauge", state="pinned", either_or="Sensors").status_code == 201
    )
    other = _create(client, t, p, "Wave buoy", either_or="Sensors").json()
    before = _count(session)
    second = _create(client, t, p, "Wind mast", state="pinned", either_or="Sensors")
    assert second.status_code == 422
    assert error_fields(second) == ["either_or"]
    text = error_text(second)
    assert "“Wind mast”" in text
    assert "“Tide gauge”" in text
    assert "Sensors" in text
    assert "initiative '" not in text  # titles, not ids
    assert _count(session) == before
    # Pinning the free member is refused the same way, naming the state just set.
    pin = client.patch(
        f"/api/v1/initiatives/{other['id']}", json={"version": other["version"], "state": "pinned"}
    )
    assert pin.status_code == 422
    assert error_fields(pin) == ["state"]
    session.expire_all()
    stored = get_initiative(session, initiative_id=other["id"]).row
    assert (stored.state, stored.version) == ("candidate", other["version"])


def test_api_refuses_ruling_out_what_pinned_work_needs(
    client: TestClient, session: Session
) -> None:
    team, period = make_team(session), make_period(session)
    t, p = team.id or 0, period.id or 0
    base = _create(client, t, p, "Quay survey").json()
    _create(client, t, p, "Quay wall", state="pinned", needs=[base["id"]])
    out = client.patch(
        f"/api/v1/initiatives/{base['id']}", json={"version": base["version"], "state": "ruled_out"}
    )
    assert out.status_code == 422
    assert "“Quay wall” needs ruled-out “Quay survey”" in error_text(out)
    allowed = _create(client, t, p, "Quay lights", state="pinned", needs=[base["id"]])
    assert allowed.status_code == 201  # base is still a candidate: pinned work pulls it in


def test_backlog_and_other_periods_are_separate_plans(client: TestClient, session: Session) -> None:
    team, first = make_team(session), make_period(session)
    t = team.id or 0
    _create(client, t, first.id or 0, "Crane A", state="pinned", either_or="Crane")
    assert _create(client, t, None, "Crane B", state="pinned", either_or="Crane").status_code == 201  # type: ignore[arg-type]


def test_plan_row_shows_the_refusal_and_keeps_the_typed_state(
    form_client: TestClient, session: Session
) -> None:
    team, period = make_team(session), make_period(session)
    _capacity(session, team, period, 2)
    first = make_initiative(session, team, period, "Tide gauge", state="pinned", either_or="S")
    second = make_initiative(session, team, period, "Wave buoy", either_or="S")
    ids = {"Tide gauge": first.row.id or 0, "Wave buoy": second.row.id or 0}
    setup = Setup(team, period, ids)
    response = post_form(
        form_client,
        edit_url(setup, "Wave buoy"),
        row_fields(session, ids["Wave buoy"], state="pinned"),
    )
    assert response.status_code == 422
    assert "is pinned, but so is “Tide gauge”" in response.text
    session.expire_all()
    assert get_initiative(session, initiative_id=ids["Wave buoy"]).row.state == "candidate"


def test_the_plan_api_answers_409_not_500_for_marks_stored_earlier(
    client: TestClient, session: Session
) -> None:
    """Marks written before the check existed (here straight to the table) give a message."""
    team, period = make_team(session), make_period(session)
    _capacity(session, team, period, 1)
    a = make_initiative(session, team, period, "Tide gauge", state="pinned", either_or="S")
    b = make_initiative(session, team, period, "Wave buoy", either_or="S")
    b.row.state = "pinned"
    session.add(b.row)
    session.commit()
    url = f"/api/v1/teams/{team.id}/periods/{period.id}/plan"
    response = client.get(url)
    assert response.status_code == 409
    message = response.json()["detail"]["message"]
    assert "“Wave buoy” is pinned, but so is “Tide gauge”" in message
    assert a.row.id is not None


def test_the_plan_api_answers_409_for_a_team_without_capacity(
    client: TestClient, session: Session
) -> None:
    team, period = make_team(session), make_period(session)
    make_initiative(session, team, period, "Tide gauge")
    response = client.get(f"/api/v1/teams/{team.id}/periods/{period.id}/plan")
    assert response.status_code == 409
    assert "no capacity" in response.json()["detail"]["message"]


# --- blocked work: needs another team has not committed to -----------------------------------


@pytest.fixture
def harbour(session: Session):
    """Harbour (capacity 10 days) and Quay in Sprint 1; Harbour's work needs Quay's "Fare API",
    which Quay has not pinned, so that work is blocked in Harbour's plan."""
    team, other, period = make_team(session), make_team(session, "Quay"), make_period(session)
    _capacity(session, team, period, 1)
    needed = make_initiative(session, other, period, "Fare API")
    return team, period, needed.row.id or 0


def test_pinned_blocked_work_is_out_with_a_warning_and_a_blocked_reason(
    session: Session, harbour
) -> None:
    team, period, needed = harbour
    make_initiative(session, team, period, "Fare estimate", 3, 17, state="pinned", needs=[needed])
    filler = make_initiative(session, team, period, "Map tiles", 4, 5)
    plan = plan_for(session, team_id=team.id or 0, period_id=period.id or 0, options=None)
    rows = {row.record.row.title: row for row in plan.rows}
    assert not rows["Fare estimate"].chosen
    assert rows["Map tiles"].chosen
    assert rows["Fare estimate"].blocked_by == ("Fare API",)
    assert any("“Fare estimate” is pinned but cannot be in this plan" in w for w in plan.warnings)
    reason = rows["Fare estimate"].explanation.reason  # type: ignore[union-attr]
    assert reason.startswith("Blocked: it needs “Fare API”, which cannot be chosen in this plan;")
    assert "Ruled out" not in reason
    assert "were it free, the best plan would reach 22" in reason  # 17 + 5, both fit in 10 days
    assert filler.row.id is not None


def test_pinned_work_needing_blocked_work_is_blocked_too(session: Session, harbour) -> None:
    team, period, needed = harbour
    blocked = make_initiative(session, team, period, "Fare rules", 2, 3, needs=[needed])
    pinned = make_initiative(
        session, team, period, "Fare display", 2, 8, state="pinned", needs=[blocked.row.id or 0]
    )
    plan = plan_for(session, team_id=team.id or 0, period_id=period.id or 0, options=None)
    rows = {row.record.row.title: row for row in plan.rows}
    assert rows["Fare display"].blocked_by == ("Fare rules",)
    assert not rows["Fare display"].chosen
    assert not rows["Fare rules"].chosen
    assert pinned.row.id is not None


def test_a_blocked_member_beside_a_pinned_one_is_kept_out_by_the_pin(
    session: Session, harbour
) -> None:
    team, period, needed = harbour
    make_initiative(session, team, period, "Paper tickets", 2, 3, state="pinned", either_or="T")
    make_initiative(session, team, period, "Phone tickets", 2, 9, either_or="T", needs=[needed])
    plan = plan_for(session, team_id=team.id or 0, period_id=period.id or 0, options=None)
    chosen = {row.record.row.title for row in plan.rows if row.chosen}
    assert chosen == {"Paper tickets"}


def test_plan_page_labels_the_cost_of_a_block(
    form_client: TestClient, session: Session, harbour
) -> None:
    team, period, needed = harbour
    fare = make_initiative(
        session, team, period, "Fare estimate", 3, 17, state="pinned", needs=[needed]
    )
    fid = fare.row.id or 0
    root = page(
        form_client, f"/teams/{team.id}/plan/initiatives/{fid}/explain?period_id={period.id}"
    )
    text = root.text()
    assert "The block costs" in text
    assert "Ruling it out costs" not in text
    assert "Blocked: it needs “Fare API”" in text
    plan_root = page(form_client, f"/teams/{team.id}/plan?period_id={period.id}")
    assert decision(plan_root, fid) == "out"
    assert "is pinned but cannot be in this plan" in plan_root.text()


def test_update_store_call_refuses_without_a_new_version(session: Session) -> None:
    team, period = make_team(session), make_period(session)
    make_initiative(session, team, period, "Tide gauge", state="pinned", either_or="S")
    other = make_initiative(session, team, period, "Wave buoy", either_or="S")
    with pytest.raises(InputError) as caught:
        update_initiative(
            session,
            initiative_id=other.row.id or 0,
            initiative_in=InitiativeUpdate(version=other.row.version, state="pinned"),
        )
    assert caught.value.field == "state"
    session.expire_all()
    assert get_initiative(session, initiative_id=other.row.id or 0).row.version == 1


def test_every_pair_of_states_in_one_set_is_stored_only_when_plannable(session: Session) -> None:
    """Reference: the selector's solve on the same two items (9 state pairs)."""
    states = ["candidate", "pinned", "ruled_out"]
    for k, (first, second) in enumerate(itertools.product(states, states)):
        team, period = make_team(session, f"Team {k}"), make_period(session, f"P{k}")
        make_initiative(session, team, period, "One", state=first, either_or="S")
        items = tuple(
            Item(str(i), 1.0, 1.0, pinned=s == "pinned", ruled_out=s == "ruled_out", either_or="S")
            for i, s in enumerate((first, second))
        )
        try:
            solve(Problem(items=items, capacity=10.0))
            plannable = True
        except SelectorInputError:
            plannable = False
        try:
            make_initiative(session, team, period, "Two", state=second, either_or="S")
            stored = True
        except InputError:
            session.rollback()
            stored = False
        assert stored == plannable, (first, second)


def test_plan_rows_show_their_needs_and_either_or_set(
    form_client: TestClient, session: Session, harbour
) -> None:
    team, period, needed = harbour
    base = make_initiative(session, team, period, "Stop list", 2, 3)
    make_initiative(
        session, team, period, "Stop search", 2, 4, needs=[base.row.id or 0], either_or="Search"
    )
    make_initiative(session, team, period, "Fare estimate", 3, 17, needs=[needed])
    root = page(form_client, f"/teams/{team.id}/plan?period_id={period.id}")
    rows = {r.find(cls="title-text").text(): r for r in root.find_all("tr", cls="plan-row")}
    tags = [t.text() for t in rows["Stop search"].find_all("span", cls="tag")]
    assert "needs Stop list" in tags
    assert "either-or set: Search" in tags
    blocked = [t.text() for t in rows["Fare estimate"].find_all("span", cls="tag")]
    assert "blocked: needs Fare API" in blocked
    assert [t.text() for t in rows["Stop list"].find_all("span", cls="tag")] == []


def test_forcing_in_blocked_work_is_refused_on_the_plan_page(
    form_client: TestClient, session: Session, harbour
) -> None:
    team, period, needed = harbour
    fare = make_initiative(session, team, period, "Fare estimate", 3, 17, needs=[needed])
    make_initiative(session, team, period, "Map tiles", 4, 5)
    fid = fare.row.id or 0
    explain = page(
        form_client, f"/teams/{team.id}/plan/initiatives/{fid}/explain?period_id={period.id}"
    )
    assert "Force in" not in explain.text()  # blocked: nothing to force in
    assert "What-if (not stored)" not in explain.text()  # and no empty label for it
    assert "Forcing it in would displace" not in explain.text()
    # Forced in anyway (an old link): no plan with it, and why; before, it was planned "In"
    # without what it needs and its 17 counted in the plan's value.
    forced = page(form_client, f"/teams/{team.id}/plan?period_id={period.id}&force_in={fid}")
    text = forced.text()
    assert "This what-if cannot be planned: “Fare estimate” is blocked: it needs “Fare API”" in text
    assert "Clear the forcing to see the plan." in text
    with pytest.raises(SelectorInputError):
        plan_for(
            session,
            team_id=team.id or 0,
            period_id=period.id or 0,
            options=PlanOptions(forced_in=frozenset({fid})),
        )


def test_a_scenario_forcing_in_blocked_work_is_refused(
    client: TestClient, session: Session, harbour
) -> None:
    team, period, needed = harbour
    fare = make_initiative(session, team, period, "Fare estimate", 3, 17, needs=[needed])
    before = session.exec(select(func.count()).select_from(Scenario)).one()
    response = client.post(
        "/api/v1/scenarios",
        json={
            "name": "Fares first",
            "team_id": team.id,
            "period_id": period.id,
            "changes": {"forced_in": [fare.row.id]},
        },
    )
    assert response.status_code == 422
    assert error_fields(response) == ["forced_in"]
    assert "“Fare estimate” is blocked: it needs “Fare API”" in error_text(response)
    assert session.exec(select(func.count()).select_from(Scenario)).one() == before


def test_the_live_plan_api_says_blocked_work_is_blocked_and_names_work_by_title(
    client: TestClient, session: Session, harbour
) -> None:
    team, period, needed = harbour
    fare = make_initiative(session, team, period, "Fare estimate", 3, 17, needs=[needed])
    make_initiative(session, team, period, "Map tiles", 9, 5)
    make_initiative(session, team, period, "Route cache", 8, 4)
    answer = client.get(f"/api/v1/teams/{team.id}/periods/{period.id}/plan").json()
    reasons = {e["key"]: e["reason"] for e in answer["selection"]["explanations"]}
    blocked = reasons[str(fare.row.id)]
    assert blocked.startswith("Blocked: it needs “Fare API”, which cannot be chosen in this plan;")
    assert "Ruled out" not in blocked
    # Map tiles and Route cache cannot both fit in 10 days: the one left out names the other.
    worded = " ".join(reasons.values())
    assert "“Map tiles”" in worded or "“Route cache”" in worded
    assert all(f"'{key}'" not in worded for key in reasons), worded
    assert not any(f"displace {key}" in worded for key in reasons), worded


def test_a_saved_plan_says_blocked_work_is_blocked(
    form_client: TestClient, session: Session, harbour
) -> None:
    team, period, needed = harbour
    make_initiative(session, team, period, "Fare estimate", 3, 17, needs=[needed])
    saved = post_form(
        form_client,
        "/plans",
        {"team_id": str(team.id), "period_id": str(period.id), "name": "Sprint 1 as agreed"},
    )
    assert saved.status_code == 303
    text = form_client.get(saved.headers["location"]).text
    assert "Blocked: it needs “Fare API”, which cannot be chosen in this plan;" in text
    assert "Ruled out: never in the plan" not in text
    markdown = form_client.get(saved.headers["location"] + "/export.md").text
    assert "Ruled out" not in markdown


def test_a_scenario_that_became_unplannable_names_the_blocked_work_by_title(
    form_client: TestClient, session: Session, harbour
) -> None:
    """Forcing in was allowed while the need was met inside the plan; then it moved out."""
    team, period, needed = harbour
    fare = make_initiative(session, team, period, "Fare estimate", 3, 17, needs=[needed])
    scenario = create_scenario(
        session,
        team_id=team.id or 0,
        period_id=period.id or 0,
        name="Fares first",
        changes={"forced_in": [fare.row.id]},
    )  # stored directly: the forcing is checked when made, and blocked only later here
    text = page(form_client, f"/scenarios/{scenario.id}").text()
    assert "“Fare estimate” is blocked: it needs “Fare API”" in text
    assert "initiative '" not in text
