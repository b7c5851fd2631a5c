"""Pasting rows from a spreadsheet: parsing, per-row errors, all-or-nothing commit."""

from __future__ import annotations

from typing import NoReturn

import pytest
from fastapi.testclient import TestClient
from sqlmodel import Session, func, select

from server.errors import ConflictError, InputError
from server.models import AuditEntry, EffortLine, Initiative
from server.planning import paste as paste_module
from server.planning.paste import commit_paste, parse_paste
from server.schemas import EffortIn, InitiativeCreate, TeamEffortIn
from server.store.initiatives import create_initiative
from tests.api.conftest import read_snapshot
from tests.factories import make_initiative, make_team
from tests.pages.html_tree import parse_html
from tests.pages.test_plan_pages import HX, build, post_form


def _count(session: Session) -> int:
    return int(session.exec(select(func.count()).select_from(Initiative)).one())


def _parse(text: str):
    return parse_paste(text, team_id=1, period_id=None)


# --- parsing -----------------------------------------------------------------------------------


def test_tab_separated_with_header_and_three_point_cells() -> None:
    text = "Title\tEffort\tValue\tState\nQuay wall\t3/5/8\t40\tpinned\nGate\t2,5\t10\truled out\n"
    result = _parse(text)
    assert result.ok
    assert result.header
    assert result.delimiter == "tab"
    quay, gate = result.rows
    assert quay.line == 2
    assert gate.line == 3
    assert quay.initiative_in is not None
    assert gate.initiative_in is not None
    effort = quay.initiative_in.effort
    assert (effort.low, effort.likely, effort.high) == (3, 5, 8)
    assert quay.initiative_in.state == "pinned"
    assert gate.initiative_in.effort.likely == 2.5  # decimal comma in tab-separated text
    assert gate.initiative_in.state == "ruled_out"


def test_a_semicolon_in_one_title_does_not_switch_every_row_to_semicolons() -> None:
    """One "Alerts; phase 2" among comma-separated rows made every row fail ("Rows have 2
    columns"); one stray "Eps;1;2" row made it the only one read."""
    result = _parse("Alpha,5,10\nAlerts; phase 2,5,10\nGamma,3,8\n")
    assert result.delimiter == "comma"
    assert result.ok
    assert [r.initiative_in.title for r in result.rows if r.initiative_in] == [
        "Alpha",
        "Alerts; phase 2",
        "Gamma",
    ]
    stray = _parse("Alpha,5,10\nEps;1;2\nGamma,3,8\n")
    assert stray.delimiter == "comma"
    assert [r.line for r in stray.rows if not r.ok] == [2]
    # Semicolon-separated text with decimal commas stays semicolon-separated.
    local = _parse("Quay wall;2,5;40\nGate;1;10\n")
    assert local.delimiter == "semicolon"
    assert [r.initiative_in.effort.likely for r in local.rows if r.initiative_in] == [2.5, 1]


def test_comma_separated_without_header_and_separate_columns() -> None:
    result = _parse("Quay wall,5,40\nGate,2,10,candidate\n")
    assert result.ok
    assert not result.header
    assert result.delimiter == "comma"
    assert [r.initiative_in.value for r in result.rows if r.initiative_in] == [40, 10]
    three = _parse("Quay wall\t3\t5\t8\t40\nGate\t\t2\t\t10\n")
    assert three.ok
    first, second = (r.initiative_in for r in three.rows)
    assert first is not None
    assert (first.effort.low, first.effort.high) == (3, 8)
    assert second is not None
    assert second.effort.low is None
    assert second.effort.likely == 2


def test_too_many_cells_name_the_columns_read() -> None:
    """Seven cells fit no layout: the block says which layouts there are, and each row names
    the columns it was read with (it said "expected at most 4" beside a hint of 5 or 6)."""
    result = _parse("Quay wall\t3\t5\t8\t40\tpinned\textra\n")
    assert not result.ok
    assert "Rows have 7 columns; paste 3 (title, effort, value)" in result.problems[0]
    assert result.rows[0].errors["row"] == (
        "has 7 cells, more than the 4 columns read (title, effort, value, state)."
    )


