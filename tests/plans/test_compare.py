"""Comparing saved plans: differences against Python set arithmetic, the 2-4 rule, the stable
URL, and the curves chart with its data table."""

from __future__ import annotations

import itertools
from html.parser import HTMLParser

import numpy as np
import pytest
from fastapi.testclient import TestClient
from sqlmodel import Session

from server.errors import InputError
from server.planning.compare import (
    CurveData,
    compare,
    curves_chart,
    nice_step,
    parse_plan_ids,
    value_at,
)
from server.store import plans as store
from tests.pages.html_tree import parse_html
from tests.pages.parsed_page import parse
from tests.plans.conftest import Workspace, counts, edit, error_fields, error_text, save_live

VARIANTS: list[dict[str, object]] = [
    {},
    {"capacity_days": 6},
    {"confidence": 0.9},
    {"capacity_days": 9, "forced_out": ["Fare capping"], "forced_in": ["Depot dashboard"]},
    {"capacity_days": 4},
]


def _save_variants(client: TestClient, ws: Workspace) -> list[dict]:
    plans = []
    for index, variant in enumerate(VARIANTS):
        changes = {
            key: [ws.id_of(t) for t in value] if key.startswith("forced") else value  # type: ignore[attr-defined]
            for key, value in variant.items()
        }
        plans.append(save_live(client, ws, f"Variant {index}", changes=changes))
    return plans


def test_differences_match_set_arithmetic_on_the_chosen_sets(
    session: Session, workspace: Workspace, client: TestClient
) -> None:
    saved = _save_variants(client, workspace)
    chosen = {p["id"]: set(p["result"]["chosen"]) for p in saved}
    assert len({frozenset(s) for s in chosen.values()}) >= 4  # the variants really differ
    for size in (2, 3, 4):
        for combo in itertools.permutations([p["id"] for p in saved], size):
            if combo[0] > combo[-1] and size == 4:
                continue  # enough orders of the four-plan cases
            comparison = compare(store.get_plans(session, plan_ids=list(combo)))
            sets = [chosen[i] for i in combo]
            labels = [p.label for p in comparison.plans]
            assert labels == list("ABCD"[:size])
            for pair in comparison.pairs:
                a, b = labels.index(pair.a), labels.index(pair.b)
                assert set(pair.only_in_a) == sets[a] - sets[b]
                assert set(pair.only_in_b) == sets[b] - sets[a]
            assert len(comparison.pairs) == size * (size - 1) // 2
            assert set(comparison.in_all) == set.intersection(*sets)
            assert set(comparison.in_any) == set.union(*sets)
            for i, label in enumerate(labels):
                others = set().union(*(s for j, s in enumerate(sets) if j != i))
                assert set(comparison.only_in[label]) == sets[i] - others
            for row in comparison.initiatives:
                for i, cell in enumerate(row.cells):
                    assert cell == ("in" if row.key in sets[i] else "out")


def test_compared_figures_and_risk_come_from_the_snapshots(
    workspace: Workspace, client: TestClient
) -> None:
    saved = _save_variants(client, workspace)
    ids = ",".join(str(p["id"]) for p in saved[:3])
    body = client.get(f"/api/v1/compare?plans={ids}").json()
    for compared, plan in zip(body["plans"], saved[:3], strict=True):
        result = plan["result"]
        assert compared["value"] == result["value"]
        assert compared["effort"] == result["effort"]
        assert compared["capacity"] == result["capacity"]
        assert compared["headroom"] == result["headroom"]
        assert compared["utilisation"] == result["utilisation"]
        assert compared["confidence"] == result["confidence"]
        fit = result["fit"]
        assert compared["fit_probability"] == (fit["probability"] if fit else None)
        assert compared["fit_label"] == (fit["label"] if fit else None)
    assert body["plans"][2]["confidence"] == 0.9
    assert body["plans"][2]["changed_inputs"] == ["Confidence level: P90 (live: likely estimates)"]


def test_compare_page_has_a_stable_url_and_shows_differences(
    workspace: Workspace, form_client: TestClient
) -> None:
    saved = _save_variants(form_client, workspace)
    a, b = saved[0]["id"], saved[1]["id"]
    ticked = form_client.get(f"/compare?plans={a}&plans={b}", follow_redirects=False)
    assert ticked.status_code == 303
    assert ticked.headers["location"] == f"/compare?plans={a},{b}"
    page = form_client.get(f"/compare?plans={a},{b}")
    assert page.status_code == 200
    assert page.content == form_client.get(f"/compare?plans={a},{b}").content
    only_a = set(saved[0]["result"]["chosen"]) - set(saved[1]["result"]["chosen"])
    titles = {i["key"]: i["title"] for i in saved[0]["inputs"]["initiatives"]}
    assert only_a
    for key in only_a:
        assert f"“{titles[key]}”" in page.text
    assert "In A, not in B" in page.text


