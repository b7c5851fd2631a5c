"""One period, all teams: each team's own plan in brief, and the joint plan of shared work."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from sqlmodel import Session

from server.message_titles import titled_refusal
from server.models import Period, Team
from server.planning.joint import JointPlan, joint_plan_for
from server.planning.plans import PlanOptions, plan_for, stated_headroom
from server.selector import SelectorInputError
from server.store.initiatives import list_initiatives
from server.store.periods import get_period
from server.store.teams import list_teams


@dataclass(frozen=True)
class TeamSummary:
    team: Team
    initiatives: int
    feasible: bool | None  # None: no plan (no capacity, or inputs that cannot be planned)
    value: float | None
    effort: float | None
    capacity: float
    headroom: float | None
    fit_label: str | None
    chosen_ids: frozenset[int]
    message: str | None


@dataclass(frozen=True)
class JointChange:
    """How the joint plan differs from one team's own plan, over that team's initiatives."""

    team: Team
    takes_in: tuple[str, ...]  # titles the joint plan chooses and the team's own plan does not
    leaves_out: tuple[str, ...]  # titles the team's own plan chooses and the joint plan does not


@dataclass(frozen=True)
class PeriodOverview:
    period: Period
    teams: tuple[TeamSummary, ...]
    joint: JointPlan

    @property
    def chosen_alone(self) -> dict[int, dict[str, bool]]:
        """For each shared initiative: did each team's own plan choose its share?"""
        out: dict[int, dict[str, bool]] = {}
        for shared in self.joint.shared:
            out[shared.id] = {
                summary.team.name: shared.id in summary.chosen_ids
                for summary in self.teams
                if any(name == summary.team.name for name, _ in shared.efforts)
            }
        return out

    @property
    def joint_changes(self) -> tuple[JointChange, ...]:
        """Per team with an own plan: what the joint plan takes in and leaves out of it.

        Only initiatives in the joint problem count (one a team without capacity works on is
        in neither), in the period's order of initiatives.
        """
        selection = self.joint.selection
        if selection is None:
            return ()
        joint = set(selection.chosen)
        out = []
        for summary in self.teams:
            if summary.feasible is None:
                continue
            team_key = str(summary.team.id)
            mine = [item.key for item in self.joint.items if team_key in item.efforts]
            own = {str(i) for i in summary.chosen_ids}
            titles = self.joint.titles
            takes_in = [k for k in mine if k in joint and k not in own]
            leaves_out = [k for k in mine if k in own and k not in joint]
            out.append(
                JointChange(
                    team=summary.team,
                    takes_in=tuple(titles[int(k)] for k in takes_in),
                    leaves_out=tuple(titles[int(k)] for k in leaves_out),
                )
            )
        return tuple(out)


def _summary(session: Session, team: Team, period_id: int, resolution: float) -> TeamSummary:
    options = PlanOptions(resolution=resolution, explain=False, curve=False)
    try:
        plan = plan_for(session, team_id=team.id or 0, period_id=period_id, options=options)
    except SelectorInputError as exc:
        no_capacity = exc.field == "capacity"
        records = list_initiatives(
            session, team_id=team.id or 0, period_id=period_id, involving_team=True
        )
        return TeamSummary(
            team=team,
            initiatives=len(records),
            feasible=None,
            value=None,
            effort=None,
            capacity=0.0,
            headroom=None,
            fit_label=None,
            chosen_ids=frozenset(),
            message="No capacity in this period yet."
            if no_capacity
            else titled_refusal(
                exc.message, exc.field, {str(r.row.id): r.row.title for r in records}
            ),
        )
    selection = plan.worded_selection()
    return TeamSummary(
        team=team,
        initiatives=len(plan.rows),
        feasible=selection.feasible,
        value=selection.value,
        effort=selection.effort,
        capacity=selection.capacity,
        headroom=stated_headroom(
            feasible=selection.feasible,
            headroom=selection.headroom,
            excess_days=selection.excess_days,
        ),
        fit_label=plan.fit.label() if plan.fit is not None else None,
        chosen_ids=frozenset(row.id for row in plan.rows if row.chosen),
        message=selection.infeasibility,
    )


def overview_for(session: Session, *, period_id: int, resolution: float = 0.5) -> PeriodOverview:
    period = get_period(session, period_id=period_id)
    teams = tuple(_summary(session, team, period_id, resolution) for team in list_teams(session))
    return PeriodOverview(
        period=period,
        teams=teams,
        joint=joint_plan_for(session, period_id=period_id, resolution=resolution),
    )


def overview_json(overview: PeriodOverview) -> dict[str, Any]:
    joint = overview.joint
    selection = joint.selection
    alone = overview.chosen_alone
    return {
        "period": {"id": overview.period.id, "name": overview.period.name},
        "teams": [
            {
                "id": s.team.id,
                "name": s.team.name,
                "initiatives": s.initiatives,
                "feasible": s.feasible,
                "value": s.value,
                "effort_days": s.effort,
                "capacity_days": s.capacity,
                "headroom_days": s.headroom,
                "fit_label": s.fit_label,
                "message": s.message,
            }
            for s in overview.teams
        ],
        "joint": {
            "solved": selection is not None,
            "message": joint.message,
            "method": selection.method if selection else None,
            "method_note": selection.method_note if selection else None,
            "feasible": selection.feasible if selection else None,
            "value": selection.value if selection else None,
            "chosen": [int(k) for k in selection.chosen] if selection else [],
            "teams": [
                {
                    "id": load.team_id,
                    "name": load.name,
                    "capacity_days": load.capacity,
                    "effort_days": load.effort,
                    "headroom_days": load.headroom,
                }
                for load in joint.loads
            ],
            "shared": [
                {
                    "id": s.id,
                    "title": s.title,
                    "owner": s.owner,
                    "value": s.value,
                    "efforts": [{"team": name, "days": days} for name, days in s.efforts],
                    "chosen_jointly": s.chosen,
                    "chosen_in_own_plans": alone.get(s.id, {}),
                }
                for s in joint.shared
            ],
            "changes_by_team": [
                {
                    "team_id": change.team.id,
                    "name": change.team.name,
                    "takes_in": list(change.takes_in),
                    "leaves_out": list(change.leaves_out),
                }
                for change in overview.joint_changes
            ],
            "left_out_no_capacity": list(joint.unplannable),
            "left_out_blocked": list(joint.blocked),
        },
    }
