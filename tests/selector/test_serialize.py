"""The JSON form of a Selection: plain types, valid JSON, and no binary noise in the figures."""

from __future__ import annotations

import json
import math

from server.selector import Item, Problem, selection_to_dict, solve


def test_figures_carry_no_float_noise_and_stay_exact_to_six_decimals() -> None:
    """Found in use: threshold_value 23.00000000000001 and headroom 2.141999999999996."""
    items = (
        Item("a", 0.3, 10.1),
        Item("b", 0.7, 12.900001),
        Item("c", 1.1, 0.2),
        Item("d", 2.2, 7.7),
    )
    selection = solve(Problem(items=items, capacity=3.342, resolution=0.1), explain=True)
    answer = selection_to_dict(selection)
    json.dumps(answer, allow_nan=False)

    def floats(value: object) -> list[float]:
        if isinstance(value, float):
            return [value]
        if isinstance(value, dict):
            return [f for item in value.values() for f in floats(item)]
        if isinstance(value, list):
            return [f for item in value for f in floats(item)]
        return []

    for number in floats(answer):
        assert number == round(number, 9), number
    # Rounding moves nothing that matters: within 1e-9 of the selector's own figures.
    assert math.isclose(answer["value"], selection.value, abs_tol=1e-9)
    assert math.isclose(answer["headroom"], selection.headroom, abs_tol=1e-9)
    assert answer["value"] == round(sum(i.value for i in items if i.key in selection.chosen), 6)
