"""JSON API: initiatives with their efforts and needs."""

from __future__ import annotations

from typing import Literal

from fastapi import APIRouter, Query, status

from server.deps import SessionDep
from server.routes.responses import ERRORS
from server.schemas import InitiativeCreate, InitiativePublic, InitiativeUpdate
from server.store import initiatives as store

router = APIRouter(prefix="/api/v1", tags=["initiatives"], responses=ERRORS)


@router.get("/initiatives", response_model=list[InitiativePublic])
def list_initiatives(
    session: SessionDep,
    team_id: int | None = None,
    period_id: int | None = None,
    backlog: bool = Query(False, description="Only unscheduled initiatives (no period)."),
    scope: Literal["owned", "involving"] = Query(
        "owned", description="involving: also other teams' initiatives that need this team's effort"
    ),
) -> list[InitiativePublic]:
    records = store.list_initiatives(
        session,
        team_id=team_id,
        period_id=store.BACKLOG if backlog else period_id,
        involving_team=scope == "involving",
    )
    return [record.to_public() for record in records]


@router.post(
    "/initiatives",
    response_model=InitiativePublic,
    status_code=status.HTTP_201_CREATED,
    description="Add an initiative. A title the team already has in that period (or in its "
    "backlog), compared ignoring case and outer spaces, is refused with 409 on `title`.",
)
def create_initiative(initiative_in: InitiativeCreate, session: SessionDep) -> InitiativePublic:
    return store.create_initiative(session, initiative_in=initiative_in).to_public()


@router.get("/initiatives/{initiative_id}", response_model=InitiativePublic)
def read_initiative(initiative_id: int, session: SessionDep) -> InitiativePublic:
    return store.get_initiative(session, initiative_id=initiative_id).to_public()


@router.patch(
    "/initiatives/{initiative_id}",
    response_model=InitiativePublic,
    description="Change an initiative. `version` must be the version you read; if someone "
    "changed it since, the answer is 409 with the current values and nothing is stored. A "
    "rename or a move onto a title the team already has there is 409 on `title`.",
)
def update_initiative(
    initiative_id: int, initiative_in: InitiativeUpdate, session: SessionDep
) -> InitiativePublic:
    record = store.update_initiative(
        session, initiative_id=initiative_id, initiative_in=initiative_in
    )
    return record.to_public()


@router.delete("/initiatives/{initiative_id}", status_code=status.HTTP_204_NO_CONTENT)
def delete_initiative(initiative_id: int, session: SessionDep) -> None:
    store.delete_initiative(session, initiative_id=initiative_id)
