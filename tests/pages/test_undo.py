"""Undo of a team's last change, from its audit entries."""

from __future__ import annotations

from collections.abc import Iterator

import pytest
from fastapi.testclient import TestClient
from sqlmodel import Session, col, select

from server.actor import current_actor
from server.errors import ConflictError, NotFoundError
from server.models import AuditEntry, Initiative
from server.planning.paste import commit_paste, parse_paste
from server.planning.undo import last_change, redo_last_undo, undo_last_change
from server.schemas import EffortIn, InitiativeUpdate
from server.store.initiatives import delete_initiative, get_initiative, update_initiative
from tests.factories import make_initiative, make_period, make_team
from tests.pages.html_tree import parse_html
from tests.pages.test_plan_pages import HX, build, post_form


@pytest.fixture(autouse=True)
def signed_in() -> Iterator[None]:
    """Changes made through the store here count as the signed-in admin's, as the app's
    requests by the test client do (so undoing them is undoing one's own change)."""
    token = current_actor.set("admin")
    yield
    current_actor.reset(token)


def _fresh(session: Session, initiative_id: int) -> Initiative | None:
    session.expire_all()
    return session.get(Initiative, initiative_id)


def _entries(session: Session, action: str) -> list[AuditEntry]:
    query = select(AuditEntry).where(AuditEntry.action == action).order_by(col(AuditEntry.id))
    return list(session.exec(query))


def test_undo_an_update_puts_the_values_back_as_a_new_version(session: Session) -> None:
    team = make_team(session)
    period = make_period(session)
    record = make_initiative(session, team, period, "Quay wall", 5, 40)
    initiative_id = record.row.id or 0
    update_initiative(
        session,
        initiative_id=initiative_id,
        initiative_in=InitiativeUpdate(
            version=1, value=55, effort=EffortIn(low=4, likely=6, high=9), state="pinned"
        ),
    )
    outcome = undo_last_change(session, team_id=team.id or 0, period_id=period.id)
    assert outcome.entry.action == "initiative.update"
    session.expire_all()
    back = get_initiative(session, initiative_id=initiative_id)
    assert back.row.value == 40
    assert back.row.state == "candidate"
    assert (back.own_effort.low, back.own_effort.likely, back.own_effort.high) == (None, 5, None)
    assert back.row.version == 3  # a new version, so open forms notice the change
    original = _entries(session, "initiative.update")[0]
    assert original.undone_at is not None
    (undo,) = _entries(session, "initiative.undo")
    assert undo.after is not None
    assert undo.after["undid"] == original.id
    assert undo.summary.startswith("Undid: Changed")


def test_undo_a_creation_deletes_and_a_deletion_recreates(session: Session) -> None:
    team = make_team(session)
    period = make_period(session)
    base = make_initiative(session, team, period, "Quay wall", 5, 40)
    dependant = make_initiative(
        session,
        team,
        period,
        "Crane rail",
        3,
        20,
        either_or="Rails",
        needs=[base.row.id],
        notes="north side",
    )
    dependant_id = dependant.row.id or 0
    delete_initiative(session, initiative_id=dependant_id)
    outcome = undo_last_change(session, team_id=team.id or 0, period_id=period.id)
    assert outcome.summary == "Brought back “Crane rail”."
    session.expire_all()
    again = session.exec(select(Initiative).where(Initiative.title == "Crane rail")).one()
    restored = get_initiative(session, initiative_id=again.id or 0)
    assert restored.needs == [base.row.id]
    assert (restored.row.value, restored.row.either_or, restored.row.notes) == (
        20,
        "Rails",
        "north side",
    )
    # The next undo reverts the creation of "Crane rail", back under the id it was made with.
    outcome = undo_last_change(session, team_id=team.id or 0, period_id=period.id)
    assert outcome.entry.action == "initiative.create"
    assert outcome.summary == "Removed “Crane rail” again."
    assert _fresh(session, again.id or 0) is None
    outcome = undo_last_change(session, team_id=team.id or 0, period_id=period.id)
    assert _fresh(session, base.row.id or 0) is None
    assert last_change(session, team_id=team.id or 0, period_id=period.id) is None
    with pytest.raises(NotFoundError):
        undo_last_change(session, team_id=team.id or 0, period_id=period.id)