def test_a_number_split_at_its_comma_is_named_as_the_cause() -> None:
    """Found in use: "Acquirer failover,2,500,9" said only that 9 is not a state."""
    result = _parse("Acquirer failover,2,500,9\nQuay wall,3,40\n")
    message = result.rows[0].errors["state"]
    assert message.startswith("“9” is not a state; use candidate, pinned or ruled out.")
    assert "write 2500, or 2.5" in message
    tabbed = _parse("Acquirer failover\t2\t500\t9\n")
    assert "write 2500" not in tabbed.rows[0].errors["state"]  # no commas between its cells


def test_quoted_cells_keep_their_commas() -> None:
    result = _parse('"Quay wall, north side",5,40\n')
    assert result.ok
    assert result.rows[0].title == "Quay wall, north side"


def test_errors_name_the_line_and_the_field() -> None:
    text = "\n".join(
        [
            "Quay wall\t5\t40",  # line 1: fine
            "Gate\tabc\t10",  # line 2: effort not a number
            "Crane\t-2\t10",  # line 3: negative effort
            "Buoy\t2\t",  # line 4: value missing
            "Lock\t2\t10\tmaybe",  # line 5: unknown state
            "=SUM(A1:A3)\t2\t10",  # line 6: a formula, not a title
            "Pier\t8/3/9\t10",  # line 7: low above likely
            "quay wall\t1\t1",  # line 8: same title as line 1
        ]
    )
    result = _parse(text)
    assert not result.ok
    assert result.error_count == 7
    errors = {row.line: row.errors for row in result.rows}
    assert errors[1] == {}
    assert errors[2] == {"effort": "Enter a number of days, or low/likely/high such as 3/5/8."}
    assert "above 0" in errors[3]["effort"]
    assert errors[4] == {"value": "The value cell is empty. Enter a number."}
    assert "not a state" in errors[5]["state"]
    assert "formula" in errors[6]["title"]
    assert "low estimate is above the likely one" in errors[7]["effort"]
    assert errors[8] == {"title": "The same title as line 1."}


def test_empty_cells_are_named_as_cells_in_every_layout() -> None:
    # One effort cell, then low/likely/high cells: a blank is called empty, not "required"
    # and not "not a number".
    one_cell = {row.line: row.errors for row in _parse("Gate\t\t3\n").rows}
    assert one_cell[1] == {
        "effort": "The effort cell is empty. Enter a number of days, or low/likely/high such "
        "as 3/5/8."
    }
    three = _parse("title,low,likely,high,value\nGate,1,,3,4\nCrane,,,,4\n")
    for row in three.rows:
        assert row.errors == {"effort": "The likely cell is empty. Enter a number of days."}


def test_block_level_problems() -> None:
    assert _parse("").problems == ("There are no rows to add.",)
    too_wide = _parse("a,1,2,3,4,5,6\n")
    assert "7 columns" in too_wide.problems[0]
    header = _parse("Title,Effort,Colour\nQuay,3,red\n")
    assert any("Colour" in p for p in header.problems)
    assert any("no value column" in p for p in header.problems)
    many = _parse("\n".join(f"Row {k},1,1" for k in range(paste_module.MAX_ROWS + 1)))
    assert any("more than the" in p for p in many.problems)
    with pytest.raises(InputError):
        _parse('"unclosed,1,2\nnext,1,2')


# --- commit ----------------------------------------------------------------------------------


def test_commit_is_all_or_nothing(session: Session, monkeypatch: pytest.MonkeyPatch) -> None:
    setup = build(session)
    good = parse_paste(
        "Tide gauge\t2\t10\nBuoy\t1/2/3\t5\nLock\t4\t20\n",
        team_id=setup.team.id or 0,
        period_id=setup.period.id,
    )
    before = _count(session)
    lines_before = int(session.exec(select(func.count()).select_from(EffortLine)).one())
    real = paste_module.create_initiatives

    def stored_then_failing(session: Session, **kwargs: object) -> NoReturn:
        assert len(real(session, **kwargs)) == 3  # type: ignore[arg-type]
        # All three rows are in the open transaction when the failure comes.
        assert _count(session) == before + 3
        raise InputError("period_id: no period with id 99.", field="period_id")

    monkeypatch.setattr(paste_module, "create_initiatives", stored_then_failing)
    with pytest.raises(InputError):
        commit_paste(session, good)
    assert _count(session) == before  # the rows written before the failure were not kept
    assert int(session.exec(select(func.count()).select_from(EffortLine)).one()) == lines_before
    assert (
        session.exec(select(AuditEntry).where(AuditEntry.action == "initiative.paste")).all() == []
    )
    monkeypatch.setattr(paste_module, "create_initiatives", real)
    ids = commit_paste(session, good)
    assert len(ids) == 3
    assert _count(session) == before + 3
    grouping = session.exec(select(AuditEntry).where(AuditEntry.action == "initiative.paste")).one()
    assert grouping.after == {"initiative_ids": ids}


