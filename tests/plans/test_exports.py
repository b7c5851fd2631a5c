"""Exports: CSV injection neutralised (OWASP guidance on CSV injection), the CSV round trip into
an empty team, JSON and Markdown, and refused imports."""

from __future__ import annotations

import copy
import csv
import io
import json
import re
from urllib.parse import quote, unquote

import pytest
from fastapi import FastAPI
from fastapi.testclient import TestClient
from hypothesis import given
from hypothesis import strategies as st
from sqlmodel import Session

from server.errors import InputError
from server.models import SavedPlan
from server.planning.compare import compare
from server.planning.exports import (
    FORMULA_STARTS,
    comparison_csv,
    md,
    neutralise,
    parse_plan_csv,
    plan_csv,
    plan_markdown,
    restore,
)
from server.schemas import TeamEffortIn, TeamUpdate
from server.store import plans as store
from server.store.teams import update_team
from tests.api.conftest import read_snapshot
from tests.factories import make_member, make_period, make_team
from tests.pages.parsed_page import Form, parse
from tests.plans.conftest import (
    Workspace,
    add_initiative,
    counts,
    edit,
    error_fields,
    error_text,
    save_live,
)

# The characters OWASP lists as formula starters: =, +, -, @, tab (0x09), carriage return (0x0D).
FORMATS = ("csv", "md", "json")
OWASP_STARTS = ("=", "+", "-", "@", "\t", "\r")


def _cells(text: str) -> list[str]:
    return [cell for row in csv.reader(io.StringIO(text, newline="")) for cell in row]


def test_the_formula_starters_are_the_owasp_list() -> None:
    assert set(FORMULA_STARTS) == set(OWASP_STARTS)


@pytest.mark.parametrize(
    ("cell", "written"),
    [
        ("=1+1", "'=1+1"),
        ('=HYPERLINK("http://example.invalid","x")', '\'=HYPERLINK("http://example.invalid","x")'),
        ("+41 phone", "'+41 phone"),
        ("-2+3", "'-2+3"),
        ("@SUM(A1:A9)", "'@SUM(A1:A9)"),
        ("\tcmd", "'\tcmd"),
        ("\rcmd", "'\rcmd"),
        ("'quoted", "''quoted"),
        ("plain = fine", "plain = fine"),
        ("", ""),
    ],
)
def test_neutralise_prefixes_formula_starters(cell: str, written: str) -> None:
    assert neutralise(cell) == written
    assert restore(str(neutralise(cell))) == cell


def test_numbers_loadline_writes_are_not_text() -> None:
    assert neutralise(-3) == -3  # a spreadsheet reads -3 as a number, never as a formula
    assert neutralise(2.5) == 2.5


@given(st.text(max_size=40))
def test_neutralise_then_restore_gives_the_text_back(text: str) -> None:
    safe = str(neutralise(text))
    assert not safe.startswith(OWASP_STARTS)
    assert restore(safe) == text


DANGEROUS_TITLES = ["=cmd|' /C calc'!A0", "+SUM(1)", "-1+2", "@import", "=2*5"]


def test_plan_csv_has_no_cell_starting_like_a_formula(
    session: Session, workspace: Workspace, client: TestClient
) -> None:
    for title in DANGEROUS_TITLES:
        add_initiative(session, workspace.team, workspace.period, title, 1.0, 1.0)
    plan = save_live(client, workspace, "=plan name")
    response = client.get(f"/api/v1/plans/{plan['id']}/export.csv")
    assert response.status_code == 200
    assert response.headers["content-type"].startswith("text/csv")
    assert "attachment" in response.headers["content-disposition"]
    cells = _cells(response.text)
    assert not [c for c in cells if c.startswith(OWASP_STARTS)]
    for title in [*DANGEROUS_TITLES, "=plan name"]:
        assert "'" + title in cells
    assert all(line.startswith('"') for line in response.text.splitlines() if line)  # quoted

    # Tab and carriage return cannot be typed at the start of a stored title (titles are
    # trimmed), so they are put into a snapshot directly to check the writer.
    db_plan = store.get_plan(session, plan_id=plan["id"])
    crafted_inputs = copy.deepcopy(db_plan.inputs)
    crafted_inputs["initiatives"][0]["title"] = "\t=1+1"
    crafted_inputs["initiatives"][1]["title"] = "\r@x"
    crafted = SavedPlan(
        id=db_plan.id,
        name="\tname",
        team_ids=db_plan.team_ids,
        period_id=db_plan.period_id,
        inputs=crafted_inputs,
        result=db_plan.result,
        inputs_digest=db_plan.inputs_digest,
        created_at=db_plan.created_at,
        created_by="\rsomeone",
    )
    cells = _cells(plan_csv(crafted))
    assert not [c for c in cells if c.startswith(OWASP_STARTS)]
    assert {"'\t=1+1", "'\r@x", "'\tname", "'\rsomeone"} <= set(cells)


