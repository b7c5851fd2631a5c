"""The stateless selector endpoint and the live plan endpoint."""

from __future__ import annotations

import itertools
import json

import pytest
from fastapi.testclient import TestClient
from sqlmodel import Session

from server import demo


def _items(weights: list[float], values: list[float]) -> list[dict[str, object]]:
    return [
        {"key": str(i + 1), "effort": w, "value": v}
        for i, (w, v) in enumerate(zip(weights, values, strict=True))
    ]


def test_worked_example_from_the_textbook(client: TestClient) -> None:
    # Cormen, Leiserson, Rivest and Stein, Introduction to Algorithms, 3rd ed., section 16.2:
    # weights 10, 20, 30, values 60, 100, 120, capacity 50 -> 220 with items 2 and 3
    # (from memory).
    body = {"capacity": 50, "resolution": 1, "items": _items([10, 20, 30], [60, 100, 120])}
    answer = client.post("/api/v1/select", json=body).json()
    assert answer["value"] == 220
    assert answer["chosen"] == ["2", "3"]
    assert answer["effort"] == 50
    assert answer["headroom"] == 0
    assert answer["method"].startswith("dp")


def test_matches_brute_force_with_constraints(client: TestClient) -> None:
    items = [
        {"key": "a", "effort": 4, "value": 9, "either_or": "x"},
        {"key": "b", "effort": 3, "value": 7, "either_or": "x"},
        {"key": "c", "effort": 2.5, "value": 4, "needs": ["d"]},
        {"key": "d", "effort": 2, "value": 1},
        {"key": "e", "effort": 5, "value": 8, "pinned": True},
        {"key": "f", "effort": 1, "value": 9, "ruled_out": True},
        {"key": "g", "effort": 3.5, "value": 6},
    ]
    capacity = 12.5
    answer = client.post("/api/v1/select", json={"capacity": capacity, "items": items}).json()

    def allowed(chosen: set[str]) -> bool:
        by_key = {i["key"]: i for i in items}
        return (
            sum(by_key[k]["effort"] for k in chosen) <= capacity  # type: ignore[misc]
            and "e" in chosen
            and "f" not in chosen
            and not {"a", "b"} <= chosen
            and ("c" not in chosen or "d" in chosen)
        )

    keys = [i["key"] for i in items]
    best = max(
        sum(i["value"] for i in items if i["key"] in subset)  # type: ignore[misc]
        for r in range(len(keys) + 1)
        for subset in map(set, itertools.combinations(keys, r))
        if allowed(subset)
    )
    assert answer["value"] == best  # brute force over all 128 subsets
    assert allowed(set(answer["chosen"]))


def test_set_names_typed_another_way_are_one_set(client: TestClient) -> None:
    """As in the app and the CLI: "Delivery" and " delivery" are one either-or set. All three
    fit in 6 days; with one set, the best is build 9 + rest 3 = 12 (by hand)."""
    items = [
        {"key": "build", "effort": 2, "value": 9, "either_or": "Delivery"},
        {"key": "buy", "effort": 2, "value": 8, "either_or": " delivery"},
        {"key": "rest", "effort": 2, "value": 3},
    ]
    answer = client.post("/api/v1/select", json={"capacity": 6, "items": items}).json()
    assert (answer["chosen"], answer["value"]) == (["build", "rest"], 12)


def test_curve_and_explanations_on_request(client: TestClient) -> None:
    body = {
        "capacity": 10,
        "items": _items([4, 5, 6], [5, 6, 8]),
        "curve": True,
        "explain": True,
    }
    answer = client.post("/api/v1/select", json=body).json()
    assert answer["curve"]["capacity_days"][-1] == pytest.approx(12.5)
    curve = answer["curve"]
    assert curve["values"][curve["capacity_days"].index(10.0)] == answer["value"]
    assert {e["key"] for e in answer["explanations"]} == {"1", "2", "3"}
    plain = client.post("/api/v1/select", json={**body, "curve": False, "explain": False}).json()
    assert plain["curve"] is None
    assert plain["explanations"] is None


