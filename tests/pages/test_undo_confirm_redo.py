"""Undo asks before reverting a colleague's change, says what it covers, and can be redone."""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager

from fastapi.testclient import TestClient
from sqlmodel import Session, select

from server.actor import current_actor
from server.models import AuditEntry, Initiative
from server.planning.paste import commit_paste, parse_paste
from server.planning.undo import undo_last_change
from server.schemas import CapacitySettingsIn, InitiativeUpdate
from server.store.initiatives import delete_initiative, get_initiative, update_initiative
from server.store.periods import set_capacity_settings
from tests.factories import make_initiative
from tests.pages.html_tree import parse_html
from tests.pages.test_plan_pages import HX, Setup, build, post_form

ME = "admin"  # the account the test client signs in with


@contextmanager
def acting_as(name: str) -> Iterator[None]:
    """Store calls made inside count as `name`'s changes, as a request of theirs would."""
    token = current_actor.set(name)
    try:
        yield
    finally:
        current_actor.reset(token)


def _set_value(session: Session, initiative_id: int, value: float) -> None:
    version = get_initiative(session, initiative_id=initiative_id).row.version
    update_initiative(
        session,
        initiative_id=initiative_id,
        initiative_in=InitiativeUpdate(version=version, value=value),
    )


def _value(session: Session, initiative_id: int) -> float | None:
    session.expire_all()
    row = session.get(Initiative, initiative_id)
    return row.value if row is not None else None


def _page(client: TestClient, setup: Setup):  # type: ignore[no-untyped-def]
    return parse_html(client.get(setup.url).text)


def _press(client: TestClient, setup: Setup, kind: str, **fields: str):  # type: ignore[no-untyped-def]
    """Send the undo or redo form as the page offers it, plus `fields`."""
    button = _page(client, setup).find(id=f"{kind}-button")
    assert button is not None, f"no {kind} offered"
    form_node = button.parent
    while form_node is not None and form_node.tag != "form":
        form_node = form_node.parent
    assert form_node is not None
    form = {"period_id": str(setup.period.id), **fields}
    for hidden in form_node.find_all("input", where=lambda n: n.get("name") == "entry"):
        form.setdefault("entry", hidden.get("value") or "")
    return post_form(client, f"/teams/{setup.team.id}/plan/{kind}", form, **HX)


def _entry_id(session: Session, action: str) -> int:
    session.expire_all()
    query = select(AuditEntry.id).where(AuditEntry.action == action)
    return max(i or 0 for i in session.exec(query))


def test_undoing_a_colleagues_change_asks_first_and_ones_own_does_not(
    session: Session, form_client: TestClient
) -> None:
    setup = build(session)
    audit_log = setup.ids["Audit log"]
    with acting_as("ed"):
        _set_value(session, audit_log, 99)
    root = _page(form_client, setup)
    assert "(by ed)" in root.by_id("undo-what").text()
    box = root.by_id("undo-confirm")
    assert box.get("type") == "checkbox"
    assert box.get("required") is not None
    assert "Revert ed's change" in root.text()

    refused = _press(form_client, setup, "undo")
    assert refused.status_code == 409
    assert "ed's change" in parse_html(refused.text).by_id("notice").text()
    assert _value(session, audit_log) == 99  # nothing reverted
    assert (
        session.exec(select(AuditEntry).where(AuditEntry.action == "initiative.undo")).all() == []
    )

    change = _entry_id(session, "initiative.update")
    done = _press(form_client, setup, "undo", confirm=str(change))
    assert done.status_code == 200
    assert _value(session, audit_log) == 30

    with acting_as(ME):
        _set_value(session, audit_log, 77)
    root = _page(form_client, setup)
    assert "(your change)" in root.by_id("undo-what").text()
    assert root.find(id="undo-confirm") is None
    assert _press(form_client, setup, "undo").status_code == 200  # one press
    assert _value(session, audit_log) == 30


def test_undo_refuses_a_change_the_page_did_not_show(
    session: Session, form_client: TestClient
) -> None:
    setup = build(session)
    audit_log = setup.ids["Audit log"]
    with acting_as(ME):
        _set_value(session, audit_log, 50)
    shown = _entry_id(session, "initiative.update")
    with acting_as("ed"):
        _set_value(session, audit_log, 60)
    # Ticked for what the page showed, while ed's newer change is now the last one.
    response = post_form(
        form_client,
        f"/teams/{setup.team.id}/plan/undo",
        {"period_id": str(setup.period.id), "entry": str(shown), "confirm": str(shown)},
        **HX,
    )
    assert response.status_code == 409
    assert "(by ed)" in parse_html(response.text).by_id("notice").text()
    assert _value(session, audit_log) == 60


