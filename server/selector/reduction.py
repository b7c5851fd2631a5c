"""Exact variable fixing from an LP bound, run before the plain DP when only the plan is asked.

For any ratio r >= 0 and any plan x within capacity C,

    value(x) <= r * C + sum_j max(0, d_j) - sum_{j : x_j != [d_j > 0]} |d_j|,   d_j = v_j - r * w_j

(weak LP duality). With r the critical ratio of the greedy order and L the value of a plan
actually found greedily, every initiative whose flipped bound falls below L is decided the
same way in every optimal plan. Fixing it keeps the set of optimal plans, and with it the tie
rule, unchanged, while the DP shrinks to the undecided core.

A second exact cut: at most floor(C / w) initiatives of w units fit, so within each effort
only the floor(C / w) best by value (earlier first among equals) can be in the winning plan.
Any other one could be swapped for an unused better or equal, earlier one of the same effort,
which the tie rule prefers.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

# Room left for float error in the bound before an initiative may be fixed.
_TOLERANCE = 1e-7
_GREEDY_CHUNK = 64
_INT32_MAX = 2**31 - 1


@dataclass(frozen=True)
class Reduction:
    """Positions (into the input lists) fixed in, and those still free, input order."""

    fixed_in: np.ndarray  # int64 positions
    free: np.ndarray
    fixed: int


def reduce_by_bounds(units: Sequence[int], values: np.ndarray, capacity: int) -> Reduction:
    """Fix what the LP bound decides; the free rest goes to the DP with the capacity left."""
    count = len(units)
    w = np.asarray(units, dtype=np.float64)
    v = np.asarray(values, dtype=np.float64)
    if count == 0 or float(w.sum()) <= capacity:
        return Reduction(np.arange(count), np.arange(0), count)
    order = np.argsort(-(v / w), kind="stable")  # ties keep input order
    w_order, v_order = w[order], v[order]
    cumulative = np.cumsum(w_order)
    critical = int(np.searchsorted(cumulative, capacity, side="right"))
    ratio = float(v_order[critical] / w_order[critical])
    lower = _greedy_value(w_order, v_order, capacity, cumulative)
    d = v - ratio * w
    upper = ratio * capacity + float(np.maximum(d, 0.0).sum())
    slack = _TOLERANCE * max(1.0, abs(upper))
    # Flipping an initiative bounds the plan by upper - |d| + slack; below lower it is decided.
    # With whole-number values lower is whole, so rounding that bound down would decide the
    # same initiatives: no rounding is needed.
    decided = np.abs(d) > upper + slack - lower
    fixed_in = np.flatnonzero(decided & (d > 0))
    if float(w[fixed_in].sum()) > capacity:
        return Reduction(np.arange(0), np.arange(count), 0)
    free = np.flatnonzero(~decided)
    return Reduction(fixed_in, free, count - len(free))


def keep_by_effort(units: Sequence[int], values: np.ndarray, capacity: int) -> np.ndarray:
    """Positions to keep: per effort w, the best floor(capacity / w) (earlier first on ties)."""
    count = len(units)
    if count == 0:
        return np.zeros(0, dtype=np.int64)
    w = np.asarray(units, dtype=np.int64)
    most = int(w.max())
    if count <= capacity // max(most, 1):
        return np.arange(count)  # not even the largest effort has more than the capacity holds
    if most <= 4 * count + 1024:
        per_effort = np.bincount(w)
        if int(per_effort.max()) <= capacity // max(most, 1):
            return np.arange(count)  # no effort has more than the largest effort's room
        efforts = np.flatnonzero(per_effort)
        per_effort = per_effort[efforts]
    else:
        efforts, per_effort = np.unique(w, return_counts=True)
    if np.all(per_effort <= capacity // np.maximum(efforts, 1)):
        return np.arange(count)  # no effort has more initiatives than the capacity holds
    v = np.asarray(values)
    if v.dtype == np.int32:
        # One stable sort on (effort, -value) packed into int64 keys: cheaper than a lexsort.
        key = (w << 32) | (np.int64(_INT32_MAX) - v.astype(np.int64))
        order = np.argsort(key, kind="stable")
    else:
        order = np.lexsort((np.arange(count), -v.astype(np.float64), w))
    sorted_w = w[order]
    starts = np.flatnonzero(np.r_[True, sorted_w[1:] != sorted_w[:-1]])
    group = np.repeat(np.arange(starts.size), np.diff(np.r_[starts, count]))
    rank = np.arange(count) - starts[group]
    keep = np.zeros(count, dtype=np.bool_)
    keep[order] = rank < capacity // np.maximum(sorted_w, 1)
    return np.flatnonzero(keep)


def _greedy_value(
    w: np.ndarray, v: np.ndarray, capacity: int, cumulative: np.ndarray | None = None
) -> float:
    """Value of the plan that takes initiatives in ratio order whenever they still fit.

    cumulative, when given, is np.cumsum(w).
    """
    left = float(capacity)
    total = 0.0
    # Take the leading run that fits in one vectorised step, then finish item by item, a
    # chunk at a time: the walk usually ends within a few items, once less than a unit is left.
    if cumulative is None:
        cumulative = np.cumsum(w)
    run = int(np.searchsorted(cumulative, left, side="right"))
    if run:
        left -= float(cumulative[run - 1])
        total += float(v[:run].sum())  # error far inside the bound's tolerance
    for start in range(run, w.size, _GREEDY_CHUNK):
        stop = start + _GREEDY_CHUNK
        for weight, value in zip(w[start:stop].tolist(), v[start:stop].tolist(), strict=True):
            if weight <= left:
                left -= weight
                total += value
                if left < 1:
                    return total
    return total


@dataclass(frozen=True)
class CoreBounds:
    """What the LP bound tells the DP over the undecided core before it starts.

    low: units below which no best plan can lie (a safe, possibly low, bound). A plan of u
    units is worth at most U(u), the fractional (LP) optimum at capacity u, and a best plan is
    worth at least L, the greedy plan's value; so it needs u with U(u) >= L.

    stop: (value, units) for the DP's stop rule with whole-number values, or None. value is
    U(capacity) rounded down, above every plan's value; units is the least u with
    U(u) >= value, rounded up, below the units of every plan worth value. Float error in
    either is pushed to the safe side (a higher value, fewer units).
    """

    low: int
    stop: tuple[int, int] | None


def core_bounds(
    units: Sequence[int], values: np.ndarray, capacity: int, *, integral: bool
) -> CoreBounds:
    """The least-units bound and, for whole-number values, the stop rule, from one ratio order."""
    ratio_order = _ratio_order(units, values, capacity)
    if ratio_order is None:
        return CoreBounds(0, None)
    w, v, everything = ratio_order
    if everything:
        return CoreBounds(int(w.sum()), None)  # the only best plan takes everything
    cumulative_w = np.cumsum(w)
    cumulative_v = np.cumsum(v)
    lower = _greedy_value(w, v, capacity, cumulative_w)
    needed = _least_units_worth(cumulative_w, cumulative_v, w, v, lower * (1 - _TOLERANCE))
    low = 0 if needed is None else max(0, min(capacity, math.floor(needed) - 1))
    if not integral:
        return CoreBounds(low, None)
    critical = int(np.searchsorted(cumulative_w, capacity, side="right"))
    before_w = float(cumulative_w[critical - 1]) if critical else 0.0
    before_v = float(cumulative_v[critical - 1]) if critical else 0.0
    upper = before_v + (capacity - before_w) * float(v[critical] / w[critical])
    value = math.floor(upper + _TOLERANCE * max(1.0, upper))
    least = _least_units_worth(cumulative_w, cumulative_v, w, v, float(value))
    if least is None:
        return CoreBounds(low, None)
    return CoreBounds(low, (value, max(0, math.ceil(least - _TOLERANCE * max(1.0, least)))))


def _ratio_order(
    units: Sequence[int], values: np.ndarray, capacity: int
) -> tuple[np.ndarray, np.ndarray, bool] | None:
    """Efforts and values that fit, best value per unit first, and whether all of them fit."""
    if len(units) == 0:
        return None
    w = np.asarray(units, dtype=np.float64)
    v = np.asarray(values, dtype=np.float64)
    fitting = w <= capacity
    w, v = w[fitting], v[fitting]
    if w.size == 0:
        return None
    if float(w.sum()) <= capacity:
        return w, v, True
    order = np.argsort(-(v / w), kind="stable")  # ties keep input order
    return w[order], v[order], False


def _least_units_worth(
    cumulative_w: np.ndarray, cumulative_v: np.ndarray, w: np.ndarray, v: np.ndarray, target: float
) -> float | None:
    """Least capacity at which the fractional optimum of ratio-ordered items reaches target."""
    k = int(np.searchsorted(cumulative_v, target, side="left"))
    if k >= w.size:
        return None
    before_w = float(cumulative_w[k - 1]) if k else 0.0
    before_v = float(cumulative_v[k - 1]) if k else 0.0
    return before_w + max(0.0, target - before_v) * float(w[k] / v[k])