def test_preview_shows_errors_per_row_and_commit_refuses_bad_blocks(
    form_client: TestClient, session: Session
) -> None:
    setup = build(session)
    base = f"/teams/{setup.team.id}/plan/paste"
    text = "Title\tEffort\tValue\nTide gauge\t2\t10\nBuoy\tabc\t5\nLock\t4\t20\n"
    fields = {"text": text, "period_id": str(setup.period.id)}
    preview = post_form(form_client, f"{base}/preview", fields, **HX)
    assert preview.status_code == 422
    root = parse_html(preview.text)
    bad = root.by_id("paste-line-3")
    assert "Line 3, effort: Enter a number of days, or low/likely/high such as 3/5/8." in bad.text()
    assert "ready" in root.by_id("paste-line-2").text()
    assert "1 of 3 rows has errors" in root.by_id("paste-preview").text()
    assert root.find(id="paste-add") is None  # no add button while a row is wrong
    assert root.by_id("paste-text").text() == " ".join(text.split())  # kept to correct
    before = _count(session)
    refused = post_form(form_client, base, fields, **HX)
    assert refused.status_code == 422
    assert _count(session) == before
    assert "Line 3, effort" in refused.text


def test_titles_the_plan_already_has_are_refused_per_row(
    form_client: TestClient, session: Session
) -> None:
    setup = build(session)
    # Another team's initiative with effort for this team is on this plan, but owned elsewhere:
    # its title is still free for this team.
    other = make_team(session, "Lighthouse")
    create_initiative(
        session,
        initiative_in=InitiativeCreate(
            team_id=other.id or 0,
            period_id=setup.period.id,
            title="Beacon",
            effort=EffortIn(likely=1),
            other_efforts=[TeamEffortIn(team_id=setup.team.id or 0, likely=1)],
            value=3,
        ),
    )
    base = f"/teams/{setup.team.id}/plan/paste"
    text = "Tide gauge\t2\t10\n dark MODE \t1\t5\nBeacon\t1\t1\nAudit log\t2\t2\n"
    fields = {"text": text, "period_id": str(setup.period.id)}
    preview = post_form(form_client, f"{base}/preview", fields, **HX)
    assert preview.status_code == 422
    root = parse_html(preview.text)
    taken = "already exists in team Harbour for Sprint 1; choose another title."
    assert f"Line 2, title: “dark MODE” {taken}" in root.by_id("paste-line-2").text()
    assert f"Line 4, title: “Audit log” {taken}" in root.by_id("paste-line-4").text()
    assert "ready" in root.by_id("paste-line-1").text()
    assert "ready" in root.by_id("paste-line-3").text()
    assert "2 of 4 rows have errors" in root.by_id("paste-preview").text()
    assert root.find(id="paste-add") is None
    before = read_snapshot(form_client.app.state.engine)  # type: ignore[attr-defined]
    refused = post_form(form_client, base, fields, **HX)
    assert refused.status_code == 422
    assert "Line 2, title: “dark MODE”" in refused.text
    assert read_snapshot(form_client.app.state.engine) == before  # type: ignore[attr-defined]


def test_commit_refuses_rows_whose_titles_were_stored_since_the_preview(
    session: Session,
) -> None:
    setup = build(session)
    parsed = parse_paste(
        "Tide gauge\t2\t10\nBuoy\t1\t5\n", team_id=setup.team.id or 0, period_id=setup.period.id
    )
    assert parsed.ok
    make_initiative(session, setup.team, setup.period, "BUOY")  # someone else, meanwhile
    before = _count(session)
    with pytest.raises(ConflictError) as refused:
        commit_paste(session, parsed)
    assert refused.value.field == "title"
    assert "“Buoy” already exists in team Harbour for Sprint 1" in refused.value.message
    assert _count(session) == before