def test_the_undo_area_says_it_covers_initiatives_only(
    session: Session, form_client: TestClient
) -> None:
    setup = build(session)
    with acting_as(ME):
        _set_value(session, setup.ids["Audit log"], 31)
        set_capacity_settings(
            session,
            team_id=setup.team.id or 0,
            period_id=setup.period.id or 0,
            settings_in=CapacitySettingsIn(focus_factor=0.5, reserve_pct=0.0),
        )
    root = _page(form_client, setup)
    covers = root.by_id("undo-covers").text()
    assert "initiative" in covers
    assert "not capacity" in covers
    assert "focus factor" in covers
    assert _press(form_client, setup, "undo").status_code == 200
    root = _page(form_client, setup)
    assert root.find(id="undo-button") is None  # nothing left: the focus factor stays
    assert root.by_id("undo-covers").text() == covers


def test_an_undo_can_be_redone_and_then_undone_again(
    session: Session, form_client: TestClient
) -> None:
    setup = build(session)
    audit_log = setup.ids["Audit log"]
    with acting_as(ME):
        _set_value(session, audit_log, 41)
        _set_value(session, audit_log, 42)
    assert _page(form_client, setup).find(id="redo-button") is None
    _press(form_client, setup, "undo")
    _press(form_client, setup, "undo")
    assert _value(session, audit_log) == 30
    root = _page(form_client, setup)
    assert "Changed value of “Audit log” (your undo)" in root.by_id("redo-what").text()
    redone = _press(form_client, setup, "redo")
    assert redone.status_code == 200
    assert "Redid" in parse_html(redone.text).by_id("notice").text()
    assert _value(session, audit_log) == 41
    assert _press(form_client, setup, "redo").status_code == 200
    assert _value(session, audit_log) == 42
    assert _page(form_client, setup).find(id="redo-button") is None  # nothing left to redo
    # The redone change is offered for undo again.
    _press(form_client, setup, "undo")
    assert _value(session, audit_log) == 41


def test_a_new_change_ends_the_redo(session: Session, form_client: TestClient) -> None:
    setup = build(session)
    audit_log = setup.ids["Audit log"]
    with acting_as(ME):
        _set_value(session, audit_log, 41)
    _press(form_client, setup, "undo")
    assert _page(form_client, setup).find(id="redo-button") is not None
    with acting_as(ME):
        _set_value(session, setup.ids["Billing fix"], 3)
    assert _page(form_client, setup).find(id="redo-button") is None
    refused = post_form(
        form_client,
        f"/teams/{setup.team.id}/plan/redo",
        {"period_id": str(setup.period.id)},
        **HX,
    )
    assert refused.status_code == 404
    assert _value(session, audit_log) == 30


def test_redoing_a_colleagues_undo_asks_first(session: Session, form_client: TestClient) -> None:
    setup = build(session)
    audit_log = setup.ids["Audit log"]
    with acting_as("boss"):
        _set_value(session, audit_log, 41)
    with acting_as("boss"):
        undo_last_change(session, team_id=setup.team.id or 0, period_id=setup.period.id)
    root = _page(form_client, setup)
    assert "(undone by boss)" in root.by_id("redo-what").text()
    assert root.by_id("redo-confirm").get("required") is not None
    assert _press(form_client, setup, "redo").status_code == 409
    assert _value(session, audit_log) == 30
    undo_entry = _entry_id(session, "initiative.undo")
    assert _press(form_client, setup, "redo", confirm=str(undo_entry)).status_code == 200
    assert _value(session, audit_log) == 41


def test_redo_deletes_again_and_brings_back_under_the_same_ids(
    session: Session, form_client: TestClient
) -> None:
    setup = build(session)
    billing = setup.ids["Billing fix"]
    with acting_as(ME):
        delete_initiative(session, initiative_id=billing)
    _press(form_client, setup, "undo")  # brought back
    assert _value(session, billing) is not None
    _press(form_client, setup, "redo")  # deleted again
    assert _value(session, billing) is None
    _press(form_client, setup, "undo")
    assert _value(session, billing) is not None

    with acting_as(ME):
        added = make_initiative(session, setup.team, setup.period, "Pier lights", 2, 5).row.id
    _press(form_client, setup, "undo")  # the creation: removed
    assert _value(session, added or 0) is None
    _press(form_client, setup, "redo")  # back, the same initiative
    assert _value(session, added or 0) == 5

    with acting_as(ME):
        pasted = commit_paste(
            session,
            parse_paste(
                "Tide gauge\t2\t10\nPilot boat\t3\t12",
                team_id=setup.team.id or 0,
                period_id=setup.period.id,
            ),
        )
    _press(form_client, setup, "undo")
    assert [_value(session, i) for i in pasted] == [None, None]
    redone = _press(form_client, setup, "redo")
    assert redone.status_code == 200
    assert [_value(session, i) for i in pasted] == [10, 12]
    _press(form_client, setup, "undo")  # the paste again, as a whole
    assert [_value(session, i) for i in pasted] == [None, None]