@pytest.mark.parametrize(
    ("query", "status", "field"),
    [
        ("plans=1", 422, "plans"),
        ("plans=1,2,3,4,5", 422, "plans"),
        ("plans=1,1", 422, "plans"),
        ("plans=1,x", 422, "plans"),
        ("plans=", 422, "plans"),
        ("plans=1,999", 404, "plans"),
        ("plans=live,live", 422, "plans"),
        ("plans=1,live,LIVE", 422, "plans"),
    ],
)
def test_bad_comparisons_are_refused(
    workspace: Workspace,
    client: TestClient,
    session: Session,
    query: str,
    status: int,
    field: str,
) -> None:
    save_live(client, workspace)
    save_live(client, workspace, "Second")
    before = counts(session)
    api = client.get(f"/api/v1/compare?{query}")
    assert api.status_code == status, api.text
    assert error_fields(api) == [field]
    if status == 422:  # named where it was sent, as FastAPI names its own query errors
        assert [item["loc"] for item in api.json()["detail"]] == [["query", field]]
    if status == 404:
        assert "999" in error_text(api)
    # The page answers every refusal with the saved-plans list again (422), unknown ids too.
    page = client.get(f"/compare?{query}")
    assert page.status_code == 422
    assert "Compare ticked plans" in page.text
    assert counts(session) == before


def _checked_boxes(html: str) -> dict[str, bool]:
    """Plan id -> whether its compare box is ticked, read from the list page."""
    boxes: dict[str, bool] = {}

    class Reader(HTMLParser):
        def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
            values = dict(attrs)
            if tag == "input" and values.get("name") == "plans":
                boxes[values.get("value") or ""] = "checked" in values

    Reader().feed(html)
    return boxes


@pytest.mark.parametrize(
    ("ticked", "message"),
    [
        (["first"], "Choose at least 2 plans to compare (1 chosen)."),
        ([], "Choose at least 2 plans to compare (0 chosen)."),
        (["first", 999], "No saved plan with id 999."),
    ],
)
def test_refused_comparison_shows_the_saved_plans_again_with_the_boxes_kept(
    workspace: Workspace,
    form_client: TestClient,
    session: Session,
    ticked: list[object],
    message: str,
) -> None:
    first = save_live(form_client, workspace)["id"]
    second = save_live(form_client, workspace, "Second")["id"]
    before = counts(session)
    ids = [first if t == "first" else t for t in ticked]
    query = "&".join(f"plans={i}" for i in ids) or "plans="
    page = form_client.get(f"/compare?{query}&team_id={workspace.team_id}")
    assert page.status_code == 422
    assert f"Saved plans of {workspace.team.name}" in page.text  # the filter is kept
    assert f'<p class="field-error" id="plans-error">{message}</p>' in page.text
    assert 'aria-invalid="true" aria-describedby="plans-error"' in page.text
    assert _checked_boxes(page.text) == {str(first): first in ids, str(second): False}
    assert counts(session) == before


def test_list_form_sends_its_filter_and_a_good_choice_goes_to_the_stable_url(
    workspace: Workspace, form_client: TestClient
) -> None:
    a = save_live(form_client, workspace)["id"]
    b = save_live(form_client, workspace, "Second")["id"]
    listing = form_client.get(f"/plans?team_id={workspace.team_id}")
    assert f'<input type="hidden" name="team_id" value="{workspace.team_id}">' in listing.text
    assert _checked_boxes(listing.text) == {str(a): False, str(b): False}
    ticked = form_client.get(
        f"/compare?team_id={workspace.team_id}&plans={a}&plans={b}", follow_redirects=False
    )
    assert ticked.status_code == 303
    assert ticked.headers["location"] == f"/compare?plans={a},{b}"


def test_parse_plan_ids_accepts_commas_and_repeats() -> None:
    assert parse_plan_ids(["3,1", "2"]) == [3, 1, 2]
    assert parse_plan_ids(["3,live"]) == [3, None]
    with pytest.raises(InputError):
        parse_plan_ids(["1"])