def test_repeated_undo_steps_back_and_never_redoes(session: Session) -> None:
    team = make_team(session)
    period = make_period(session)
    initiative_id = make_initiative(session, team, period, "Quay wall", 5, 40).row.id or 0
    for version, value in ((1, 41.0), (2, 42.0)):
        update_initiative(
            session,
            initiative_id=initiative_id,
            initiative_in=InitiativeUpdate(version=version, value=value),
        )
    undo_last_change(session, team_id=team.id or 0, period_id=period.id)
    assert _fresh(session, initiative_id).value == 41  # type: ignore[union-attr]
    # The undo's own update is not offered: the next undo goes further back, to 40.
    entry = last_change(session, team_id=team.id or 0, period_id=period.id)
    assert entry is not None
    assert entry.action == "initiative.update"
    assert entry.after == {"value": 41.0}
    undo_last_change(session, team_id=team.id or 0, period_id=period.id)
    assert _fresh(session, initiative_id).value == 40  # type: ignore[union-attr]


def test_undo_is_per_team(session: Session) -> None:
    harbour = make_team(session, "Harbour")
    lighthouse = make_team(session, "Lighthouse")
    period = make_period(session)
    mine = make_initiative(session, harbour, period, "Quay wall", 5, 40).row.id or 0
    make_initiative(session, lighthouse, period, "Lamp", 2, 10)
    undo_last_change(session, team_id=harbour.id or 0, period_id=period.id)
    assert _fresh(session, mine) is None
    assert session.exec(select(Initiative).where(Initiative.title == "Lamp")).one()


def test_undoing_a_creation_that_another_team_now_needs_is_refused(session: Session) -> None:
    harbour = make_team(session, "Harbour")
    lighthouse = make_team(session, "Lighthouse")
    period = make_period(session)
    quay = make_initiative(session, harbour, period, "Quay wall", 5, 40).row.id or 0
    make_initiative(session, lighthouse, period, "Lamp", 2, 10, needs=[quay])
    with pytest.raises(ConflictError, match=r"“Quay wall” is needed by “Lamp” \(team Lighthouse\)"):
        undo_last_change(session, team_id=harbour.id or 0, period_id=period.id)
    assert _fresh(session, quay) is not None
    assert _entries(session, "initiative.undo") == []
    (created, _) = _entries(session, "initiative.create")
    assert created.undone_at is None


def test_undoing_a_paste_removes_every_row_or_none(
    form_client: TestClient, session: Session
) -> None:
    harbour = make_team(session, "Harbour")
    lighthouse = make_team(session, "Lighthouse")
    period = make_period(session)
    pasted = parse_paste(
        "Tide gauge\t2\t10\nPilot boat\t3\t12",
        team_id=harbour.id or 0,
        period_id=period.id,
    )
    gauge, boat = commit_paste(session, pasted)
    lamp = make_initiative(session, lighthouse, period, "Lamp", 2, 10, needs=[boat]).row.id or 0

    url = f"/teams/{harbour.id}/plan/undo"
    refused = post_form(form_client, url, {"period_id": str(period.id)}, **HX)
    assert refused.status_code == 409
    notice = parse_html(refused.text).by_id("notice").text()
    assert "“Pilot boat” is needed by “Lamp” (team Lighthouse)" in notice
    # Neither pasted row was deleted, not even the one nothing needs.
    assert _fresh(session, gauge) is not None
    assert _fresh(session, boat) is not None
    assert _entries(session, "initiative.delete") == []

    delete_initiative(session, initiative_id=lamp)
    undone = post_form(form_client, url, {"period_id": str(period.id)}, **HX)
    assert undone.status_code == 200
    assert "Removed the 2 pasted initiatives again" in undone.text
    assert (_fresh(session, gauge), _fresh(session, boat)) == (None, None)


