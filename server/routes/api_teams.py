"""JSON API: teams, members, availability and team capacity."""

from __future__ import annotations

from fastapi import APIRouter, Query, status

from server.deps import SessionDep
from server.models import Availability, Member, Team
from server.planning.team_capacity import capacity_of
from server.routes.preconditions import (
    CONDITIONAL,
    CONDITIONAL_DELETE,
    CONDITIONAL_UPSERT,
    TAGGED,
    TAGGED_CREATED,
    TAGGED_READ,
    ConditionalReadDep,
    CreateOnlyDep,
    ETagDep,
    IfMatchDep,
    entity_tag,
    tagged_public,
)
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
from server.store.periods import (
    get_capacity_settings,
    set_capacity_settings,
    settings_fingerprint,
)

router = APIRouter(prefix="/api/v1", tags=["teams"], responses=ERRORS)


def _team(db_team: Team) -> TeamPublic:
    return tagged_public(TeamPublic, db_team, store.team_fingerprint(db_team))


def _member(db_member: Member) -> MemberPublic:
    return tagged_public(MemberPublic, db_member, store.member_fingerprint(db_member))


def _availability(db_row: Availability) -> AvailabilityPublic:
    return tagged_public(AvailabilityPublic, db_row, store.availability_fingerprint(db_row))


@router.get("/teams", response_model=list[TeamPublic])
def list_teams(session: SessionDep) -> list[TeamPublic]:
    return [_team(t) for t in store.list_teams(session)]


@router.post(
    "/teams",
    response_model=TeamPublic,
    status_code=status.HTTP_201_CREATED,
    responses=TAGGED_CREATED,
)
def create_team(team_in: TeamCreate, session: SessionDep, etag: ETagDep) -> TeamPublic:
    return etag(_team(store.create_team(session, team_in=team_in)))


@router.get("/teams/{team_id}", response_model=TeamPublic, responses=TAGGED_READ)
def read_team(team_id: int, session: SessionDep, etag: ConditionalReadDep) -> TeamPublic:
    return etag(_team(store.get_team(session, team_id=team_id)))


@router.patch("/teams/{team_id}", response_model=TeamPublic, responses=CONDITIONAL)
def update_team(
    team_id: int, team_in: TeamUpdate, session: SessionDep, condition: IfMatchDep
) -> TeamPublic:
    db_team = store.update_team(
        session, team_id=team_id, team_in=team_in, based_on=condition.based_on
    )
    return condition(_team(db_team))


@router.delete(
    "/teams/{team_id}", status_code=status.HTTP_204_NO_CONTENT, responses=CONDITIONAL_DELETE
)
def delete_team(
    team_id: int,
    session: SessionDep,
    condition: IfMatchDep,
    with_initiatives: bool = Query(
        False, description="Also delete the initiatives the team owns (refused otherwise)."
    ),
) -> None:
    store.delete_team(
        session,
        team_id=team_id,
        with_initiatives=with_initiatives,
        based_on=condition.based_on,
    )


@router.get("/members", response_model=list[MemberPublic])
def list_members(session: SessionDep, team_id: int | None = None) -> list[MemberPublic]:
    return [_member(m) for m in store.list_members(session, team_id=team_id)]


@router.post(
    "/members",
    response_model=MemberPublic,
    status_code=status.HTTP_201_CREATED,
    responses=TAGGED_CREATED,
)
def create_member(member_in: MemberCreate, session: SessionDep, etag: ETagDep) -> MemberPublic:
    return etag(_member(store.create_member(session, member_in=member_in)))


@router.get("/members/{member_id}", response_model=MemberPublic, responses=TAGGED_READ)
def read_member(member_id: int, session: SessionDep, etag: ConditionalReadDep) -> MemberPublic:
    return etag(_member(store.get_member(session, member_id=member_id)))


@router.patch("/members/{member_id}", response_model=MemberPublic, responses=CONDITIONAL)
def update_member(
    member_id: int, member_in: MemberUpdate, session: SessionDep, condition: IfMatchDep
) -> MemberPublic:
    db_member = store.update_member(
        session, member_id=member_id, member_in=member_in, based_on=condition.based_on
    )
    return condition(_member(db_member))


