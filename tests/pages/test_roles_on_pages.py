"""Pages by role, and the plan page's ways to save the plan or make a scenario of it.

Viewers read everything but change nothing: pages leave the edit controls out (or show them
disabled) with a note saying who may edit. Refusals of requests sent anyway: test_refusals.py.
"""

from __future__ import annotations

from urllib.parse import parse_qs, urlsplit

import pytest
from fastapi.testclient import TestClient
from sqlmodel import Session

from tests.conftest import csrf_token
from tests.pages.html_tree import Node, parse_html
from tests.pages.test_plan_pages import Setup, build

EDIT_CONTROLS = ("quick-form", "paste-text", "undo-button")


@pytest.fixture
def setup(session: Session) -> Setup:
    return build(session)


def _page(client: TestClient, url: str) -> Node:
    response = client.get(url)
    assert response.status_code == 200, response.text[:500]
    return parse_html(response.text)


def _fields_of_rows(root: Node) -> list[Node]:
    return [
        n
        for n in root.find_all(where=lambda n: n.tag in ("input", "select", "textarea"))
        if n.get("type") != "hidden" and (n.get("form") or "").startswith(("edit-", "quick-"))
    ]


# --- saving and scenarios from the plan page --------------------------------------------------


def test_plan_page_links_to_saving_and_scenarios(
    editor: TestClient, session: Session, setup: Setup
) -> None:
    root = _page(editor, setup.url)
    save = root.by_id("save-plan-link")
    query = parse_qs(urlsplit(save.get("href") or "").query)
    assert urlsplit(save.get("href") or "").path == "/plans/new"
    assert query == {"team_id": [str(setup.team.id)], "period_id": [str(setup.period.id)]}
    # The links leave the boosted plan fragment: they open their own pages.
    assert root.find("nav", cls="plan-actions").get("hx-boost") == "false"  # type: ignore[union-attr]
    # Both links lead to working pages for this team and period.
    saving = _page(editor, save.get("href") or "")
    assert saving.find("form", where=lambda n: n.get("action") == "/plans") is not None
    scenarios_href = root.by_id("scenarios-link").get("href") or ""
    assert "Make a scenario" in root.by_id("scenarios-link").text()
    scenarios = _page(editor, scenarios_href)
    assert f"Scenarios of {setup.team.name} in {setup.period.name}" in scenarios.find("h1").text()  # type: ignore[union-attr]
    assert root.find("p", id="save-whatif-note") is None  # no what-if, nothing to warn about


def test_the_what_if_is_named_and_starts_the_scenario_form(
    editor: TestClient, session: Session, setup: Setup
) -> None:
    forced = setup.ids["Dark mode"]
    left = setup.ids["Audit log"]
    root = _page(editor, f"{setup.url}&force_in={forced}&force_out={left}&confidence=80")
    note = root.by_id("save-whatif-note").text()
    assert "forced initiatives" in note
    assert "P80" in note
    assert "not saved" in note
    link = root.by_id("scenarios-link")
    assert "of this what-if" in link.text()
    query = parse_qs(urlsplit(link.get("href") or "").query)
    assert query == {
        "period_id": [str(setup.period.id)],
        f"forced.{forced}": ["in"],
        f"forced.{left}": ["out"],
        "confidence": ["P80"],
    }
    form = _page(editor, link.get("href") or "")
    chosen = {
        select.get("id"): next(
            (o.get("value") for o in select.find_all("option") if "selected" in o.attrs), None
        )
        for select in form.find_all("select")
        if (select.get("name") or "").startswith("forced.")
    }
    assert chosen[f"f-forced-{forced}"] == "in"
    assert chosen[f"f-forced-{left}"] == "out"
    assert chosen[f"f-forced-{setup.ids['Billing fix']}"] == ""
    assert form.by_id("f-confidence").get("value") == "P80"