def test_comparison_csv_neutralises_plan_names_and_titles(
    session: Session, workspace: Workspace, client: TestClient
) -> None:
    add_initiative(session, workspace.team, workspace.period, "@risky", 1.0, 30.0)
    a = save_live(client, workspace, "=A")
    b = save_live(client, workspace, "+B", changes={"capacity_days": 4})
    text = comparison_csv(compare(store.get_plans(session, plan_ids=[a["id"], b["id"]])))
    cells = _cells(text)
    assert not [c for c in cells if c.startswith(OWASP_STARTS)]
    assert "A: =A" in cells
    assert "'@risky" in cells
    api = client.get(f"/api/v1/compare/export.csv?plans={a['id']},{b['id']}")
    assert api.status_code == 200
    assert api.text == text


def _rich_workspace(session: Session, ws: Workspace) -> None:
    """Pinned, ruled out, an either-or set, needs and formula-like titles on top of the six."""
    add_initiative(session, ws.team, ws.period, "=Build ticketing", 3.0, 10.0, either_or="tickets")
    add_initiative(
        session, ws.team, ws.period, "Buy ticketing", 2.0, 9.0, low=1.5, high=4, either_or="tickets"
    )
    base = add_initiative(session, ws.team, ws.period, "Data model", 1.0, 2.0, low=0.5, high=2)
    add_initiative(
        session, ws.team, ws.period, "-Reports", 1.5, 6.0, needs=[base.row.id], state="candidate"
    )
    add_initiative(session, ws.team, ws.period, "Security fix", 1.0, 1.0, state="pinned")
    add_initiative(session, ws.team, ws.period, "Old widget", 0.5, 50.0, state="ruled_out")


def _import_into_an_empty_team(session: Session, client: TestClient, exported: str) -> dict:
    """Import a plan CSV into a new team "Empty" and a new period; the API's answer."""
    empty = make_team(session, "Empty")
    period = make_period(session, name="Later sprint")
    imported = client.post(
        f"/api/v1/teams/{empty.id}/plan-imports",
        json={"period_id": period.id, "csv": exported},
    )
    assert imported.status_code == 201, imported.text
    return imported.json()


def test_csv_export_imported_into_an_empty_team_gives_the_same_plan(
    session: Session, workspace: Workspace, client: TestClient
) -> None:
    _rich_workspace(session, workspace)
    changes = {
        "confidence": 0.8,
        "capacity_days": 14,
        "forced_in": [workspace.id_of("Depot dashboard")],
        "forced_out": [workspace.id_of("Fare capping")],
    }
    original = save_live(client, workspace, "Rich plan", changes=changes)
    exported = client.get(f"/api/v1/plans/{original['id']}/export.csv").text

    body = _import_into_an_empty_team(session, client, exported)
    assert len(body["initiative_ids"]) == len(original["inputs"]["initiatives"])
    assert body["scenario"]["changes"]["capacity_days"] == original["result"]["capacity"]

    replanned = client.get(body["scenario"]["url"].replace("/scenarios", "/api/v1/scenarios"))
    assert replanned.status_code == 200, replanned.text
    plan = replanned.json()["scenario_plan"]
    titles = {i["key"]: i["title"] for i in original["inputs"]["initiatives"]}
    original_chosen = [titles[k] for k in original["result"]["chosen"]]
    assert [c["title"] for c in plan["chosen"]] == original_chosen
    assert plan["value"] == original["result"]["value"]
    assert plan["effort"] == pytest.approx(original["result"]["effort"])
    fit = original["result"]["fit"]
    assert plan["fit_label"] == (fit["label"] if fit else None)
    assert "=Build ticketing" in titles.values()

    # Saving the imported scenario gives a snapshot with the same estimates and states.
    saved = client.post(f"/api/v1/scenarios/{body['scenario']['id']}/plans", json={}).json()
    again = {i["title"]: i for i in saved["inputs"]["initiatives"]}
    for before in original["inputs"]["initiatives"]:
        after = again[before["title"]]
        assert after["estimate"] == before["estimate"]
        assert after["planned_effort"] == pytest.approx(before["planned_effort"])
        assert after["value"] == before["value"]
        assert after["state"] == before["state"]
        assert after["either_or"] == before["either_or"]
        assert after["forced"] == before["forced"]
        assert [titles[k] for k in before["needs"]] == [
            next(t for t, i in again.items() if i["key"] == k) for k in after["needs"]
        ]