def test_preview_then_add_then_undo(form_client: TestClient, session: Session) -> None:
    setup = build(session)
    base = f"/teams/{setup.team.id}/plan/paste"
    rows = [f"Pasted {k}\t{k % 4 + 1}\t{k * 3 + 1}" for k in range(30)]
    fields = {"text": "\n".join(rows), "period_id": str(setup.period.id)}
    preview = post_form(form_client, f"{base}/preview", fields, **HX)
    assert preview.status_code == 200
    root = parse_html(preview.text)
    assert root.by_id("paste-add").text() == "Add these 30 initiatives"
    assert root.by_id("paste-add").get("formaction") == base
    assert "autofocus" in root.by_id("paste-preview").attrs
    before = _count(session)
    added = post_form(form_client, base, fields, **HX)
    assert added.status_code == 200
    assert _count(session) == before + 30
    page = parse_html(added.text)
    assert "Added 30 initiatives" in page.by_id("notice").text()
    assert "Pasted 29" in page.text()
    undone = post_form(
        form_client,
        f"/teams/{setup.team.id}/plan/undo",
        {"period_id": str(setup.period.id)},
        **HX,
    )
    assert undone.status_code == 200
    assert _count(session) == before  # one undo removes the whole paste
    assert "Removed the 30 pasted initiatives again" in undone.text


def test_plain_form_add_redirects(form_client: TestClient, session: Session) -> None:
    setup = build(session)
    fields = {"text": "Tide gauge,2,10", "period_id": str(setup.period.id)}
    response = post_form(form_client, f"/teams/{setup.team.id}/plan/paste", fields)
    assert response.status_code == 303
    assert response.headers["location"] == setup.url + "&done=pasted-1"
    assert session.exec(select(Initiative).where(Initiative.title == "Tide gauge")).one()
    shown = form_client.get(response.headers["location"]).text
    assert "Added 1 initiative from the pasted rows." in shown


def test_a_one_row_preview_offers_to_add_this_initiative(
    form_client: TestClient, session: Session
) -> None:
    setup = build(session)
    base = f"/teams/{setup.team.id}/plan/paste"
    fields = {"text": "Pasted one\t2\t5", "period_id": str(setup.period.id)}
    root = parse_html(post_form(form_client, f"{base}/preview", fields, **HX).text)
    assert root.by_id("paste-add").text() == "Add this initiative"  # not "these 1 initiatives"
    assert "1 row ready" in root.by_id("paste-preview").text()


def test_a_comma_before_three_digits_is_never_guessed() -> None:
    # In tab- or semicolon-separated text "2,5" is a decimal comma, but "2,500" is as often
    # a thousands separator: reading it as 2.5 stored a value 1,000 times too small.
    result = _parse(
        "Big value\t3\t2,500\nBig effort\t1,500\t40\nRange\t1/1,000/4\t2\nFine\t2,5\t1,25\n"
    )
    rows = {r.title: r for r in result.rows}
    assert rows["Big value"].errors == {
        "value": "“2,500” could be 2500 or 2.5: write 2500 without the comma, or 2.5 with a point."
    }
    assert set(rows["Big effort"].errors) == {"effort"}
    assert "“1,000” could be 1000 or 1: write 1000" in rows["Range"].errors["effort"]
    millions = _parse("Big\t2\t1,000,000\n").rows[0]
    assert millions.errors == {"value": "“1,000,000”: write 1000000, without the commas."}
    assert rows["Fine"].ok
    assert (rows["Fine"].read_effort, rows["Fine"].read_value) == ("2.5", "1.25")
    semicolons = _parse("Gate;1,000;4\n")
    assert set(semicolons.rows[0].errors) == {"effort"}
    quoted = _parse('Gate,"1,000",4\n')  # comma-separated: a quoted 1,000 is not a number
    assert not quoted.rows[0].ok


def test_the_preview_shows_what_a_decimal_comma_is_read_as(
    form_client: TestClient, session: Session
) -> None:
    setup = build(session)
    fields = {"text": "Gate\t2,5\t10\n", "period_id": str(setup.period.id)}
    preview = post_form(form_client, f"/teams/{setup.team.id}/plan/paste/preview", fields, **HX)
    assert preview.status_code == 200, preview.text[:300]
    line = parse_html(preview.text).by_id("paste-line-1")
    assert "2,5 = 2.5" in " ".join(line.text().split())
    assert "10 =" not in line.text()  # read as typed: nothing added