def test_making_the_scenario_from_the_carried_what_if(
    editor: TestClient, session: Session, setup: Setup
) -> None:
    forced = setup.ids["Dark mode"]
    form = {
        "csrf_token": csrf_token(editor, f"/teams/{setup.team.id}/scenarios"),
        "period_id": str(setup.period.id),
        "name": "Dark mode first",
        f"forced.{forced}": "in",
    }
    made = editor.post(f"/teams/{setup.team.id}/scenarios", data=form, follow_redirects=False)
    assert made.status_code == 303
    scenario = editor.get(made.headers["location"])
    assert "Dark mode" in scenario.text
    assert "forced in" in scenario.text.lower()


# --- read-only pages for viewers --------------------------------------------------------------


def test_viewers_get_a_read_only_plan(viewer: TestClient, editor: TestClient, setup: Setup) -> None:
    editing = _page(editor, setup.url)
    assert _fields_of_rows(editing), "the editor's plan has fields"
    for control in EDIT_CONTROLS[:2]:
        assert editing.find(id=control) is not None

    root = _page(viewer, setup.url)
    assert _fields_of_rows(root) == []
    assert (
        root.find_all("form", where=lambda n: n.get("method") == "post" and "row-edit" in n.classes)
        == []
    )
    for control in EDIT_CONTROLS:
        assert root.find(id=control) is None, control
    assert root.find(id="save-plan-link") is None
    assert root.by_id("scenarios-link").text() == "See scenarios"
    assert "editors and admins" in root.by_id("read-only-note").text()
    # Values are still there to read, and what-ifs (links, not changes) stay open to viewers.
    row = root.by_id(f"row-{setup.ids['Search filters']}")
    assert "8" in row.find("td", cls="col-effort").text()  # type: ignore[union-attr]
    assert root.find("a", where=lambda n: "force_in=" in (n.get("href") or "")) is not None
    assert root.find(id="total-value") is not None


def test_row_cache_never_gives_a_viewer_the_editors_fields(
    viewer: TestClient, editor: TestClient, setup: Setup
) -> None:
    # The same browser cookie (one token) for both: only the role tells the pages apart.
    cookie = editor.get("/").cookies
    viewer.cookies.update(cookie)
    assert _fields_of_rows(_page(editor, setup.url))
    assert _fields_of_rows(_page(viewer, setup.url)) == []


@pytest.mark.parametrize(
    "url",
    [
        "/",
        "/teams/{team}?period_id={period}",
        "/teams/{team}/initiatives?period={period}",
        "/teams/{team}/scenarios?period_id={period}",
        "/teams/{team}/plan-import",
        "/plans/new?team_id={team}&period_id={period}",
    ],
)
def test_editing_pages_are_read_only_for_viewers(
    viewer: TestClient, editor: TestClient, setup: Setup, url: str
) -> None:
    path = url.format(team=setup.team.id, period=setup.period.id)

    def posts(root: Node) -> list[Node]:
        return root.find_all(
            "form",
            where=lambda n: n.get("method") == "post" and n.get("action") != "/logout",
        )

    assert posts(_page(editor, path)), f"the editor sees forms on {path}"
    root = _page(viewer, path)
    assert posts(root) == [], path
    assert "editors and admins" in root.by_id("read-only-note").text()


def test_initiative_details_are_shown_disabled_to_viewers(
    viewer: TestClient, session: Session, setup: Setup
) -> None:
    initiative_id = setup.ids["Audit log"]
    root = _page(viewer, f"/initiatives/{initiative_id}/edit")
    fieldset = root.find("fieldset", cls="plain-fieldset")
    assert fieldset is not None
    assert "disabled" in fieldset.attrs
    assert fieldset.find("input", where=lambda n: n.get("value") == "Audit log") is not None
    assert (
        root.find("button", where=lambda n: n.get("type") == "submit" and "Save" in n.text())
        is None
    )
    assert root.find("form", where=lambda n: (n.get("action") or "").endswith("/delete")) is None
    assert "editors and admins" in root.by_id("read-only-note").text()