def test_import_page_uploads_a_file_and_opens_the_scenario(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    plan = save_live(form_client, workspace)
    exported = form_client.get(f"/plans/{plan['id']}/export.csv").content
    empty = make_team(session, "Empty")
    make_member(session, empty, "Someone")
    page = form_client.get(f"/teams/{empty.id}/plan-import")
    assert page.status_code == 200
    response = form_client.post(
        f"/teams/{empty.id}/plan-import",
        data={"csrf_token": form_client.csrf, "period_id": str(workspace.period_id)},  # type: ignore[attr-defined]
        files={"file": ("plan.csv", exported, "text/csv")},
        follow_redirects=False,
    )
    assert response.status_code == 303, response.text
    scenario_page = form_client.get(response.headers["location"])
    assert scenario_page.status_code == 200
    assert "Imported: Baseline" in scenario_page.text
    pasted = form_client.post(
        f"/teams/{empty.id}/plan-import",
        data={
            "csrf_token": form_client.csrf,  # type: ignore[attr-defined]
            "period_id": str(workspace.period_id),
            "csv": exported.decode().replace('"capacity_days"', '"room"'),
        },
    )
    assert pasted.status_code == 422
    assert "no capacity_days row" in pasted.text


def test_importing_a_plan_where_its_titles_already_are_is_refused(
    app: FastAPI, session: Session, workspace: Workspace, client: TestClient
) -> None:
    # The export holds all six initiatives of the team's period, Depot dashboard pinned.
    edit(session, workspace.id_of("Depot dashboard"), state="pinned")
    plan = save_live(client, workspace)
    exported = client.get(f"/api/v1/plans/{plan['id']}/export.csv").text
    before = read_snapshot(app.state.engine)
    again = client.post(
        f"/api/v1/teams/{workspace.team_id}/plan-imports",
        json={"period_id": workspace.period_id, "csv": exported},
    )
    assert again.status_code == 422, again.text
    assert error_fields(again) == ["csv"]
    assert error_text(again) == (
        "csv: 6 titles of the file are already initiatives of Harbour in Sprint of Harbour: "
        "“Route search”, “Stop alerts”, “Fare capping”, “Depot dashboard”, “Offline "
        "timetable” and 1 more. Nothing was imported; import into another period or team, or "
        "rename or remove those initiatives first."
    )
    assert read_snapshot(app.state.engine) == before  # no initiative, scenario or audit entry

    # The same file goes into another period of the team, and into another team's period.
    later = make_period(session, name="Later sprint")
    for team_id, period_id in (
        (workspace.team_id, later.id),
        (make_team(session, "Empty").id, workspace.period_id),
    ):
        elsewhere = client.post(
            f"/api/v1/teams/{team_id}/plan-imports",
            json={"period_id": period_id, "csv": exported},
        )
        assert elsewhere.status_code == 201, elsewhere.text


def test_import_titles_clash_ignoring_case_and_spaces(
    session: Session, workspace: Workspace, client: TestClient
) -> None:
    plan = save_live(client, workspace)
    exported = client.get(f"/api/v1/plans/{plan['id']}/export.csv").text
    other = make_team(session, "Lighthouse")
    add_initiative(session, other, workspace.period, "STOP ALERTS", 1.0, 1.0)
    add_initiative(session, other, workspace.period, "Stop alert", 1.0, 1.0)  # not the same
    spaced = exported.replace('"Fare capping"', '"  Fare capping  "')
    add_initiative(session, other, workspace.period, "fare capping", 1.0, 1.0)
    before = counts(session)
    response = client.post(
        f"/api/v1/teams/{other.id}/plan-imports",
        json={"period_id": workspace.period_id, "csv": spaced},
    )
    assert response.status_code == 422, response.text
    assert "2 titles of the file are already initiatives of Lighthouse" in error_text(response)
    assert ": “Stop alerts” and “Fare capping”. Nothing was imported" in error_text(response)
    assert counts(session) == before


def test_import_page_refuses_a_plan_already_in_the_period_and_keeps_the_form(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    plan = save_live(form_client, workspace)
    exported = form_client.get(f"/plans/{plan['id']}/export.csv").text
    before = counts(session)
    response = form_client.post(
        f"/teams/{workspace.team_id}/plan-import",
        data={
            "csrf_token": form_client.csrf,  # type: ignore[attr-defined]
            "period_id": str(workspace.period_id),
            "csv": exported,
        },
    )
    assert response.status_code == 422
    form = Form(parse(response.text), f"/teams/{workspace.team_id}/plan-import")
    assert "6 titles of the file are already initiatives of Harbour" in form.error("file")
    assert form.value("period_id") == str(workspace.period_id)
    assert form.value("csv").strip() == exported.strip()
    assert counts(session) == before


def _good_csv(client: TestClient, ws: Workspace) -> str:
    plan = save_live(client, ws)
    return client.get(f"/api/v1/plans/{plan['id']}/export.csv").text


@pytest.mark.parametrize(
    ("mangle", "needle"),
    [
        (lambda t: t.replace('"capacity_days"', '"capacity"'), "capacity_days"),
        (lambda t: t.replace(",", ";"), "delimiter"),
        (lambda t: re.sub(r'"capacity_days","[^"]*"', '"capacity_days","0"', t), "capacity_days"),
        (lambda t: re.sub(r'"confidence","[^"]*"', '"confidence","1.5"', t), "confidence"),
        (lambda t: t.replace('"likely"', '"most_likely"'), "likely"),
        (lambda t: t.replace('"Route search","yes","2","3","5"', '"","yes","2","3","5"'), "title"),
        (
            lambda t: t.replace(
                '"Route search","yes","2","3","5"', '"Route search","yes","5","3","2"'
            ),
            "low",
        ),
        (lambda t: t.replace('"12","candidate"', '"twelve","candidate"'), "value"),
        (lambda t: t.replace('"12","candidate"', '"12","maybe"'), "state"),
        (
            lambda t: t + '"1","Dup","no","","1","","1","1","candidate","","","","","","",""\r\n',
            "twice",
        ),
        (
            lambda t: (
                t + '"99","Needy","no","","1","","1","1","candidate","","","42","","","",""\r\n'
            ),
            "needs",
        ),
        (lambda t: t.replace("\r\n\r\n", "\r\n"), "empty row"),
        (lambda t: "", "empty row"),
    ],
)
def test_bad_csv_is_refused_with_the_place_named_and_nothing_stored(
    session: Session, workspace: Workspace, client: TestClient, mangle: object, needle: str
) -> None:
    text = mangle(_good_csv(client, workspace))  # type: ignore[operator]
    empty = make_team(session, "Empty")
    before = counts(session)
    response = client.post(
        f"/api/v1/teams/{empty.id}/plan-imports",
        json={"period_id": workspace.period_id, "csv": text},
    )
    assert response.status_code == 422, response.text
    assert error_fields(response) == ["csv"]
    assert needle in error_text(response)
    assert counts(session) == before


def test_parse_reads_back_a_cycle_free_needs_graph_only() -> None:
    header = (
        '"plan","x"\r\n"capacity_days","5"\r\n\r\n'
        '"key","title","likely","value","state","needs"\r\n'
    )
    rows = '"1","A","1","1","candidate","2"\r\n"2","B","1","1","candidate","1"\r\n'
    with pytest.raises(InputError, match="cycle"):
        parse_plan_csv(header + rows, team_id=1)
    fine = parse_plan_csv(  # team 1: the parse does not look the team up
        header + '"1","A","1","1","candidate","2"\r\n"2","=B","1","1","pinned",""\r\n',
        team_id=1,
    )
    assert [r.needs for r in fine.rows] == [["2"], []]
    assert fine.capacity_days == 5
    assert fine.rows[1].initiative.title == "=B"


def test_json_export_is_the_stored_snapshot(workspace: Workspace, client: TestClient) -> None:
    plan = save_live(client, workspace)
    response = client.get(f"/api/v1/plans/{plan['id']}/export.json")
    assert response.status_code == 200
    document = json.loads(response.text)
    assert document["inputs"] == plan["inputs"]
    assert document["result"] == plan["result"]
    assert document["plan"]["inputs_digest"] == plan["inputs_digest"]
    assert client.get(f"/plans/{plan['id']}/export.json").content == response.content


def test_the_live_plan_downloads_as_a_saved_one_would_without_saving(
    session: Session, workspace: Workspace, client: TestClient
) -> None:
    """Only saved plans had downloads: a meeting had to save a plan to send it round."""
    base = f"/teams/{workspace.team_id}/plan"
    plan_page = parse(client.get(f"{base}?period_id={workspace.period_id}").text)
    links = [a.attrs["href"] for a in plan_page.find("span", id="live-downloads").find_all("a")]
    assert links == [f"{base}/export.{fmt}?period_id={workspace.period_id}" for fmt in FORMATS]
    before = counts(session)
    live = {
        fmt: client.get(f"{base}/export.{fmt}?period_id={workspace.period_id}") for fmt in FORMATS
    }
    assert counts(session) == before  # nothing saved
    assert all(response.status_code == 200 for response in live.values())
    saved = save_live(client, workspace, "Same plan")
    document = json.loads(live["json"].text)
    assert document["result"]["chosen"] == saved["result"]["chosen"]
    assert document["result"]["value"] == saved["result"]["value"]
    assert document["plan"]["name"].endswith("(live, not saved)")
    summary = dict(row[:2] for row in csv.reader(io.StringIO(live["csv"].text)) if len(row) >= 2)
    assert summary["plan"].endswith("(live, not saved)")
    # Found in use: the live downloads said "saved ... by" a plan nobody saved.
    assert "saved_at" not in summary
    assert "saved_by" not in summary
    assert summary["exported_at"].endswith(" UTC")
    assert " · exported, not saved, " in live["md"].text
    assert " · saved " not in live["md"].text
    assert "exported_at" in document["plan"]
    assert "created_at" not in document["plan"]
    saved_csv = client.get(f"/plans/{saved['id']}/export.csv").text
    assert "saved_at" in dict(row[:2] for row in csv.reader(io.StringIO(saved_csv)) if row)
    assert summary["value"] == str(_plain(saved["result"]["value"]))
    assert live["md"].text.startswith("# Harbour · Sprint")
    assert 'filename="live-plan-Harbour-' in live["csv"].headers["content-disposition"]
    missing = client.get(f"{base}/export.csv")
    assert missing.status_code == 422  # the period is required


def _plain(value: float) -> int | float:
    return int(value) if float(value).is_integer() else value


def test_markdown_summary_escapes_markup(
    session: Session, workspace: Workspace, client: TestClient
) -> None:
    add_initiative(session, workspace.team, workspace.period, "Pipes | and *stars* <b>", 0.5, 99.0)
    plan = save_live(client, workspace, "Plan #1")
    text = client.get(f"/api/v1/plans/{plan['id']}/export.md").text
    assert text.startswith("# Plan \\#1\n")
    assert "| Pipes \\| and \\*stars\\* \\<b\\> | 0.5 | 99 | candidate |" in text
    assert "<b>" not in text
    assert f"Value: **{plan['result']['value']:g}**" in text
    assert plan["result"]["fit"]["label"] in text
    assert md("a\nb|c") == "a b\\|c"
    assert plan_markdown(store.get_plan(session, plan_id=plan["id"])) == text
    comparison = client.get(
        f"/api/v1/compare/export.md?plans={plan['id']},{save_live(client, workspace)['id']}"
    )
    assert comparison.status_code == 200
    assert comparison.text.startswith("# Plan comparison")
    assert "In every plan:" in comparison.text


def test_download_names_keep_their_letters_with_an_ascii_fallback(
    workspace: Workspace, client: TestClient
) -> None:
    """RFC 6266 section 4.3: filename for old clients, filename* (RFC 8187) as typed; a name
    in plain ASCII letters needs only the first."""
    plan = save_live(client, workspace, "Übergang “Q2” / 計画")
    response = client.get(f"/api/v1/plans/{plan['id']}/export.md")
    assert response.status_code == 200
    disposition = response.headers["content-disposition"]
    assert disposition.isascii()
    typed = f"plan-{plan['id']}-Übergang--Q2----計画.md"
    assert disposition == (
        f'attachment; filename="plan-{plan["id"]}--bergang--Q2------.md"; '
        f"filename*=UTF-8''{quote(typed, safe='')}"
    )
    assert unquote(disposition.split("UTF-8''")[1]) == typed
    plain = save_live(client, workspace, "Sprint plan")
    assert (
        client.get(f"/api/v1/plans/{plain['id']}/export.md").headers["content-disposition"]
        == f'attachment; filename="plan-{plain["id"]}-Sprint-plan.md"'
    )


def test_csv_numbers_carry_no_float_noise() -> None:
    from server.planning.exports import _number

    assert _number(18 * 1.2) == 21.6  # 21.599999999999998 in binary floating point
    assert _number(0.1 + 0.2) == 0.3
    assert _number(3.0) == 3
    assert _number(0.9907120743034057) == 0.9907120743  # a real ratio keeps ten digits
    assert _number(None) == ""


def test_single_estimates_stay_single_through_export_and_import(
    session: Session, workspace: Workspace, client: TestClient
) -> None:
    """Harbour spreads single-number estimates ±20 %. The export used to write that spread as
    a typed low/high, so the imported "Stop alerts" (entered as 2 days) became 1.6 / 2 / 2.4."""
    update_team(session, team_id=workspace.team_id, team_in=TeamUpdate(default_spread=0.2))
    original = save_live(client, workspace, "Spread plan", changes={"confidence": 0.8})
    exported = client.get(f"/api/v1/plans/{original['id']}/export.csv").text
    summary = dict(row[:2] for row in csv.reader(io.StringIO(exported)) if len(row) >= 2)
    assert summary["default_spread"] == "0.2"

    def imported_into(spread: float, name: str) -> dict:
        team = make_team(session, name)
        update_team(session, team_id=team.id or 0, team_in=TeamUpdate(default_spread=spread))
        period = make_period(session, name=f"{name} sprint")
        response = client.post(
            f"/api/v1/teams/{team.id}/plan-imports",
            json={"period_id": period.id, "csv": exported},
        )
        assert response.status_code == 201, response.text
        return response.json()

    same = imported_into(0.2, "Same spread")
    stop_alerts = next(
        i
        for i in client.get(f"/api/v1/initiatives?team_id={same['scenario']['team_id']}").json()
        if i["title"] == "Stop alerts"
    )
    assert (stop_alerts["effort"]["low"], stop_alerts["effort"]["high"]) == (None, None)
    assert not any("spreads them" in w for w in same["warnings"])
    replanned = client.get(same["scenario"]["url"].replace("/scenarios", "/api/v1/scenarios"))
    assert replanned.json()["scenario_plan"]["value"] == original["result"]["value"]

    other = imported_into(0.0, "No spread")
    assert any(
        "spread ±20 %; No spread spreads them ±0 %" in warning for warning in other["warnings"]
    )


def test_other_teams_effort_is_named_in_the_csv_and_the_import_says_it_stays_behind(
    session: Session, workspace: Workspace, client: TestClient
) -> None:
    """The CSV had no trace of other teams' effort: an import silently dropped it."""
    quay = make_team(session, "Quay")
    shared = workspace.id_of("Stop alerts")
    edit(session, shared, other_efforts=[TeamEffortIn(team_id=quay.id or 0, likely=1.5)])
    original = save_live(client, workspace, "Shared plan")
    exported = client.get(f"/api/v1/plans/{original['id']}/export.csv").text
    rows = list(csv.DictReader(io.StringIO(exported.split("\r\n\r\n", 1)[1])))
    others = {row["title"]: row["other_teams"] for row in rows}
    assert others["Stop alerts"] == "Quay"
    assert {title for title, names in others.items() if names} == {"Stop alerts"}
    summary = client.get(f"/api/v1/plans/{original['id']}/export.md").text
    assert "| Stop alerts (also Quay) |" in summary

    body = _import_into_an_empty_team(session, client, exported)
    notes = [w for w in body["warnings"] if "also took effort" in w]
    assert notes == [
        "“Stop alerts” also took effort from Quay; only this team's effort was imported. "
        "Add the other teams' effort on its edit page."
    ]


def test_import_page_shows_the_imports_notes_before_the_scenario(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    """The API answered with the notes; the page redirected to the scenario without them."""
    update_team(session, team_id=workspace.team_id, team_in=TeamUpdate(default_spread=0.2))
    plan = save_live(form_client, workspace, "P80 plan", changes={"confidence": 0.8})
    exported = form_client.get(f"/plans/{plan['id']}/export.csv").content
    other = make_team(session, "Unspread")  # spreads single estimates 0 %
    response = form_client.post(
        f"/teams/{other.id}/plan-import",
        data={"csrf_token": form_client.csrf, "period_id": str(workspace.period_id)},  # type: ignore[attr-defined]
        files={"file": ("plan.csv", exported, "text/csv")},
        follow_redirects=False,
    )
    assert response.status_code == 200
    page = parse(response.text)
    assert "spread ±20 %; Unspread spreads them ±0 %" in page.find("ul", cls="import-notes").text()
    link = page.find("a", id="scenario-link").attrs["href"]
    assert form_client.get(link).status_code == 200


def test_the_markdown_says_which_rows_the_scenario_forced_in(
    workspace: Workspace, client: TestClient
) -> None:
    """A forced-in row read only "candidate": a reader could not tell it was forced."""
    live = client.get(
        f"/api/v1/teams/{workspace.team_id}/periods/{workspace.period_id}/plan"
    ).json()
    left_out = next(r for r in live["initiatives"] if not r["chosen"])
    plan = save_live(client, workspace, "Forced", changes={"forced_in": [left_out["id"]]})
    markdown = client.get(f"/api/v1/plans/{plan['id']}/export.md").text
    row = next(line for line in markdown.splitlines() if line.startswith(f"| {left_out['title']}"))
    assert row.endswith("| candidate, forced in |"), row


def test_an_in_plan_cell_changed_to_something_else_is_refused_not_dropped(
    app: FastAPI, session: Session, workspace: Workspace, client: TestClient
) -> None:
    """ "perhaps" was imported without a word: the import solves again and never reads it."""
    plan = save_live(client, workspace)
    exported = client.get(f"/api/v1/plans/{plan['id']}/export.csv").text
    lines = exported.splitlines()
    header = next(i for i, line in enumerate(lines) if line.startswith('"key"'))
    cells = lines[header + 1].split(",")
    column = lines[header].split(",").index('"in_plan"')
    cells[column] = '"perhaps"'
    lines[header + 1] = ",".join(cells)
    target = make_team(session, "Empty")
    before = read_snapshot(app.state.engine)
    refused = client.post(
        f"/api/v1/teams/{target.id}/plan-imports",
        json={"period_id": workspace.period_id, "csv": "\n".join(lines)},
    )
    assert refused.status_code == 422, refused.text
    assert error_text(refused) == (
        f"csv: Line {header + 2}, in_plan: must be yes, no or empty; to force a row in or "
        "out, use forced."
    )
    assert read_snapshot(app.state.engine) == before


def test_comparison_downloads_say_what_each_plan_changed(
    session: Session, workspace: Workspace, client: TestClient
) -> None:
    """Found in use: the comparison Markdown left out the page's "Changed inputs" row."""
    live = save_live(client, workspace, "As is")
    tight = save_live(client, workspace, "Tight", changes={"capacity_days": 5})
    query = f"plans={live['id']},{tight['id']}"
    page = client.get(f"/compare?{query}").text
    said = tight["result"]["changed_inputs"]
    assert said
    markdown = client.get(f"/api/v1/compare/export.md?{query}").text
    row = next(line for line in markdown.splitlines() if line.startswith("| Changed inputs |"))
    assert "none (saved from the live plan)" in row
    assert said[0].split(":")[0] in row
    table = list(csv.reader(io.StringIO(client.get(f"/api/v1/compare/export.csv?{query}").text)))
    changed = next(r for r in table if r and r[0] == "changed_inputs")
    assert changed[1] == "none (saved from the live plan)"
    assert changed[2] == "; ".join(said)
    assert changed[2] in page  # the same words as the page
