"""Compare a team's live plan and its scenarios in a period, solved now and saved nowhere.

A pick is "live" (the live plan) or a scenario id; two to four picks, each once, make the
columns of an ordinary comparison (compare.compare_columns). Every column is solved from
today's live data when the page is drawn, so nothing has to be saved to see two what-ifs side
by side; saving one freezes it as before.
"""

from __future__ import annotations

from collections.abc import Sequence

from sqlmodel import Session

from server.errors import InputError, LoadlineError, NotFoundError
from server.models import utcnow
from server.planning.compare import (
    Column,
    Comparison,
    check_count,
    column_of,
    compare_columns,
    parse_plan_ids,
)
from server.planning.scenarios import ScenarioChanges, capture, changes_from_json
from server.planning.snapshots import Snapshot
from server.schemas import MAX_ID
from server.store.periods import get_period
from server.store.plans import get_plans, get_scenario
from server.store.teams import get_team
from server.wording import possessive

LIVE = "live"
LIVE_NAME = "Live plan"
_SHOWN_CHARS = 40  # of a pick that is not one, in the refusal


def parse_picks(raw: Sequence[str]) -> list[str]:
    """Read `pick=live,3,5` (or repeated `pick=`): "live" or scenario ids, 2 to 4, once each."""
    parts = [p.strip().lower() for chunk in raw for p in chunk.split(",") if p.strip()]
    for part in parts:
        if part != LIVE and not (part.isdigit() and 1 <= int(part) <= MAX_ID):
            shown = part if len(part) <= _SHOWN_CHARS else f"{part[:_SHOWN_CHARS]}…"
            raise InputError(
                f"pick: “{shown}” is neither “{LIVE}” nor a scenario id.", field="pick"
            )
    picks = [part if part == LIVE else str(int(part)) for part in parts]
    if len(set(picks)) != len(picks):
        raise InputError("pick: Each plan may be picked only once.", field="pick")
    check_count(len(picks), field="pick", things="of the live plan and the scenarios")
    return picks


def picks_of(comparison: Comparison) -> list[str]:
    """The picks a comparison of them was made from, in its column order."""
    return [LIVE if p.scenario_id is None else str(p.scenario_id) for p in comparison.plans]


def compare_picks(
    session: Session, *, team_id: int, period_id: int, pick: Sequence[str], resolution: float
) -> Comparison:
    """Solve each pick (`pick=` as sent, see parse_picks) on today's live data and compare
    them, in the order picked."""
    picks = parse_picks(pick)
    team = get_team(session, team_id=team_id)
    period = get_period(session, period_id=period_id)
    # Every pick is checked before any is solved, so a refusal names the pick that is wrong.
    wanted: list[tuple[str, int | None, ScenarioChanges]] = []
    for pick in picks:
        if pick == LIVE:
            wanted.append((LIVE_NAME, None, ScenarioChanges()))
            continue
        scenario = get_scenario(session, scenario_id=int(pick))
        if scenario.team_id != team_id or scenario.period_id != period_id:
            raise InputError(
                f"pick: Scenario “{scenario.name}” is not one of {possessive(team.name)} "
                f"scenarios in {period.name}.",
                field="pick",
            )
        wanted.append((scenario.name, scenario.id, changes_from_json(scenario.changes)))
    solved_at = utcnow()
    columns = []
    for name, scenario_id, changes in wanted:
        snapshot = _solved(
            session,
            team_id=team_id,
            period_id=period_id,
            changes=changes,
            resolution=resolution,
            name=name,
            scenario_name=None if scenario_id is None else name,
        )
        columns.append(
            Column(
                id=None,
                name=name,
                created_at=solved_at,
                created_by="",
                inputs=snapshot.inputs_json(),
                result=snapshot.result_json(),
                scenario_id=scenario_id,
            )
        )
    return compare_columns(columns)


def compare_saved(session: Session, *, plans: Sequence[str], resolution: float) -> Comparison:
    """Compare saved plans (`plans=` as sent, see compare.parse_plan_ids), with the live plan
    now wherever "live" stands: the live plan of the first saved plan's team and period, solved
    on today's data and saved nowhere."""
    picks = parse_plan_ids(plans)
    db_plans = get_plans(session, plan_ids=[p for p in picks if p is not None])
    by_id = {p.id: p for p in db_plans}
    columns = []
    for pick in picks:
        if pick is not None:
            columns.append(column_of(by_id[pick]))
            continue
        inputs = db_plans[0].inputs
        team, period = inputs["teams"][0], inputs["period"]
        try:
            get_team(session, team_id=team["id"])
            get_period(session, period_id=period["id"])
        except NotFoundError as exc:
            raise InputError(
                f"plans: There is no live plan of {team['name']} in {period['name']} to "
                "compare with: the team or the period has been deleted.",
                field="plans",
            ) from exc
        snapshot = _solved(
            session,
            team_id=team["id"],
            period_id=period["id"],
            changes=ScenarioChanges(),
            resolution=resolution,
            name=LIVE_NAME,
            scenario_name=None,
            field="plans",
        )
        columns.append(
            Column(
                id=None,
                name=f"{LIVE_NAME} now",
                created_at=utcnow(),
                created_by="",
                inputs=snapshot.inputs_json(),
                result=snapshot.result_json(),
            )
        )
    return compare_columns(columns)


def _solved(
    session: Session,
    *,
    team_id: int,
    period_id: int,
    changes: ScenarioChanges,
    resolution: float,
    name: str,
    scenario_name: str | None,
    field: str = "pick",
) -> Snapshot:
    """One column's snapshot; a plan that cannot be solved is refused naming it."""
    try:
        return capture(
            session,
            team_id=team_id,
            period_id=period_id,
            changes=changes,
            resolution=resolution,
            scenario_name=scenario_name,
        )
    except LoadlineError as exc:
        what = "the live plan" if scenario_name is None else f"scenario “{name}”"
        raise InputError(f"{field}: {what} cannot be solved: {exc.message}", field=field) from exc
