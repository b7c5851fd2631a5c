"""The period overview: team summaries, and the joint plan checked against scipy's milp."""

from __future__ import annotations

import itertools
import re

import numpy as np
import pytest
from fastapi.testclient import TestClient
from scipy.optimize import Bounds, LinearConstraint, milp
from sqlmodel import Session, select

from server import demo
from server.models import Initiative, Period, Team
from server.planning.joint import joint_plan_for
from server.planning.plans import PlanOptions, plan_for
from server.schemas import CapacitySettingsIn, EffortIn, InitiativeCreate, TeamEffortIn
from server.store.initiatives import create_initiative
from server.store.periods import set_capacity_settings
from tests.factories import make_initiative, make_member, make_period, make_team
from tests.pages.html_tree import duplicate_ids, parse_html, unlabelled_controls

# Two teams of one full-time member each (10 days). Efforts and values per initiative, the
# cross-team one "Shared gateway" spending both teams' days.
HARBOUR = [("Quay wall", 6.0, 30.0), ("Dock crane", 5.0, 24.0), ("Dock lights", 3.0, 12.0)]
LIGHTHOUSE = [("Lamp", 7.0, 28.0), ("Fog horn", 4.0, 20.0)]
SHARED = ("Shared gateway", {"Harbour": 4.0, "Lighthouse": 3.0}, 35.0)


def _team(session: Session, name: str, period: Period) -> Team:
    team = make_team(session, name)
    make_member(session, team, f"{name} member")
    set_capacity_settings(
        session,
        team_id=team.id or 0,
        period_id=period.id or 0,
        settings_in=CapacitySettingsIn(focus_factor=1.0, reserve_pct=0.0),
    )
    return team


def _shared(
    session: Session,
    period: Period,
    harbour: Team,
    lighthouse: Team,
    shared: tuple[str, dict[str, float], float],
) -> int:
    """A Harbour initiative that also spends Lighthouse's days; its id."""
    title, efforts, value = shared
    created = create_initiative(
        session,
        initiative_in=InitiativeCreate(
            team_id=harbour.id or 0,
            period_id=period.id,
            title=title,
            effort=EffortIn(likely=efforts["Harbour"]),
            other_efforts=[TeamEffortIn(team_id=lighthouse.id or 0, likely=efforts["Lighthouse"])],
            value=value,
        ),
    )
    return created.row.id or 0


def build(session: Session) -> tuple[Period, Team, Team, dict[str, int]]:
    period = make_period(session)
    harbour = _team(session, "Harbour", period)
    lighthouse = _team(session, "Lighthouse", period)
    ids: dict[str, int] = {}
    for title, effort, value in HARBOUR:
        either = "Dock" if title.startswith("Dock") else None
        ids[title] = (
            make_initiative(session, harbour, period, title, effort, value, either_or=either).row.id
            or 0
        )
    ids[SHARED[0]] = _shared(session, period, harbour, lighthouse, SHARED)
    for title, effort, value in LIGHTHOUSE:
        needs = [ids[SHARED[0]]] if title == "Fog horn" else []
        ids[title] = (
            make_initiative(session, lighthouse, period, title, effort, value, needs=needs).row.id
            or 0
        )
    return period, harbour, lighthouse, ids


def _reference_milp() -> tuple[float, set[str]]:
    """The same plan written out directly for scipy.optimize.milp (HiGHS)."""
    titles = [t for t, _, _ in HARBOUR] + [SHARED[0]] + [t for t, _, _ in LIGHTHOUSE]
    values = np.array([v for _, _, v in HARBOUR] + [SHARED[2]] + [v for _, _, v in LIGHTHOUSE])
    harbour_days = [e for _, e, _ in HARBOUR] + [SHARED[1]["Harbour"], 0, 0]
    lighthouse_days = [0, 0, 0, SHARED[1]["Lighthouse"]] + [e for _, e, _ in LIGHTHOUSE]
    fog, shared = titles.index("Fog horn"), titles.index(SHARED[0])
    needs_row = np.zeros(len(titles))
    needs_row[fog], needs_row[shared] = 1, -1  # Fog horn only with the shared gateway
    either_row = np.array([0, 1, 1, 0, 0, 0])  # Dock crane or Dock lights
    constraints = [
        LinearConstraint(np.array([harbour_days, lighthouse_days]), -np.inf, [10, 10]),
        LinearConstraint(needs_row.reshape(1, -1), -np.inf, 0),
        LinearConstraint(either_row.reshape(1, -1), -np.inf, 1),
    ]
    result = milp(
        -values, integrality=np.ones(len(titles)), bounds=Bounds(0, 1), constraints=constraints
    )
    assert result.success
    x = np.rint(result.x)
    return float(values @ x), {t for t, on in zip(titles, x, strict=True) if on > 0.5}