@router.delete(
    "/members/{member_id}", status_code=status.HTTP_204_NO_CONTENT, responses=CONDITIONAL_DELETE
)
def delete_member(member_id: int, session: SessionDep, condition: IfMatchDep) -> None:
    store.delete_member(session, member_id=member_id, based_on=condition.based_on)


@router.get("/availability", response_model=list[AvailabilityPublic])
def list_availability(
    session: SessionDep, team_id: int | None = None, period_id: int | None = None
) -> list[AvailabilityPublic]:
    rows = store.list_availability(session, team_id=team_id, period_id=period_id)
    return [_availability(r) for r in rows]


@router.post(
    "/availability",
    response_model=AvailabilityPublic,
    status_code=status.HTTP_201_CREATED,
    responses=CONDITIONAL_UPSERT,
    description="Set a member's days off (and optional allocation) in a period; replaces any "
    "earlier row for the same member and period. Days only: never store a reason. To replace "
    "a row only as you read it, send its ETag in If-Match (412 if it changed or is gone), or "
    "If-Match: * to replace whatever is stored (412 if nothing is); to write only when no row "
    "is stored yet, send If-None-Match: * (412 if one is).",
)
def set_availability(
    availability_in: AvailabilityCreate,
    session: SessionDep,
    condition: IfMatchDep,
    only_create: CreateOnlyDep,
) -> AvailabilityPublic:
    db_row = store.set_availability(
        session,
        availability_in=availability_in,
        based_on=condition.based_on,
        create_only=only_create,
        replace_only=condition.any_stored,
    )
    return condition(_availability(db_row))


@router.get(
    "/availability/{availability_id}", response_model=AvailabilityPublic, responses=TAGGED_READ
)
def read_availability(
    availability_id: int, session: SessionDep, etag: ConditionalReadDep
) -> AvailabilityPublic:
    return etag(_availability(store.get_availability(session, availability_id=availability_id)))


@router.patch(
    "/availability/{availability_id}", response_model=AvailabilityPublic, responses=CONDITIONAL
)
def update_availability(
    availability_id: int,
    availability_in: AvailabilityUpdate,
    session: SessionDep,
    condition: IfMatchDep,
) -> AvailabilityPublic:
    db_row = store.update_availability(
        session,
        availability_id=availability_id,
        availability_in=availability_in,
        based_on=condition.based_on,
    )
    return condition(_availability(db_row))


@router.delete(
    "/availability/{availability_id}",
    status_code=status.HTTP_204_NO_CONTENT,
    responses=CONDITIONAL_DELETE,
)
def delete_availability(availability_id: int, session: SessionDep, condition: IfMatchDep) -> None:
    store.delete_availability(session, availability_id=availability_id, based_on=condition.based_on)


def _capacity_public(session: SessionDep, team_id: int, period_id: int) -> CapacityPublic:
    result = capacity_of(session, team_id=team_id, period_id=period_id)
    settings = get_capacity_settings(session, team_id=team_id, period_id=period_id)
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
        etag=entity_tag(settings_fingerprint(settings)),
    )


@router.get(
    "/teams/{team_id}/periods/{period_id}/capacity",
    response_model=CapacityPublic,
    responses=TAGGED,
)
def read_capacity(
    team_id: int, period_id: int, session: SessionDep, etag: ETagDep
) -> CapacityPublic:
    """Capacity breakdown: working days, each member's days, focus factor and reserve.

    The ETag is that of the team's settings in the period (focus factor and reserve), what
    PUT replaces; members and days off have their own.
    """
    return etag(_capacity_public(session, team_id, period_id))


@router.put(
    "/teams/{team_id}/periods/{period_id}/capacity",
    response_model=CapacityPublic,
    responses=CONDITIONAL,
)
def set_capacity(
    team_id: int,
    period_id: int,
    settings_in: CapacitySettingsIn,
    session: SessionDep,
    condition: IfMatchDep,
) -> CapacityPublic:
    """Set the team's focus factor and reserve for the period."""
    store.get_team(session, team_id=team_id)
    set_capacity_settings(
        session,
        team_id=team_id,
        period_id=period_id,
        settings_in=settings_in,
        based_on=condition.based_on,
    )
    return condition(_capacity_public(session, team_id, period_id))
