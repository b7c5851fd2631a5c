"""Plans whose values are all the same multiple of their efforts: the fullest plan is the best.

When every value is k times its effort in units (Pisinger's subset-sum family has k = 1), a
plan is worth k times the units it uses. The best plan within C units is then the fullest one,
and the DP only needs to know which unit totals the first initiatives can reach: one bit per
capacity. A Python integer serves as that bitset, so each initiative is one shift-and-or over
at most C + 1 bits, and the bitsets kept for the backtrack are the N x C-bit decision table.

The backtrack walks from the last initiative down, leaving one out whenever the total it is
at was already reachable without it. That is the row DP's tie rule (see dp): a member is taken
only when that is strictly better, which here means the total cannot be reached otherwise.
Reaching C itself ends the pass, as the DP's stop rule would.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class Fullest:
    """Members taken (step order), DP cells, steps applied."""

    taken: list[int]
    cells: int
    applied: int


def proportional(units: Sequence[int], values: np.ndarray) -> bool:
    """Whether every value is the same multiple of its units (whole-number int32 values)."""
    if len(units) == 0 or values.dtype != np.int32:
        return False
    # Most problems are not proportional, and their first few initiatives already show it.
    w0, v0 = int(units[0]), int(values[0])
    for w, v in zip(np.asarray(units[1:8]).tolist(), values[1:8].tolist(), strict=True):
        if v * w0 != w * v0:
            return False
    w = np.asarray(units, dtype=np.int64)
    v = values.astype(np.int64)
    # Cross-multiplied: int32 values times efforts below 10**7 units stay far inside int64.
    return bool(np.all(v * w[0] == w * v[0]))


def solve_fullest(units: Sequence[int], capacity: int) -> Fullest:
    """The fullest plan within capacity units, by the row DP's tie rule."""
    full = (1 << (capacity + 1)) - 1
    goal = 1 << capacity
    reach = 1  # bit c: c units can be reached exactly
    before: list[int] = []
    seen = 0
    cells = 0
    applied = len(units)
    for step, w in enumerate(units):
        before.append(reach)
        if w > capacity:
            continue
        seen += w
        cells += min(seen, capacity) - w + 1
        reach |= reach << w
        if seen >= capacity:
            reach &= full
            if reach & goal:
                applied = step + 1
                break
    taken: list[int] = []
    c = reach.bit_length() - 1  # the fullest reachable total
    for step in range(applied - 1, -1, -1):
        if not (before[step] >> c) & 1:
            taken.append(step)
            c -= units[step]
    taken.reverse()
    return Fullest(taken, cells, applied)
