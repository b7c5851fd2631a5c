"""JSON API: periods."""

from __future__ import annotations

import datetime as dt

from fastapi import APIRouter, status

from server.deps import SessionDep
from server.models import Period
from server.routes.preconditions import (
    CONDITIONAL,
    CONDITIONAL_DELETE,
    TAGGED_CREATED,
    TAGGED_READ,
    ConditionalReadDep,
    ETagDep,
    IfMatchDep,
    entity_tag,
)
from server.routes.responses import ERRORS
from server.schemas import PeriodCreate, PeriodPublic, PeriodUpdate
from server.store import periods as store

router = APIRouter(prefix="/api/v1", tags=["periods"], responses=ERRORS)


def period_public(db_period: Period) -> PeriodPublic:
    return PeriodPublic(
        id=db_period.id or 0,
        name=db_period.name,
        kind=db_period.kind,
        start_date=db_period.start_date,
        end_date=db_period.end_date,
        weekmask=db_period.weekmask,
        non_working_dates=[dt.date.fromisoformat(d) for d in db_period.non_working_dates],
        working_days=store.period_working_days(db_period),
        etag=entity_tag(store.period_fingerprint(db_period)),
    )


@router.get("/periods", response_model=list[PeriodPublic])
def list_periods(session: SessionDep) -> list[PeriodPublic]:
    return [period_public(p) for p in store.list_periods(session)]


@router.post(
    "/periods",
    response_model=PeriodPublic,
    status_code=status.HTTP_201_CREATED,
    responses=TAGGED_CREATED,
)
def create_period(period_in: PeriodCreate, session: SessionDep, etag: ETagDep) -> PeriodPublic:
    return etag(period_public(store.create_period(session, period_in=period_in)))


@router.get("/periods/{period_id}", response_model=PeriodPublic, responses=TAGGED_READ)
def read_period(period_id: int, session: SessionDep, etag: ConditionalReadDep) -> PeriodPublic:
    return etag(period_public(store.get_period(session, period_id=period_id)))


@router.patch("/periods/{period_id}", response_model=PeriodPublic, responses=CONDITIONAL)
def update_period(
    period_id: int, period_in: PeriodUpdate, session: SessionDep, condition: IfMatchDep
) -> PeriodPublic:
    db_period = store.update_period(
        session, period_id=period_id, period_in=period_in, based_on=condition.based_on
    )
    return condition(period_public(db_period))


@router.delete(
    "/periods/{period_id}", status_code=status.HTTP_204_NO_CONTENT, responses=CONDITIONAL_DELETE
)
def delete_period(period_id: int, session: SessionDep, condition: IfMatchDep) -> None:
    """Delete a period nothing uses any more.

    Refused (409, naming what is left) while initiatives, availability entries, scenarios or
    saved plans refer to it. The teams' capacity settings of the period go with it.
    """
    store.delete_period(session, period_id=period_id, based_on=condition.based_on)