def test_a_saved_plan_is_compared_with_the_live_plan_now(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    """Asked for in use: only saved plans could be compared, so seeing what moved since a save
    meant saving the live plan first."""
    saved = save_live(form_client, workspace, "Sprint as agreed")
    page_links = parse_html(form_client.get(f"/plans/{saved['id']}").text).find_all("a")
    assert f"/compare?plans={saved['id']},live" in [a.get("href") for a in page_links]
    target = workspace.id_of("Depot dashboard")
    edit(session, target, value=99.0)  # live data moves on: the live plan takes it now
    before = counts(session)
    api = form_client.get("/api/v1/compare", params={"plans": f"{saved['id']},live"})
    assert api.status_code == 200, api.text
    frozen, live = api.json()["plans"]
    assert (frozen["id"], live["id"]) == (saved["id"], None)
    assert frozen["chosen"] == saved["result"]["chosen"]
    fresh = form_client.get(
        f"/api/v1/teams/{workspace.team_id}/periods/{workspace.period_id}/plan"
    ).json()
    assert live["value"] == fresh["selection"]["value"]
    assert str(target) in live["chosen"]
    assert str(target) not in frozen["chosen"]
    pair = api.json()["pairs"][0]
    assert (pair["a"], pair["b"]) == ("A", "B")
    assert str(target) in pair["only_in_b"]
    assert api.json()["plan_ids"] == [saved["id"]]
    page = form_client.get(f"/compare?plans={saved['id']},live")
    assert page.status_code == 200, page.text
    assert "with the live plan now" in page.text
    for fmt in ("csv", "md", "json"):
        export = form_client.get(f"/compare/export.{fmt}?plans={saved['id']},live")
        assert export.status_code == 200, (fmt, export.text)
        assert "Live plan now" in export.text
    assert counts(session) == before  # nothing saved


def test_live_alone_or_for_a_deleted_team_is_refused(
    session: Session, workspace: Workspace, client: TestClient
) -> None:
    saved = save_live(client, workspace)
    alone = client.get("/api/v1/compare", params={"plans": "live,live"})
    assert alone.status_code == 422
    only = client.get("/api/v1/compare", params={"plans": "live"})
    assert only.status_code == 422
    deleted = client.delete(
        f"/api/v1/teams/{workspace.team_id}", params={"with_initiatives": "true"}
    )
    assert deleted.status_code == 204, deleted.text
    gone = client.get("/api/v1/compare", params={"plans": f"{saved['id']},live"})
    assert gone.status_code == 422
    assert f"no live plan of {workspace.team.name}" in error_text(gone)


class _SvgReader(HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.polylines: list[str] = []
        self.tags: list[str] = []
        self.cells: list[str] = []
        self._in_cell = False

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self.tags.append(tag)
        values = dict(attrs)
        if tag == "polyline" and "cmp-line" in (values.get("class") or ""):
            self.polylines.append(values.get("points") or "")
        self._in_cell = tag in {"td", "th"}

    def handle_data(self, data: str) -> None:
        if self._in_cell and data.strip():
            self.cells.append(data.strip())


def test_curves_chart_draws_every_curve_inside_the_plot_as_a_rising_step_line() -> None:
    a = CurveData(
        label="A", capacity=5, capacity_days=[0, 1, 2, 3, 4, 5, 6], values=[0, 0, 4, 4, 9, 9, 11]
    )
    b = CurveData(
        label="B",
        capacity=3.5,
        capacity_days=[1, 1.5, 2, 2.5, 3, 3.5, 4],
        values=[2, 2, 2, 6, 6, 6, 7],
    )
    chart = curves_chart([a, b], {"A": "Baseline", "B": "Short"})
    assert chart.missing == []
    for series, curve in zip(chart.series, (a, b), strict=True):
        points = [tuple(map(float, p.split(","))) for p in series.points.split()]
        xs, ys = zip(*points, strict=True)
        assert all(chart.left <= x <= chart.right for x in xs)
        assert all(chart.top <= y <= chart.bottom for y in ys)
        assert list(xs) == sorted(xs)
        assert list(ys) == sorted(ys, reverse=True)  # SVG y grows downwards: value never falls
        assert series.value_at_capacity == value_at(curve, curve.capacity)
    # The table holds each curve's value at each row's capacity: checked with numpy.
    for row in chart.rows:
        for value, curve in zip(row.values, (a, b), strict=True):
            i = int(np.searchsorted(np.array(curve.capacity_days), row.capacity, side="right")) - 1
            assert value == (curve.values[i] if i >= 0 else None)
    assert any(row.values[1] is None for row in chart.rows)  # B starts at 1 day (pinned work)
    # Past 4 days B's curve was not computed: those rows say so rather than repeat its last
    # value (more days could buy more). A's curve reaches 6 days, the table's end.
    assert [row.past_end for row in chart.rows if row.capacity > 4] == [[False, True]] * len(
        [row for row in chart.rows if row.capacity > 4]
    )
    assert any(row.capacity > 4 for row in chart.rows)
    assert all(row.past_end == [False, False] for row in chart.rows if row.capacity <= 4)
    assert chart.past_any_end
    assert not curves_chart([a], {"A": "Baseline"}).past_any_end
    assert "A (Baseline): value 9" in chart.description
    assert nice_step(7.3) == 2
    assert nice_step(430) == 100


def test_compare_page_svg_is_accessible(workspace: Workspace, client: TestClient) -> None:
    saved = _save_variants(client, workspace)
    ids = ",".join(str(p["id"]) for p in saved[:3])
    page = client.get(f"/compare?plans={ids}").text
    reader = _SvgReader()
    reader.feed(page)
    assert "svg" in reader.tags
    assert 'role="img"' in page
    assert "<title id=" in page
    assert "<desc id=" in page
    assert len(reader.polylines) == 3
    assert "The curves as numbers" in page
    assert str(saved[0]["result"]["value"]).removesuffix(".0") in reader.cells


def test_an_initiative_renamed_between_saves_shows_each_plans_frozen_title(
    session: Session, workspace: Workspace, form_client: TestClient
) -> None:
    first = save_live(form_client, workspace, "Before the rename")
    edit(session, workspace.id_of("Stop alerts"), title="Stop alerts (SMS)")
    second = save_live(form_client, workspace, "After the rename")
    cmp = compare([store.get_plan(session, plan_id=p["id"]) for p in (first, second)])
    row = next(i for i in cmp.initiatives if i.title == "Stop alerts (SMS)")  # the newest title
    assert row.saved_as == [("A", "Stop alerts")]
    page = form_client.get(f"/compare?plans={first['id']},{second['id']}")
    assert "Stop alerts (SMS) (saved in A as “Stop alerts”)" in parse(page.text).text()


def test_the_curve_table_shows_no_value_past_a_shorter_curve(
    workspace: Workspace, client: TestClient
) -> None:
    long = save_live(client, workspace, "Roomy", changes={"capacity_days": 40})
    short = save_live(client, workspace, "Tight", changes={"capacity_days": 4})
    page = parse_html(client.get(f"/compare?plans={long['id']},{short['id']}").text)
    end = max(short["result"]["curve"]["capacity_days"])
    rows = page.find("table", cls="cmp-data").find("tbody").find_all("tr")
    past = [row for row in rows if float(row.find("th").text().split()[0]) > end + 1e-9]
    assert past, "the table reaches past the tight plan's curve"
    for row in past:
        assert row.find_all("td")[1].text().strip() == "–"
    assert page.by_id("past-curve-note") is not None


def test_a_plan_whose_pinned_work_overruns_is_marked_in_the_comparison_and_its_downloads(
    session: Session, workspace: Workspace, client: TestClient
) -> None:
    """Value 135, headroom -34, utilisation 440 % and not a word that it cannot be done."""
    edit(session, workspace.id_of("Fare capping"), state="pinned")  # 4 days
    fits = save_live(client, workspace, "As it stands")
    overruns = save_live(client, workspace, "One day", changes={"capacity_days": 1})
    assert fits["headroom"] >= 0
    assert overruns["headroom"] < 0
    ids = f"{fits['id']},{overruns['id']}"
    root = parse_html(client.get(f"/compare?plans={ids}").text)
    row = next(tr for tr in root.find_all("tr") if "Fits the capacity" in tr.text())
    cells = [" ".join(td.text().split()) for td in row.find_all("td")]
    assert cells[0] == "yes"
    assert cells[1].startswith("no")
    assert cells[1].endswith("pinned work alone overruns")
    csv_text = client.get(f"/api/v1/compare/export.csv?plans={ids}").text
    assert '"feasible","yes","no"' in csv_text
    markdown = client.get(f"/api/v1/compare/export.md?plans={ids}").text
    assert "| Fits the capacity | yes | no: pinned work alone overruns |" in markdown
    plan_csv = client.get(f"/api/v1/plans/{overruns['id']}/export.csv").text
    assert '"feasible","no"' in plan_csv
