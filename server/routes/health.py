"""Health check for load balancers and the set-up script."""

from __future__ import annotations

from fastapi import APIRouter
from sqlalchemy import text

from server.deps import SessionDep

router = APIRouter(tags=["health"])


@router.get("/health")
def health(session: SessionDep) -> dict[str, str]:
    session.exec(text("SELECT 1"))  # type: ignore[call-overload]
    return {"status": "ok"}
