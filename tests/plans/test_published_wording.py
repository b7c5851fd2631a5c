"""A published link speaks to readers without an account: the method in plain words, the
technical note folded away, and no advice that points to pages they cannot open."""

from __future__ import annotations

import html as markup
import re

from fastapi.testclient import TestClient
from sqlmodel import Session

from server.schemas import TeamEffortIn
from tests.factories import make_initiative, make_team
from tests.pages.test_curve_table import coupled_setup
from tests.plans.conftest import Workspace, edit, publish, save_live

STEPS_IN_WORDS = "Exact best plan within the capacity, in 0.5-day steps."


def _visible(html: str) -> str:
    """The text shown without opening anything: folded <details> bodies dropped."""
    unfolded = re.sub(
        r"(<details[^>]*>\s*<summary>.*?</summary>).*?</details>", r"\1", html, flags=re.S
    )
    return markup.unescape(re.sub(r"\s+", " ", re.sub(r"<[^>]+>", " ", unfolded)))


def _shared_plan(session: Session, workspace: Workspace, client: TestClient) -> dict:
    """A plan with effort shared with another team and a need that team has not pinned."""
    quay = make_team(session, "Quay")
    edit(
        session,
        workspace.id_of("Stop alerts"),
        other_efforts=[TeamEffortIn(team_id=quay.id or 0, likely=1.5)],
    )
    berths = make_initiative(session, quay, workspace.period, "Berth sensors", 2.0, 5.0)
    edit(session, workspace.id_of("Depot dashboard"), needs=[berths.row.id])
    return save_live(client, workspace, "Shared plan")


def test_published_page_states_the_method_in_plain_words(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    plan = _shared_plan(session, workspace, form_client)
    saved = form_client.get(f"/plans/{plan['id']}").text
    assert "period overview" in saved  # the signed-in page keeps its advice and its method
    assert re.search(r"by (dp|milp-highs)", saved)

    html = TestClient(form_client.app).get(publish(form_client, plan["id"])["url"]).text
    shown = _visible(html)
    assert STEPS_IN_WORDS in shown
    assert "simulated runs of the low, likely and high estimates" in shown
    assert re.search(r"% \(from [\d,]+ simulated runs", shown), shown  # it read "%(from"
    assert re.search(r"% \(Monte Carlo over", _visible(saved)), _visible(saved)
    for jargon in (
        "milp",
        "HiGHS",
        "resolution by",
        "binary program",
        "DP rows",
        "KiB",
        "Monte Carlo",
        "standard error",
    ):
        assert jargon not in shown
    # The technical note is still there for the curious, folded away.
    assert re.search(r"<details[^>]*>\s*<summary>How it was worked out</summary>", html)
    assert "resolution by " in html
    # No advice to open pages a reader of the link cannot open.
    for advice in ("period overview", "this page", "LOADLINE_RESOLUTION", "setting"):
        assert advice not in html
    # The warnings themselves stay, reworded.
    assert "which another team has not pinned" in shown
    assert "this plan counts Harbour's share only." in shown


def test_a_binary_program_plan_is_worded_plainly_with_its_method_folded_away(
    session: Session, form_client: TestClient
) -> None:
    setup = coupled_setup(session)
    saved = form_client.post(
        "/api/v1/plans",
        json={"name": "Coupled", "team_id": setup.team.id, "period_id": setup.period.id},
    )
    assert saved.status_code == 201, saved.text
    assert saved.json()["result"]["method"] == "milp-highs"
    html = TestClient(form_client.app).get(publish(form_client, saved.json()["id"])["url"]).text
    shown = _visible(html)
    assert STEPS_IN_WORDS in shown
    assert "milp" not in shown
    assert "HiGHS" not in shown
    folded = html.split("<summary>How it was worked out</summary>", 1)[1].split("</details>")[0]
    assert "milp-highs" in folded
