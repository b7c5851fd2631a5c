"""The forward pass works in int16 or float32 only where every cell stays exact in them.

The reference is a plain Python DP over the same members (the textbook recurrence, exact in
Python integers), compared cell by cell on both sides of the int16 limit.
"""

from __future__ import annotations

import numpy as np
import pytest

from server.selector import Item, Problem, dp, solve

INT16_MAX = 2**15 - 1
FLOAT32_EXACT = 2**24  # float32 has a 24-bit significand (IEEE 754 binary32)


def reference_row(units: list[int], values: list[int], width: int, init: list[int]) -> list[int]:
    """Best value for every capacity 0..width-1 after the members, in Python integers."""
    row = list(init)
    for w, v in zip(units, values, strict=True):
        for c in range(width - 1, w - 1, -1):
            row[c] = max(row[c], row[c - w] + v)
    return row


def _steps(units: list[int], values: list[int]) -> dp.Steps:
    return dp.make_steps(
        [[k] for k in range(len(units))], units, np.asarray(values, dtype=np.int32)
    )


def _values_summing_to(total: int, count: int) -> list[int]:
    base = [total // count] * count
    base[0] += total - sum(base)
    return base


@pytest.mark.parametrize(
    ("total", "dtype"),
    [
        (INT16_MAX, np.int16),
        (INT16_MAX + 1, np.float32),
        (FLOAT32_EXACT, np.float32),
        (FLOAT32_EXACT + 1, np.int32),  # odd: the first whole number float32 cannot hold
        (3 * FLOAT32_EXACT + 1, np.int32),
    ],
)
def test_rows_match_the_reference_on_both_sides_of_each_limit(total: int, dtype: type) -> None:
    units = [3, 5, 7, 2, 11, 4, 6, 9, 1, 8]
    values = _values_summing_to(total, len(units))
    width = sum(units) + 3  # wide enough that taking everything reaches the total
    steps = _steps(units, values)
    assert dp.row_dtype(steps.values, None) == dtype
    forward = dp.run_forward(steps, width)
    assert forward.row.dtype == np.int32  # the caller's dtype, whatever the pass used
    assert forward.row.tolist() == reference_row(units, values, width, [0] * width)
    assert int(forward.row[-1]) == total


def test_an_initial_row_counts_towards_the_limit() -> None:
    units = [1, 2, 3, 4, 5, 6, 7, 8]
    values = [400] * 8  # 3,200 in all: int16 alone, not on top of a row worth 32,000
    width = 40
    init = [min(32_000, 1_000 * c) for c in range(width)]
    steps = _steps(units, values)
    init_row = np.asarray(init, dtype=np.int32)
    assert dp.row_dtype(steps.values, init_row) == np.float32
    assert dp.row_dtype(steps.values, None) == np.int16
    forward = dp.run_forward(steps, width, init=init_row)
    assert forward.row.tolist() == reference_row(units, values, width, init)
    assert max(forward.row.tolist()) > INT16_MAX


def test_few_members_and_other_dtypes_keep_their_dtype() -> None:
    assert dp.row_dtype(np.asarray([1, 2, 3], dtype=np.int32), None) == np.int32
    assert dp.row_dtype(np.asarray([1.5] * 10), None) == np.float64
    assert dp.row_dtype(np.asarray([1] * 10, dtype=np.int64), None) == np.int64


@pytest.mark.parametrize("total", [INT16_MAX, INT16_MAX + 1, FLOAT32_EXACT, FLOAT32_EXACT + 1])
def test_plans_and_curves_at_the_limits_match_the_reference(total: int) -> None:
    # The whole selector: the plan at the capacity and the curve at every point beyond it.
    efforts = [3, 5, 7, 2, 11, 4, 6, 9, 1, 8, 5, 3]
    values = _values_summing_to(total, len(efforts))
    values[3] -= 7  # not every value the same: no shortcut for proportional values
    values[4] += 7
    items = tuple(Item(f"i{k}", e, v) for k, (e, v) in enumerate(zip(efforts, values, strict=True)))
    problem = Problem(items, 30, resolution=1)
    selection = solve(problem, curve_to=sum(efforts))
    width = sum(efforts) + 1
    reference = reference_row(efforts, values, width, [0] * width)
    assert selection.value == reference[30]
    assert selection.curve is not None
    assert [round(v) for v in selection.curve.values] == reference