def test_undo_button_on_the_plan(form_client: TestClient, session: Session) -> None:
    setup = build(session)
    initiative_id = setup.ids["Audit log"]
    update_initiative(
        session,
        initiative_id=initiative_id,
        initiative_in=InitiativeUpdate(version=1, value=99),
    )
    root = parse_html(form_client.get(setup.url).text)
    assert "Changed value of “Audit log”" in root.by_id("undo-what").text()
    url = f"/teams/{setup.team.id}/plan/undo"
    response = post_form(form_client, url, {"period_id": str(setup.period.id)}, **HX)
    assert response.status_code == 200
    page = parse_html(response.text)
    assert "Put back the earlier value of “Audit log”" in page.by_id("notice").text()
    assert page.by_id(f"value-{initiative_id}").get("value") == "30"
    plain = post_form(form_client, url, {"period_id": str(setup.period.id)})
    assert plain.status_code == 303  # undoes the creation of the last initiative made
    # Without scripts the page it goes back to says what the undo did.
    notice = parse_html(form_client.get(plain.headers["location"]).text).by_id("notice")
    assert notice.text() == "Undid: Added “Billing fix”."
    assert _fresh(session, setup.ids["Billing fix"]) is None


def test_nothing_to_undo_says_so(form_client: TestClient, session: Session) -> None:
    team = make_team(session)
    period = make_period(session)
    response = post_form(
        form_client, f"/teams/{team.id}/plan/undo", {"period_id": str(period.id)}, **HX
    )
    assert response.status_code == 404
    assert "no change of this team in this period left to undo" in response.text


def test_undoing_a_move_says_period_and_fields_as_the_pages_name_them(
    form_client: TestClient, session: Session
) -> None:
    """It read "Put back the earlier period id of …"; the Changes list says "period"."""
    setup = build(session)
    initiative_id = setup.ids["Audit log"]
    update_initiative(
        session,
        initiative_id=initiative_id,
        initiative_in=InitiativeUpdate(version=1, period_id=None, either_or="Logs"),
    )
    url = f"/teams/{setup.team.id}/plan/undo"
    response = post_form(form_client, url, {"period_id": str(setup.period.id)}, **HX)
    assert response.status_code == 200
    notice = parse_html(response.text).by_id("notice").text()
    assert "Put back the earlier either-or set and period of “Audit log”" in notice


def test_the_changes_list_says_an_undo_was_redone_not_undone(
    form_client: TestClient, session: Session
) -> None:
    """An undo that was redone read "Undid: Changed value of “Audit log” (undone)"."""
    setup = build(session)
    initiative_id = setup.ids["Audit log"]
    update_initiative(
        session, initiative_id=initiative_id, initiative_in=InitiativeUpdate(version=1, value=99)
    )
    undo_last_change(session, team_id=setup.team.id or 0, period_id=setup.period.id)
    redo_last_undo(session, team_id=setup.team.id or 0, period_id=setup.period.id)
    assert _fresh(session, initiative_id).value == 99  # type: ignore[union-attr]
    rows = parse_html(form_client.get("/audit").text).find_all("tr")
    said = [" ".join(row.text().split()) for row in rows if "Audit log" in row.text()]
    undo_rows = [text for text in said if "Undid: Changed value" in text]
    assert undo_rows
    assert all("(redone since)" in text for text in undo_rows), said
    # The changes the undo and the redo made themselves say so, under their own rows' entries.
    made = [text for text in said if text.count("Changed value of “Audit log”") == 1]
    assert any("(made by the undo below)" in text for text in made), said
    assert any("(made by the redo below)" in text for text in made), said
    assert not any("Undid:" in text and "(undone since)" in text for text in said), said