def _brute_force_winners() -> list[set[str]]:
    items = [(t, {"Harbour": e}, v) for t, e, v in HARBOUR] + [SHARED]
    items += [(t, {"Lighthouse": e}, v) for t, e, v in LIGHTHOUSE]
    best, winners = -1.0, []
    for size in range(len(items) + 1):
        for subset in itertools.combinations(items, size):
            names = {t for t, _, _ in subset}
            if "Fog horn" in names and SHARED[0] not in names:
                continue
            if {"Dock crane", "Dock lights"} <= names:
                continue
            if any(sum(e.get(team, 0) for _, e, _ in subset) > 10 for team in SHARED[1]):
                continue
            total = sum(v for _, _, v in subset)
            if total > best:
                best, winners = total, [names]
            elif total == best:
                winners.append(names)
    return winners


def test_joint_plan_agrees_with_scipy_milp(session: Session) -> None:
    period, _, _, ids = build(session)
    value, chosen = _reference_milp()
    winners = _brute_force_winners()
    assert winners == [chosen], "the example must have one best joint plan"
    joint = joint_plan_for(session, period_id=period.id or 0)
    assert joint.selection is not None
    assert joint.selection.method == "milp-highs"
    assert joint.selection.value == pytest.approx(value)
    titles = {str(i): t for t, i in ids.items()}
    assert {titles[k] for k in joint.selection.chosen} == chosen
    (shared,) = joint.shared
    assert shared.title == SHARED[0]
    assert shared.chosen == (SHARED[0] in chosen)
    assert dict(shared.efforts) == SHARED[1]


def test_overview_page_shows_teams_and_joint_plan(
    form_client: TestClient, session: Session
) -> None:
    period, harbour, lighthouse, _ = build(session)
    value, chosen = _reference_milp()
    response = form_client.get(f"/periods/{period.id}/overview")
    assert response.status_code == 200
    root = parse_html(response.text)
    assert duplicate_ids(root) == []
    assert unlabelled_controls(root) == []
    for team in (harbour, lighthouse):
        plan = plan_for(
            session,
            team_id=team.id or 0,
            period_id=period.id or 0,
            options=PlanOptions(explain=False, curve=False),
        )
        cells = [td.text() for td in root.by_id(f"team-{team.id}").find_all("td")]
        assert cells[1] == f"{plan.selection.value:g}"
        assert cells[3] == "10"  # capacity in days
    assert float(root.by_id("joint-value").get("value") or 0) == pytest.approx(value)
    shared_row = root.find("tr", where=lambda n: (n.get("id") or "").startswith("shared-"))
    assert shared_row is not None
    mark = shared_row.find("td", cls="joint-decision")
    assert mark is not None
    assert mark.text() == ("In" if SHARED[0] in chosen else "Out")
    assert "Harbour: 4" in shared_row.text()
    assert "Lighthouse: 3" in shared_row.text()
    body = form_client.get(
        f"/periods/{period.id}/overview", headers={"Accept": "application/json"}
    ).json()
    assert body["joint"]["value"] == pytest.approx(value)
    assert body["joint"]["shared"][0]["chosen_jointly"] == (SHARED[0] in chosen)


def test_no_shared_work_means_no_joint_solve(form_client: TestClient, session: Session) -> None:
    period = make_period(session)
    team = _team(session, "Harbour", period)
    make_initiative(session, team, period, "Quay wall", 3, 10)
    assert joint_plan_for(session, period_id=period.id or 0).selection is None
    text = parse_html(form_client.get(f"/periods/{period.id}/overview").text).text()
    assert "each team's own plan is the whole story" in text