def test_pinned_overrun_is_an_answer_not_an_error(client: TestClient) -> None:
    body = {"capacity": 5, "items": [{"key": "a", "effort": 7.5, "value": 1, "pinned": True}]}
    answer = client.post("/api/v1/select", json=body).json()
    assert answer["feasible"] is False
    assert answer["excess_days"] == pytest.approx(2.5)
    assert "2.5" in answer["infeasibility"]


@pytest.mark.parametrize(
    ("body", "field"),
    [
        ({"capacity": 0, "items": []}, "capacity"),
        ({"capacity": -3, "items": []}, "capacity"),
        ({"capacity": 10, "resolution": 0, "items": []}, "resolution"),
        ({"capacity": 10, "items": [{"key": "a", "effort": -1, "value": 1}]}, "items.0.effort"),
        ({"capacity": 10, "items": [{"key": "a", "effort": 1, "value": 0}]}, "items.0.value"),
        ({"capacity": 10, "items": [{"key": "a", "effort": "x", "value": 1}]}, "items.0.effort"),
        ({"capacity": 10, "items": [{"key": "", "effort": 1, "value": 1}]}, "items.0.key"),
        ({"capacity": 10, "items": [{"effort": 1, "value": 1}]}, "items.0.key"),
        (
            {"capacity": 10, "items": [{"key": "a", "effort": 1, "value": 1, "needs": ["b"]}]},
            "items.0.needs",
        ),
        (
            {
                "capacity": 10,
                "items": [
                    {"key": "a", "effort": 1, "value": 1, "needs": ["b"]},
                    {"key": "b", "effort": 1, "value": 1, "needs": ["a"]},
                ],
            },
            "needs",
        ),
        (
            {
                "capacity": 10,
                "items": [
                    {"key": "a", "effort": 1, "value": 1, "pinned": True, "either_or": "s"},
                    {"key": "b", "effort": 1, "value": 1, "pinned": True, "either_or": "s"},
                ],
            },
            "either_or",
        ),
        ({"capacity": 10, "items": [], "colour": "red"}, "colour"),
        (
            {
                "capacity": 900_000,
                "resolution": 0.5,
                "items": [{"key": str(i), "effort": 1, "value": 1} for i in range(200)],
            },
            "capacity",
        ),
    ],
)
def test_bad_input_names_the_field(client: TestClient, body: dict, field: str) -> None:
    response = client.post("/api/v1/select", json=body)
    assert response.status_code == 422
    fields = [error["field"] for error in response.json()["detail"]]
    assert any(f == field or f.endswith("." + field) or f.startswith(field) for f in fields), fields


def test_nan_and_infinity_are_refused(client: TestClient) -> None:
    for raw in ("NaN", "Infinity", "-Infinity"):
        text = '{"capacity": 10, "items": [{"key": "a", "effort": RAW, "value": 1}]}'
        text = text.replace("RAW", raw)
        response = client.post(
            "/api/v1/select", content=text, headers={"content-type": "application/json"}
        )
        assert response.status_code == 422
        assert response.json()["detail"][0]["field"] == "items.0.effort"


def test_live_plan_endpoint(client: TestClient, session: Session) -> None:
    demo.load(session)
    answer = client.get("/api/v1/teams/1/periods/1/plan").json()
    chosen = set(answer["selection"]["chosen"])
    rows = {str(row["id"]): row for row in answer["initiatives"]}
    assert chosen <= set(rows)
    assert all(rows[key]["chosen"] for key in chosen)
    assert answer["selection"]["effort"] <= answer["capacity_days"]
    assert all(rows[k]["state"] != "ruled_out" for k in chosen)
    assert all(str(r["id"]) in chosen for r in answer["initiatives"] if r["state"] == "pinned")
    at_p80 = client.get("/api/v1/teams/1/periods/1/plan?confidence=0.8").json()
    assert at_p80["p50_value"] is not None
    json.dumps(at_p80)  # JSON-ready throughout
    assert client.get("/api/v1/teams/1/periods/1/plan?confidence=1.5").status_code == 422
    assert client.get("/api/v1/teams/99/periods/1/plan").status_code == 404


