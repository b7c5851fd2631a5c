"""The forward pass's lean loop (every step one member) against the textbook DP.

The lean loop packs take-bits a block of rows at a time; a tiny block makes a plan of a dozen
members span several blocks, with a short last one. The reference is the plain Python DP with
its own decision table and backtrack (the textbook recurrence), and brute force over every
subset for the best value.
"""

from __future__ import annotations

import itertools
import random

import numpy as np
import pytest

from server.selector import dp


def textbook(units: list[int], values: list[int], capacity: int) -> tuple[int, list[int]]:
    """Best value and the members taken, from a plain DP with a full decision table."""
    best = [0] * (capacity + 1)
    keep = []
    for w, v in zip(units, values, strict=True):
        taken = [False] * (capacity + 1)
        for c in range(capacity, w - 1, -1):
            if best[c - w] + v > best[c]:
                best[c] = best[c - w] + v
                taken[c] = True
        keep.append(taken)
    c = capacity
    while c > 0 and best[c - 1] == best[capacity]:
        c -= 1  # the least effort reaching the best value, as the selector's tie rule starts
    chosen = []
    for k in range(len(units) - 1, -1, -1):
        if keep[k][c]:
            chosen.append(k)
            c -= units[k]
    return best[capacity], sorted(chosen)


def brute_force(units: list[int], values: list[int], capacity: int) -> int:
    best = 0
    for mask in itertools.product((0, 1), repeat=len(units)):
        if sum(w for w, x in zip(units, mask, strict=True) if x) <= capacity:
            best = max(best, sum(v for v, x in zip(values, mask, strict=True) if x))
    return best


@pytest.mark.parametrize("block_bytes", [1, 3 * 41, 1 << 20])
@pytest.mark.parametrize("seed", range(12))
def test_lean_loop_matches_the_textbook_dp_across_blocks(
    monkeypatch: pytest.MonkeyPatch, block_bytes: int, seed: int
) -> None:
    rng = random.Random(seed)
    count = rng.randint(1, 12)
    units = [rng.randint(1, 25) for _ in range(count)]
    values = [rng.randint(1, 40) for _ in range(count)]
    capacity = 40
    monkeypatch.setattr(dp, "_BLOCK_BYTES", block_bytes)  # 1 row, 3 rows, or all in one block
    steps = dp.make_steps([[k] for k in range(count)], units, np.asarray(values, np.int32))
    result = dp.solve_steps(steps, capacity, capacity + 1, 1 << 30)
    value, chosen = textbook(units, values, capacity)
    assert int(result.row[capacity]) == value == brute_force(units, values, capacity)
    assert sorted(steps.ids[m] for m in result.taken) == chosen
    assert result.cells <= count * (capacity + 1)


def test_lean_and_general_loops_agree_cell_for_cell() -> None:
    """A one-member either-or step sends the same members down the general loop."""
    rng = random.Random(7)
    units = [rng.randint(1, 30) for _ in range(30)]
    values = [rng.randint(1, 90) for _ in range(30)]
    width = 200
    lean = dp.make_steps([[k] for k in range(30)], units, np.asarray(values, np.int32))
    # The same members, with the last step a "set" of two copies of one member: the general
    # loop runs (a set of twins can take only one, so compare the rows before it).
    general = dp.make_steps(
        [[k] for k in range(29)] + [[29, 29]], units, np.asarray(values, np.int32)
    )
    lean_reach: list[int] = []
    general_reach: list[int] = []
    lean_table = np.zeros((30, (width + 7) // 8), np.uint8)
    general_table = np.zeros((31, (width + 7) // 8), np.uint8)
    lean_row = dp.run_forward(lean, width, table=lean_table, reach_out=lean_reach).row
    general_row = dp.run_forward(general, width, table=general_table, reach_out=general_reach).row
    # Each member taken at most once either way, so the last rows agree as well.
    assert lean_row.tolist() == general_row.tolist()
    assert lean_reach == general_reach[:30]
    for r in range(29):
        for c in range(units[r], lean_reach[r] + 1):  # the bits' valid range
            assert (lean_table[r, c >> 3] >> (c & 7)) & 1 == (
                general_table[r, c >> 3] >> (c & 7)
            ) & 1