def test_team_without_capacity_is_named(form_client: TestClient, session: Session) -> None:
    period = make_period(session)
    harbour = make_team(session, "Harbour")
    make_initiative(session, harbour, period, "Quay lights")
    make_initiative(session, harbour, period, "Tide board")
    root = parse_html(form_client.get(f"/periods/{period.id}/overview").text)
    assert "No capacity in this period yet" in root.text()
    # Its initiatives are still counted: the team has work waiting for capacity.
    row = next(tr for tr in root.find_all("tr") if "Harbour" in tr.text())
    assert row.find_all("td")[0].text() == "2"


def test_demo_overview_solves_the_shared_initiative(
    form_client: TestClient, session: Session
) -> None:
    demo.load(session)
    quarter = session.exec(select(Period).where(Period.name == demo.QUARTER)).one()
    body = form_client.get(
        f"/periods/{quarter.id}/overview", headers={"Accept": "application/json"}
    ).json()
    assert body["joint"]["solved"]
    assert body["joint"]["method"] == "milp-highs"
    assert [s["title"] for s in body["joint"]["shared"]] == [demo.CROSS_TEAM_TITLE]
    for team in body["joint"]["teams"]:
        assert team["effort_days"] <= team["capacity_days"] + 1e-9


def test_the_demo_overview_explains_why_the_teams_totals_differ_from_the_joint_plan(
    form_client: TestClient, session: Session
) -> None:
    """The teams' own values summed to more than the joint plan with no word on why."""
    demo.load(session)
    quarter = session.exec(select(Period).where(Period.name == demo.QUARTER)).one()
    url = f"/periods/{quarter.id}/overview"
    body = form_client.get(url, headers={"Accept": "application/json"}).json()
    own_total = sum(t["value"] for t in body["teams"] if t["feasible"] is not None)
    joint = body["joint"]["value"]
    page = parse_html(form_client.get(url).text)
    gap = page.by_id("joint-gap")
    # The demo's shared initiative is in one team's own plan and out of its owner's.
    assert own_total != joint
    assert gap is not None
    text = " ".join(gap.text().split())
    assert f"add up to value {own_total:g}" in text
    assert f"{abs(own_total - joint):g} {'more' if own_total > joint else 'less'}" in text
    decisions = {
        row.attrs["id"]: row.text()
        for row in page.find_all("tr")
        if "shared-" in row.attrs.get("id", "")
    }
    for shared in body["joint"]["shared"]:
        own = set(shared["chosen_in_own_plans"].values())
        text = decisions[f"shared-{shared['id']}"]
        assert ("the teams' own plans disagree" in text) == (len(own) > 1)


def test_a_team_whose_marks_cannot_be_planned_is_named_by_titles(
    form_client: TestClient, session: Session
) -> None:
    """Marks stored before the store refused them (two pins in one either-or set): the
    overview names the initiatives by title, not by their database ids."""
    period = make_period(session)
    harbour = make_team(session, "Harbour")
    make_member(session, harbour, "Ola")
    for title in ("Paper tickets", "Phone tickets"):
        row = make_initiative(session, harbour, period, title, 2, 5, either_or="Tickets").row
        row.state = "pinned"  # written past the store's check, as older data could be
        session.add(row)
    session.commit()
    text = parse_html(form_client.get(f"/periods/{period.id}/overview").text).text()
    assert "“Paper tickets”" in text
    assert "“Phone tickets”" in text
    assert "initiative '" not in text


# Harbour's own plan takes the shared berth (its 4 days fit beside the quay); Lighthouse's own
# plan leaves it out (its 8 days crowd out two better rows). The joint plan must honour both.
CHANGE_HARBOUR = {"Quay": (6.0, 20.0), "Depot": (4.0, 15.0)}
CHANGE_LIGHTHOUSE = {"Beam": (5.0, 30.0), "Cable": (5.0, 30.0)}
CHANGE_SHARED = ("Shared berth", {"Harbour": 4.0, "Lighthouse": 8.0}, 50.0)


