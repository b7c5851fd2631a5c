"""One title per team and period: the store refuses a second initiative of the same title.

Workspace: team Harbour with "Quay wall" and "Crane rail" in Sprint 1, team Lighthouse.
"""

from __future__ import annotations

from collections.abc import Callable

import pytest
from fastapi.testclient import TestClient
from sqlmodel import Session

from server.errors import ConflictError, InputError
from server.models import Team
from server.schemas import EffortIn, InitiativeCreate, InitiativeUpdate
from server.store.initiatives import create_initiatives, get_initiative, update_initiative
from tests.api.conftest import Snapshot, Workspace
from tests.api.support import error_fields, error_text
from tests.factories import make_initiative, make_period

IN_SPRINT = "already exists in team Harbour for Sprint 1; choose another title."


def _new(workspace: Workspace, title: str, period_id: int | None = -1) -> InitiativeCreate:
    return InitiativeCreate(
        team_id=workspace.team,
        period_id=workspace.period if period_id == -1 else period_id,
        title=title,
        effort=EffortIn(likely=1),
        value=1,
    )


def _harbour(session: Session, workspace: Workspace) -> Team:
    team = session.get(Team, workspace.team)
    assert team is not None
    return team


# --- store ------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    "title",
    [
        "Quay wall",
        "quay wall",
        "  QUAY WALL  ",
        "Quay Wall\t",
        "Quay  wall",
        "\uff31uay wall",  # a full-width Q reads the same
        "Quay\u00a0wall",  # a no-break space
        "Quay\u200b wall",  # a zero-width space (stored keys recomputed by migration 0007)
        "Qu\u00aday wall",  # a soft hyphen
        "Quay wall\ufeff",  # a zero-width no-break space at the end
    ],
)
def test_a_second_title_in_the_team_and_period_is_refused(
    session: Session, workspace: Workspace, snapshot: Callable[[], Snapshot], title: str
) -> None:
    before = snapshot()
    with pytest.raises(ConflictError) as refused:
        create_initiatives(session, initiatives_in=[_new(workspace, title)])
    session.rollback()
    assert refused.value.field == "title"
    assert refused.value.message == f"“{title.strip()}” {IN_SPRINT}"
    assert snapshot() == before


def test_a_title_with_combining_accents_clashes_with_its_precomposed_twin(
    client: TestClient, workspace: Workspace, snapshot: Callable[[], Snapshot]
) -> None:
    """Both used to be stored: 201 twice for titles no reader can tell apart."""
    body = {"team_id": workspace.team, "period_id": workspace.period, "value": 1}
    body["effort"] = {"likely": 1}
    first = client.post("/api/v1/initiatives", json=body | {"title": "Caf\u00e9 kiosk"})
    assert first.status_code == 201, first.text
    before = snapshot()
    second = client.post("/api/v1/initiatives", json=body | {"title": "Cafe\u0301 kiosk"})
    assert second.status_code == 409
    assert error_fields(second) == ["title"]
    assert snapshot() == before


def test_the_backlog_counts_as_one_period(
    session: Session, workspace: Workspace, snapshot: Callable[[], Snapshot]
) -> None:
    make_initiative(session, _harbour(session, workspace), None, "Dredging")
    before = snapshot()
    with pytest.raises(ConflictError) as refused:
        create_initiatives(session, initiatives_in=[_new(workspace, "dredging", None)])
    session.rollback()
    assert refused.value.message == (
        "“dredging” already exists in the backlog of team Harbour; choose another title."
    )
    assert snapshot() == before


def test_other_teams_and_other_periods_may_share_a_title(
    session: Session, workspace: Workspace
) -> None:
    later = make_period(session, "Sprint 2")
    same_elsewhere = [
        _new(workspace, "Quay wall", later.id),
        _new(workspace, "Quay wall", None),
        _new(workspace, "Quay wall").model_copy(update={"team_id": workspace.other_team}),
    ]
    records = create_initiatives(session, initiatives_in=same_elsewhere)
    session.commit()
    assert [(r.row.team_id, r.row.period_id) for r in records] == [
        (workspace.team, later.id),
        (workspace.team, None),
        (workspace.other_team, workspace.period),
    ]
    # Each of those places now holds the title in turn.
    for item in same_elsewhere:
        with pytest.raises(ConflictError):
            create_initiatives(session, initiatives_in=[item])
        session.rollback()


def test_a_batch_names_every_stored_title_it_clashes_with(
    session: Session, workspace: Workspace, snapshot: Callable[[], Snapshot]
) -> None:
    before = snapshot()
    batch = [
        _new(workspace, "Tide gauge"),
        _new(workspace, "crane rail"),
        _new(workspace, "Quay wall"),
    ]
    with pytest.raises(ConflictError) as refused:
        create_initiatives(session, initiatives_in=batch)
    session.rollback()
    assert refused.value.field == "title"
    assert refused.value.message == (
        "“crane rail” and “Quay wall” already exist in team Harbour for Sprint 1; "
        "choose other titles."
    )
    assert snapshot() == before


