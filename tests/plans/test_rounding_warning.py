"""Work that fits in days but not in the selector's rounded units is named, not left silent.

Worked by hand: one member at 36 % for 10 working days, focus 1, no reserve: 3.6 days, which
is 7 units of 0.5 day (3.5 days). Three initiatives of 1.2 days each round up to 3 units
(1.5 days); two fit in 7 units, three would need 9. In days all three fit (3.6 days).
"""

from __future__ import annotations

import pytest
from sqlmodel import Session

from server.planning.plans import PlanOptions, plan_for
from server.planning.scenarios import ScenarioChanges, capture
from server.planning.snapshots import view_of
from server.schemas import CapacitySettingsIn
from server.store.periods import set_capacity_settings
from tests.factories import make_initiative, make_member, make_period, make_team


def _plan(session: Session, efforts: list[float], **initiative: object):  # type: ignore[no-untyped-def]
    team, period = make_team(session), make_period(session)
    make_member(session, team, "Ola", 0.36)
    set_capacity_settings(
        session,
        team_id=team.id or 0,
        period_id=period.id or 0,
        settings_in=CapacitySettingsIn(focus_factor=1.0, reserve_pct=0.0),
    )
    for k, effort in enumerate(efforts):
        make_initiative(session, team, period, f"Small {k + 1}", effort, 10, **initiative)
    return plan_for(session, team_id=team.id or 0, period_id=period.id or 0, options=PlanOptions())


def test_work_kept_out_by_rounding_alone_is_named(session: Session) -> None:
    plan = _plan(session, [1.2, 1.2, 1.2])
    out = [row.title for row in plan.rows if not row.chosen]
    assert len(out) == 1
    assert plan.selection.headroom == pytest.approx(3.6 - 2.4)
    named = [w for w in plan.warnings if "would fit in the" in w]
    assert named == [
        f"“{out[0]}” (1.2 days) would fit in the 1.2 days of headroom, but the plan counts in "
        "whole 0.5-day steps (each effort rounded up, the capacity down), so it does not fit "
        "there. A finer step (the LOADLINE_RESOLUTION setting) plans closer to the days entered."
    ]
    # At a 0.1-day grain nothing is rounded and all three are in: the warning was right.
    finer = plan_for(
        session,
        team_id=plan.team.id or 0,
        period_id=plan.period.id or 0,
        options=PlanOptions(resolution=0.1),
    )
    assert all(row.chosen for row in finer.rows)
    assert not any("would fit in the" in w for w in finer.warnings)


def test_work_that_does_not_fit_in_days_either_is_not_named(session: Session) -> None:
    plan = _plan(session, [1.2, 1.2, 1.3])  # 3.7 days: too much in days as well
    assert not all(row.chosen for row in plan.rows)
    assert not any("would fit in the" in w for w in plan.warnings)


def test_an_alternative_of_chosen_work_is_not_named(session: Session) -> None:
    plan = _plan(session, [1.2, 1.2, 1.2], either_or="Signage")  # at most one of the three
    assert sum(row.chosen for row in plan.rows) == 1
    assert not any("would fit in the" in w for w in plan.warnings)


def test_a_saved_plan_keeps_the_warning(session: Session) -> None:
    plan = _plan(session, [1.2, 1.2, 1.2])
    snapshot = capture(
        session,
        team_id=plan.team.id or 0,
        period_id=plan.period.id or 0,
        changes=ScenarioChanges(),
        resolution=0.5,
    )
    view = view_of(snapshot.inputs, snapshot.result)
    assert any("would fit in the 1.2 days of headroom" in w for w in view.warnings)