def _best(items: dict[str, tuple[dict[str, float], float]], days: dict[str, float]) -> set[str]:
    """Brute force: the one most valuable set whose effort fits every team's days."""
    best, winners = -1.0, []
    for size in range(len(items) + 1):
        for subset in itertools.combinations(items, size):
            if any(sum(items[t][0].get(team, 0) for t in subset) > days[team] for team in days):
                continue
            total = sum(items[t][1] for t in subset)
            if total > best:
                best, winners = total, [set(subset)]
            elif total == best:
                winners.append(set(subset))
    assert len(winners) == 1, "the example must have one best plan"
    return winners[0]


def test_the_overview_lists_what_the_joint_plan_changes_per_team(
    form_client: TestClient, session: Session
) -> None:
    period = make_period(session)
    harbour = _team(session, "Harbour", period)
    lighthouse = _team(session, "Lighthouse", period)
    for team, rows in ((harbour, CHANGE_HARBOUR), (lighthouse, CHANGE_LIGHTHOUSE)):
        for title, (effort, value) in rows.items():
            make_initiative(session, team, period, title, effort, value)
    _shared(session, period, harbour, lighthouse, CHANGE_SHARED)
    title, efforts, value = CHANGE_SHARED
    everything = {t: ({"Harbour": e}, v) for t, (e, v) in CHANGE_HARBOUR.items()}
    everything |= {t: ({"Lighthouse": e}, v) for t, (e, v) in CHANGE_LIGHTHOUSE.items()}
    everything[title] = (efforts, value)
    joint = _best(everything, {"Harbour": 10.0, "Lighthouse": 10.0})
    expected = {}
    for team in ("Harbour", "Lighthouse"):
        mine = {t: (e, v) for t, (e, v) in everything.items() if team in e}
        own = _best(mine, {team: 10.0})  # a team's own plan sees only its own share
        expected[team] = (
            sorted((joint & set(mine)) - own),
            sorted((own - joint) & set(mine)),
        )
    assert expected["Harbour"] == (["Depot"], ["Shared berth"])  # the example does differ
    assert expected["Lighthouse"] == ([], [])

    body = form_client.get(
        f"/periods/{period.id}/overview", headers={"Accept": "application/json"}
    ).json()
    listed = {
        c["name"]: (sorted(c["takes_in"]), sorted(c["leaves_out"]))
        for c in body["joint"]["changes_by_team"]
    }
    assert listed == expected
    html = form_client.get(f"/periods/{period.id}/overview").text

    def said(element_id: str) -> str:
        found = re.search(f'<li id="{element_id}">(.*?)</li>', html, re.S)
        assert found, element_id
        return " ".join(re.sub(r"<[^>]+>", "", found.group(1)).split())

    assert said(f"joint-change-{harbour.id}") == (
        "Harbour: takes in “Depot”, which its own plan leaves out; "
        "leaves out “Shared berth”, which its own plan takes."
    )
    assert said(f"joint-change-{lighthouse.id}") == (
        "Lighthouse: the same initiatives as its own plan."
    )


def test_a_joint_plan_that_cannot_be_made_names_teams_and_work_as_pages_do(
    form_client: TestClient, session: Session
) -> None:
    """Pinned shared work spending 12 of Lighthouse's 10 days: the overview says so with the
    team's name, not the selector's key for it (the team's id)."""
    period = make_period(session)
    harbour = _team(session, "Harbour", period)
    lighthouse = _team(session, "Lighthouse", period)
    make_initiative(session, harbour, period, "Quay wall", 6, 30)
    shared = _shared(
        session, period, harbour, lighthouse, ("Tide gate", {"Harbour": 2, "Lighthouse": 12}, 9)
    )
    row = session.get(Initiative, shared)
    assert row is not None
    row.state = "pinned"
    session.add(row)
    session.commit()
    joint = joint_plan_for(session, period_id=period.id or 0)
    assert joint.selection is not None
    assert joint.selection.infeasibility == "Pinned work overruns team Lighthouse by 2 days."
    root = parse_html(form_client.get(f"/periods/{period.id}/overview").text)
    text = root.text()
    assert "Pinned work overruns team Lighthouse by 2 days." in text
    assert f"team '{lighthouse.id}'" not in text
