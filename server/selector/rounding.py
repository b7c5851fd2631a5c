"""Days to whole capacity units, and value scores to exact whole numbers where they allow it."""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

# Float noise such as 1.0000000000000002 / 0.5 must not push an effort into an extra unit.
_REL_TOL = 1e-9
# Value scores with up to this many decimals are scaled to integers so the DP compares exactly.
_MAX_DECIMALS = 6
_EXACT_FLOAT_LIMIT = 2**53
_INT32_LIMIT = 2**31 - 1


def units_up(days: float, resolution: float) -> int:
    """Round days up to whole units of the resolution (an effort never shrinks)."""
    q = days / resolution
    nearest = round(q)
    if abs(q - nearest) <= _REL_TOL * max(1.0, abs(q)):
        return int(nearest)
    return math.ceil(q)


def units_down(days: float, resolution: float) -> int:
    """Round days down to whole units of the resolution (a capacity never grows)."""
    q = days / resolution
    nearest = round(q)
    if abs(q - nearest) <= _REL_TOL * max(1.0, abs(q)):
        return int(nearest)
    return math.floor(q)


def units_up_array(days: np.ndarray, resolution: float) -> tuple[np.ndarray, np.ndarray]:
    """units_up for many efforts at once (int64), and whether each was a whole number of steps.

    For efforts below 2**53 units, where float64 holds every whole number exactly (the
    validation refuses efforts far below that limit first).
    """
    q = np.asarray(days, dtype=np.float64) / resolution
    if q.size and float(q.max()) >= _EXACT_FLOAT_LIMIT:
        raise ValueError("efforts must be below 2**53 resolution steps")
    nearest = np.rint(q)
    if (q == nearest).all():  # the usual case, efforts in whole steps: a third of the work
        return nearest.astype(np.int64), np.ones(q.size, dtype=np.bool_)
    whole = np.abs(q - nearest) <= _REL_TOL * np.maximum(1.0, np.abs(q))
    return np.where(whole, nearest, np.ceil(q)).astype(np.int64), whole


@dataclass(frozen=True)
class ScaledValues:
    """Value scores as the DP holds them: values = scores * factor.

    exact: the values are whole numbers whose every sum is exact in the chosen dtype, so
    comparisons and ties in the DP are exact. int32 halves the memory traffic of the DP
    rows; whole numbers too large for it stay exact in float64 up to 2**53.
    """

    values: np.ndarray
    factor: float
    exact: bool


def scale_values(values: Sequence[float]) -> ScaledValues:
    """Scale value scores with at most six decimals to whole numbers, in the smallest dtype."""
    raw = np.asarray(values, dtype=np.float64)
    if raw.size == 0:
        return ScaledValues(np.zeros(0, dtype=np.int32), 1.0, True)
    for decimals in range(_MAX_DECIMALS + 1):
        factor = 10.0**decimals
        scaled = raw * factor
        nearest = np.rint(scaled)
        # Exactly whole (the usual case) is told in one comparison; else allow float noise.
        if (scaled == nearest).all() or np.all(
            np.abs(scaled - nearest) <= _REL_TOL * np.maximum(1.0, np.abs(scaled))
        ):
            total = float(nearest.sum())
            if total < _INT32_LIMIT:
                return ScaledValues(nearest.astype(np.int32), factor, True)
            if total < _EXACT_FLOAT_LIMIT:
                return ScaledValues(nearest, factor, True)
            break
    return ScaledValues(raw, 1.0, False)