def test_a_batch_may_not_hold_one_title_twice(
    session: Session, workspace: Workspace, snapshot: Callable[[], Snapshot]
) -> None:
    before = snapshot()
    batch = [_new(workspace, "Tide gauge"), _new(workspace, "Buoy"), _new(workspace, "tide gauge ")]
    with pytest.raises(InputError) as refused:
        create_initiatives(session, initiatives_in=batch)
    session.rollback()
    assert refused.value.field == "title"
    assert refused.value.message == (
        "title: Rows 1 and 3 have the same title “tide gauge”; give each initiative its own title."
    )
    assert snapshot() == before


def test_renaming_onto_another_title_is_refused(
    session: Session, workspace: Workspace, snapshot: Callable[[], Snapshot]
) -> None:
    before = snapshot()
    with pytest.raises(ConflictError) as refused:
        update_initiative(
            session,
            initiative_id=workspace.dependant,
            initiative_in=InitiativeUpdate(version=1, title="QUAY WALL", value=99),
        )
    assert refused.value.field == "title"
    assert refused.value.message == f"“QUAY WALL” {IN_SPRINT}"
    assert snapshot() == before


def test_moving_to_a_period_or_the_backlog_holding_the_title_is_refused(
    session: Session, workspace: Workspace, snapshot: Callable[[], Snapshot]
) -> None:
    harbour = _harbour(session, workspace)
    later = make_period(session, "Sprint 2")
    make_initiative(session, harbour, later, "Quay wall")
    make_initiative(session, harbour, None, "quay wall")
    before = snapshot()
    for period_id, where in (
        (later.id, "in team Harbour for Sprint 2"),
        (None, "in the backlog of team Harbour"),
    ):
        with pytest.raises(ConflictError) as refused:
            update_initiative(
                session,
                initiative_id=workspace.initiative,
                initiative_in=InitiativeUpdate(version=1, period_id=period_id),
            )
        assert refused.value.field == "title"
        assert refused.value.message == f"“Quay wall” already exists {where}; choose another title."
        assert snapshot() == before


def test_an_initiative_keeps_or_recases_its_own_title_but_takes_no_other(
    session: Session, workspace: Workspace
) -> None:
    # Its own row is no clash: saving the whole form again, or changing only the case, is fine.
    kept = update_initiative(
        session,
        initiative_id=workspace.initiative,
        initiative_in=InitiativeUpdate(version=1, title="Quay wall", value=11),
    )
    recased = update_initiative(
        session,
        initiative_id=workspace.initiative,
        initiative_in=InitiativeUpdate(version=kept.row.version, title="QUAY wall"),
    )
    assert (recased.row.title, recased.row.value, recased.row.version) == ("QUAY wall", 11, 3)
    with pytest.raises(ConflictError):
        update_initiative(
            session,
            initiative_id=workspace.initiative,
            initiative_in=InitiativeUpdate(version=3, title="Crane Rail"),
        )
    assert get_initiative(session, initiative_id=workspace.initiative).row.title == "QUAY wall"


# --- API --------------------------------------------------------------------------------------


def test_api_create_with_a_taken_title_is_409_naming_title(
    client: TestClient, workspace: Workspace, snapshot: Callable[[], Snapshot]
) -> None:
    before = snapshot()
    response = client.post(
        "/api/v1/initiatives",
        json={
            "team_id": workspace.team,
            "period_id": workspace.period,
            "title": " crane RAIL ",
            "effort": 2,
            "value": 5,
        },
    )
    assert response.status_code == 409, response.text
    assert error_fields(response) == ["title"]
    assert error_text(response) == f"“crane RAIL” {IN_SPRINT}"
    assert snapshot() == before


def test_api_rename_and_move_onto_a_taken_title_are_409(
    client: TestClient, session: Session, workspace: Workspace, snapshot: Callable[[], Snapshot]
) -> None:
    make_initiative(session, _harbour(session, workspace), None, "Crane rail")
    before = snapshot()
    renamed = client.patch(
        f"/api/v1/initiatives/{workspace.initiative}", json={"version": 1, "title": "Crane rail"}
    )
    moved = client.patch(
        f"/api/v1/initiatives/{workspace.dependant}", json={"version": 1, "period_id": None}
    )
    for response, where in (
        (renamed, "in team Harbour for Sprint 1"),
        (moved, "in the backlog of team Harbour"),
    ):
        assert response.status_code == 409, response.text
        assert error_fields(response) == ["title"]
        assert error_text(response) == f"“Crane rail” already exists {where}; choose another title."
    assert snapshot() == before
