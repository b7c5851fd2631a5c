"""Exact binary program through scipy.optimize.milp (HiGHS) for what the DPs do not cover.

Used for a general needs graph, for needs combined with either-or sets, and for initiatives
that spend several teams' capacity. Solved twice: first for the best value, then, holding
that value, for the least effort in units (the first half of the tie rule; among plans equal
in both, HiGHS's own deterministic choice stands).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from scipy.optimize import Bounds, LinearConstraint, milp
from scipy.sparse import csr_array

_OPTIONS = {"disp": False, "presolve": True, "mip_rel_gap": 0.0}


@dataclass(frozen=True)
class BinaryProgram:
    """Maximise values @ x over binary x with the given linear restrictions.

    capacities: rows of (units per variable, capacity in units). needs: (child, parent)
    pairs meaning x[child] <= x[parent]. sets: groups of variables with sum(x) <= 1.
    integral: values are integers, so the value can be held exactly in the second solve.
    """

    values: np.ndarray
    capacities: Sequence[tuple[np.ndarray, int]]
    needs: Sequence[tuple[int, int]]
    sets: Sequence[Sequence[int]]
    integral: bool
    upper: np.ndarray | None = None  # per-variable upper bound (0 keeps a variable out)


def solve_binary_program(program: BinaryProgram) -> list[int]:
    """Return the chosen variable indices of an optimal, least-effort solution."""
    count = len(program.values)
    if count == 0:
        return []
    rows: list[np.ndarray] = []
    upper: list[float] = []
    for coefficients, capacity in program.capacities:
        rows.append(np.asarray(coefficients, dtype=np.float64))
        upper.append(float(capacity))
    data: list[float] = []
    row_index: list[int] = []
    col_index: list[int] = []
    for r, coefficients in enumerate(rows):
        nonzero = np.flatnonzero(coefficients)
        data.extend(coefficients[nonzero].tolist())
        row_index.extend([r] * len(nonzero))
        col_index.extend(nonzero.tolist())
    r = len(rows)
    for child, parent in program.needs:
        data.extend([1.0, -1.0])
        row_index.extend([r, r])
        col_index.extend([child, parent])
        upper.append(0.0)
        r += 1
    for members in program.sets:
        data.extend([1.0] * len(members))
        row_index.extend([r] * len(members))
        col_index.extend(members)
        upper.append(1.0)
        r += 1
    matrix = csr_array((data, (row_index, col_index)), shape=(r, count))
    restrictions = [LinearConstraint(matrix, -np.inf, np.asarray(upper))] if r else []
    values = np.asarray(program.values, dtype=np.float64)
    integrality = np.ones(count)
    bounds = Bounds(0, 1 if program.upper is None else program.upper)
    best = milp(
        -values, integrality=integrality, bounds=bounds, constraints=restrictions, options=_OPTIONS
    )
    if not best.success:
        raise RuntimeError(f"HiGHS did not solve the selection: {best.message}")
    best_value = float(values @ np.rint(best.x))
    slack = 0.5 if program.integral else 1e-9 * max(1.0, abs(best_value))
    effort = sum(rows) if rows else np.zeros(count)
    hold = LinearConstraint(values.reshape(1, -1), best_value - slack, np.inf)
    least = milp(
        np.asarray(effort, dtype=np.float64),
        integrality=integrality,
        bounds=bounds,
        constraints=[*restrictions, hold],
        options=_OPTIONS,
    )
    x = np.rint(least.x if least.success else best.x)
    chosen = np.flatnonzero(x > 0.5)
    if not _fits(program, x):
        raise RuntimeError("HiGHS returned a selection that breaks a restriction")
    return chosen.tolist()


def _fits(program: BinaryProgram, x: np.ndarray) -> bool:
    for coefficients, capacity in program.capacities:
        if float(np.asarray(coefficients, dtype=np.float64) @ x) > capacity:
            return False
    if any(x[child] > x[parent] for child, parent in program.needs):
        return False
    return all(x[list(members)].sum() <= 1 for members in program.sets)
