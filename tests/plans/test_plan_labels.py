"""How saved plans and scenarios are told apart on lists: compare column headers with name and
save time to the minute, the changed-inputs wording of a plan saved from the live plan, and
each scenario's value and effort beside the live plan's on the scenario list."""

from __future__ import annotations

import datetime as dt

from fastapi.testclient import TestClient
from sqlmodel import Session

from server.models import SavedPlan
from server.planning.scenarios import ScenarioChanges, solve_scenario
from server.store import plans as store
from server.wording import days
from tests.pages.parsed_page import parse
from tests.plans.conftest import Workspace, save_live

SAVED_AT = dt.datetime(2026, 12, 2, 14, 5, 31, tzinfo=dt.UTC)


def _copy_saved_at(session: Session, plan_id: int, at: dt.datetime) -> int:
    """Another row of the same plan, saved at `at` (a plan row is only ever inserted)."""
    original = store.get_plan(session, plan_id=plan_id)
    fields = original.model_dump(exclude={"id", "created_at"})
    copy = SavedPlan(**fields, created_at=at)
    session.add(copy)
    session.commit()
    return copy.id or 0


def _headers(client: TestClient, ids: list[int]) -> list[str]:
    page = parse(client.get("/compare?plans=" + ",".join(map(str, ids))).text)
    table = page.find("table", cls="cmp-figures")
    return [th.text() for th in table.find("thead").find_all("th")[1:]]


def test_compare_headers_show_name_and_save_time_and_tell_twins_apart(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    first = save_live(form_client, workspace, "Journey Planner · Q1")["id"]
    twin_a = _copy_saved_at(session, first, SAVED_AT)
    twin_b = _copy_saved_at(session, first, SAVED_AT + dt.timedelta(seconds=20))
    later = _copy_saved_at(session, first, SAVED_AT + dt.timedelta(minutes=3))

    headers = _headers(form_client, [twin_a, twin_b, later])

    assert all("Journey Planner · Q1" in h for h in headers)
    assert "saved 2026-12-02 14:05 UTC" in headers[0]
    assert "saved 2026-12-02 14:08 UTC" in headers[2]
    # Same name, same minute: the plan's number says which is which; the later one needs none.
    assert f"plan {twin_a}" in headers[0]
    assert f"plan {twin_b}" in headers[1]
    assert "plan " not in headers[2].replace("Planner", "")


def test_a_plan_saved_from_the_live_plan_says_so_under_changed_inputs(
    workspace: Workspace, form_client: TestClient
) -> None:
    live = save_live(form_client, workspace, "Live")["id"]
    lean = save_live(form_client, workspace, "Lean", changes={"capacity_days": 6})["id"]
    page = parse(form_client.get(f"/compare?plans={live},{lean}").text)
    row = next(
        tr for tr in page.find_all("tr") if tr.find_all("th") and "Changed inputs" in tr.text()
    )
    cells = [td.text() for td in row.find_all("td")]
    assert cells[0] == "none (saved from the live plan)"
    assert "Capacity: 6 days" in cells[1]


def test_the_scenario_list_shows_each_scenarios_value_and_effort_beside_the_live_plan(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    changes = ScenarioChanges(capacity_days=6)
    store.create_scenario(
        session,
        team_id=workspace.team_id,
        period_id=workspace.period_id,
        name="Short week",
        changes=changes.to_json(),
    )
    outcome = solve_scenario(
        session,
        team_id=workspace.team_id,
        period_id=workspace.period_id,
        changes=changes,
        resolution=0.5,
    )
    assert outcome.plan is not None
    assert outcome.live is not None
    page = parse(form_client.get(f"/teams/{workspace.team_id}/scenarios").text)
    item = next(li for li in page.find_all("li") if "Short week" in li.text())
    text = " ".join(item.text().split())
    scenario, live = outcome.plan.selection, outcome.live.selection
    assert f"value {scenario.value:g} (live plan {live.value:g})" in text
    assert (
        f"effort {days(scenario.effort)} of {days(scenario.capacity)} days "
        f"(live plan {days(live.effort)} of {days(live.capacity)})"
    ) in text
