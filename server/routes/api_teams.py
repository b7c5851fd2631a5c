"""JSON API: teams, members, availability and team capacity."""

from __future__ import annotations

from fastapi import APIRouter, Query, status

from server.deps import SessionDep
from server.planning.team_capacity import capacity_of
from server.routes.responses import ERRORS
from server.schemas import (
    AvailabilityCreate,
    AvailabilityPublic,
    AvailabilityUpdate,
    CapacityPublic,
    CapacitySettingsIn,
    MemberCapacityPublic,
    MemberCreate,
    MemberPublic,
    MemberUpdate,
    TeamCreate,
    TeamPublic,
    TeamUpdate,
)
from server.store import teams as store
from server.store.periods import set_capacity_settings

router = APIRouter(prefix="/api/v1", tags=["teams"], responses=ERRORS)


@router.get("/teams", response_model=list[TeamPublic])
def list_teams(session: SessionDep) -> list[TeamPublic]:
    return [TeamPublic.model_validate(t, from_attributes=True) for t in store.list_teams(session)]


@router.post("/teams", response_model=TeamPublic, status_code=status.HTTP_201_CREATED)
def create_team(team_in: TeamCreate, session: SessionDep) -> TeamPublic:
    return TeamPublic.model_validate(
        store.create_team(session, team_in=team_in), from_attributes=True
    )


@router.get("/teams/{team_id}", response_model=TeamPublic)
def read_team(team_id: int, session: SessionDep) -> TeamPublic:
    return TeamPublic.model_validate(store.get_team(session, team_id=team_id), from_attributes=True)


@router.patch("/teams/{team_id}", response_model=TeamPublic)
def update_team(team_id: int, team_in: TeamUpdate, session: SessionDep) -> TeamPublic:
    db_team = store.update_team(session, team_id=team_id, team_in=team_in)
    return TeamPublic.model_validate(db_team, from_attributes=True)


@router.delete("/teams/{team_id}", status_code=status.HTTP_204_NO_CONTENT)
def delete_team(
    team_id: int,
    session: SessionDep,
    with_initiatives: bool = Query(
        False, description="Also delete the initiatives the team owns (refused otherwise)."
    ),
) -> None:
    store.delete_team(session, team_id=team_id, with_initiatives=with_initiatives)


@router.get("/members", response_model=list[MemberPublic])
def list_members(session: SessionDep, team_id: int | None = None) -> list[MemberPublic]:
    rows = store.list_members(session, team_id=team_id)
    return [MemberPublic.model_validate(m, from_attributes=True) for m in rows]


@router.post("/members", response_model=MemberPublic, status_code=status.HTTP_201_CREATED)
def create_member(member_in: MemberCreate, session: SessionDep) -> MemberPublic:
    db_member = store.create_member(session, member_in=member_in)
    return MemberPublic.model_validate(db_member, from_attributes=True)


@router.get("/members/{member_id}", response_model=MemberPublic)
def read_member(member_id: int, session: SessionDep) -> MemberPublic:
    db_member = store.get_member(session, member_id=member_id)
    return MemberPublic.model_validate(db_member, from_attributes=True)


@router.patch("/members/{member_id}", response_model=MemberPublic)
def update_member(member_id: int, member_in: MemberUpdate, session: SessionDep) -> MemberPublic:
    db_member = store.update_member(session, member_id=member_id, member_in=member_in)
    return MemberPublic.model_validate(db_member, from_attributes=True)


@router.delete("/members/{member_id}", status_code=status.HTTP_204_NO_CONTENT)
def delete_member(member_id: int, session: SessionDep) -> None:
    store.delete_member(session, member_id=member_id)


@router.get("/availability", response_model=list[AvailabilityPublic])
def list_availability(
    session: SessionDep, team_id: int | None = None, period_id: int | None = None
) -> list[AvailabilityPublic]:
    rows = store.list_availability(session, team_id=team_id, period_id=period_id)
    return [AvailabilityPublic.model_validate(r, from_attributes=True) for r in rows]


@router.post(
    "/availability",
    response_model=AvailabilityPublic,
    status_code=status.HTTP_201_CREATED,
    description="Set a member's days off (and optional allocation) in a period; replaces any "
    "earlier row for the same member and period. Days only: never store a reason.",
)
def set_availability(
    availability_in: AvailabilityCreate, session: SessionDep
) -> AvailabilityPublic:
    db_row = store.set_availability(session, availability_in=availability_in)
    return AvailabilityPublic.model_validate(db_row, from_attributes=True)


@router.get("/availability/{availability_id}", response_model=AvailabilityPublic)
def read_availability(availability_id: int, session: SessionDep) -> AvailabilityPublic:
    db_row = store.get_availability(session, availability_id=availability_id)
    return AvailabilityPublic.model_validate(db_row, from_attributes=True)


@router.patch("/availability/{availability_id}", response_model=AvailabilityPublic)
def update_availability(
    availability_id: int, availability_in: AvailabilityUpdate, session: SessionDep
) -> AvailabilityPublic:
    db_row = store.update_availability(
        session, availability_id=availability_id, availability_in=availability_in
    )
    return AvailabilityPublic.model_validate(db_row, from_attributes=True)


@router.delete("/availability/{availability_id}", status_code=status.HTTP_204_NO_CONTENT)
def delete_availability(availability_id: int, session: SessionDep) -> None:
    store.delete_availability(session, availability_id=availability_id)


def _capacity_public(session: SessionDep, team_id: int, period_id: int) -> CapacityPublic:
    result = capacity_of(session, team_id=team_id, period_id=period_id)
    b = result.breakdown
    return CapacityPublic(
        team_id=team_id,
        period_id=period_id,
        working_days=b.working_days,
        members=[
            MemberCapacityPublic(member_id=mid, **vars(row))
            for mid, row in zip(result.member_ids, b.members, strict=True)
        ],
        gross_days=b.gross_days,
        focus_factor=b.focus_factor,
        focused_days=b.focused_days,
        reserve_pct=b.reserve_pct,
        reserve_days=b.reserve_days,
        capacity_days=b.capacity_days,
    )


@router.get("/teams/{team_id}/periods/{period_id}/capacity", response_model=CapacityPublic)
def read_capacity(team_id: int, period_id: int, session: SessionDep) -> CapacityPublic:
    """Capacity breakdown: working days, each member's days, focus factor and reserve."""
    return _capacity_public(session, team_id, period_id)


@router.put("/teams/{team_id}/periods/{period_id}/capacity", response_model=CapacityPublic)
def set_capacity(
    team_id: int, period_id: int, settings_in: CapacitySettingsIn, session: SessionDep
) -> CapacityPublic:
    """Set the team's focus factor and reserve for the period."""
    store.get_team(session, team_id=team_id)
    set_capacity_settings(session, team_id=team_id, period_id=period_id, settings_in=settings_in)
    return _capacity_public(session, team_id, period_id)