@pytest.mark.parametrize(
    "path",
    [
        "/api/v1/teams/99999999999999999999999",
        "/api/v1/initiatives/99999999999999999999999",
        "/api/v1/members/99999999999999999999999",
        "/teams/99999999999999999999999",
    ],
)
def test_ids_too_large_for_the_database_are_unknown_not_errors(
    client: TestClient, path: str
) -> None:
    response = client.get(path)
    assert response.status_code == 404
    assert "too large" in response.text


@pytest.mark.parametrize(
    ("change", "field"),
    [
        ({"capacity": True}, "capacity"),  # not read as 1 day
        ({"capacity": "10"}, "capacity"),  # a number written as text
        ({"resolution": False}, "resolution"),
        ({"curve_to": 5}, "curve_to"),  # below the capacity of 10
        ({"curve_to": 100_000, "resolution": 0.5}, "curve_to"),  # 200,001 points
    ],
)
def test_numbers_are_numbers_and_the_curve_is_bounded(
    client: TestClient, change: dict, field: str
) -> None:
    body = {"capacity": 10, "items": [{"key": "a", "effort": 2, "value": 3}]} | change
    response = client.post("/api/v1/select", json=body)
    assert response.status_code == 422, response.text
    assert field in " ".join(str(e.get("field") or e["loc"]) for e in response.json()["detail"])


def test_item_numbers_are_strict_too(client: TestClient) -> None:
    for bad in (True, "2"):
        body = {"capacity": 10, "items": [{"key": "a", "effort": bad, "value": 3}]}
        response = client.post("/api/v1/select", json=body)
        assert response.status_code == 422
        assert response.json()["detail"][0]["loc"][-1] == "effort"


def test_keys_are_trimmed_and_free_of_control_characters(client: TestClient) -> None:
    twins = [{"key": "a", "effort": 1, "value": 1}, {"key": "a ", "effort": 1, "value": 2}]
    response = client.post("/api/v1/select", json={"capacity": 5, "items": twins})
    assert response.status_code == 422
    assert "used by more than one initiative" in response.text
    for bad in ("a\x00b", "tab\there", "line\nbreak"):
        item = {"key": bad, "effort": 1, "value": 1}
        response = client.post("/api/v1/select", json={"capacity": 5, "items": [item]})
        assert response.status_code == 422, bad
    spaced = {"key": "  padded  ", "effort": 1, "value": 1}
    answer = client.post("/api/v1/select", json={"capacity": 5, "items": [spaced]}).json()
    assert answer["chosen"] == ["padded"]


def test_a_curve_asked_for_but_not_computed_says_why(client: TestClient) -> None:
    # needs together with an either-or set: solved by HiGHS, which gives no curve
    items = [
        {"key": "a", "effort": 2, "value": 5, "either_or": "s"},
        {"key": "b", "effort": 3, "value": 6, "either_or": "s"},
        {"key": "d", "effort": 1, "value": 1},
        {"key": "c", "effort": 2, "value": 4, "needs": ["a", "d"]},
    ]
    answer = client.post("/api/v1/select", json={"capacity": 6, "items": items, "curve": True})
    assert answer.status_code == 200, answer.text
    body = answer.json()
    assert body["method"] == "milp-highs"
    assert body["curve"] is None
    assert "milp-highs" in body["curve_note"]
    plain = [{"key": "a", "effort": 2, "value": 5}]
    body = client.post("/api/v1/select", json={"capacity": 6, "items": plain, "curve": True}).json()
    assert body["curve"] is not None
    assert body["curve_note"] is None
    over = [{"key": "a", "effort": 8, "value": 5, "pinned": True}]
    body = client.post("/api/v1/select", json={"capacity": 6, "items": over, "curve": True}).json()
    assert body["curve"] is None
    assert "pinned work alone" in body["curve_note"]
