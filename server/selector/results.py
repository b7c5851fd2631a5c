"""Turn a solver outcome into the public Selection: totals, rounding, curve, messages."""

from __future__ import annotations

import math
import operator

from .engine import Outcome, Prepared
from .model import Curve, Explanation, Rounding, Selection
from .validation import CheckedProblem, rounded_up_keys


def build_rounding(checked: CheckedProblem) -> Rounding:
    """Report how capacity and efforts were rounded to the resolution."""
    used = checked.capacity_units * checked.resolution
    return Rounding(
        resolution=checked.resolution,
        capacity_units=checked.capacity_units,
        capacity_days_used=used,
        capacity_days_lost=max(0.0, checked.capacity - used),
        effort_units=dict(zip(checked.keys, checked.units, strict=True)),
        items_rounded_up=rounded_up_keys(checked),
    )


def format_days(days: float) -> str:
    """Days with at least one decimal and no float noise: 42.0, 7.5, 0.25."""
    text = f"{days:.6f}".rstrip("0")
    return text + "0" if text.endswith(".") else text


def _infeasibility(prepared: Prepared, outcome: Outcome) -> tuple[str, float]:
    checked = prepared.checked
    r = checked.resolution
    need_days = outcome.in_units * r
    capacity_days = checked.capacity_units * r
    excess = need_days - capacity_days
    rounded = (
        ""
        if capacity_days == checked.capacity
        else (f" ({format_days(checked.capacity)} rounded down to the resolution)")
    )
    message = (
        f"Pinned work needs {format_days(need_days)} days, {format_days(excess)} days over the "
        f"capacity of {format_days(capacity_days)} days{rounded}."
    )
    forced = outcome.decided.forced_by_needs
    if forced:
        message += (
            " That includes "
            + ", ".join(checked.keys[i] for i in forced)
            + (", needed by pinned work.")
        )
    real = math.fsum(checked.efforts[i] for i in outcome.decided.in_plan)
    if real <= checked.capacity + 1e-9:
        message += (
            f" Unrounded it is {format_days(real)} of {format_days(checked.capacity)} days: "
            f"rounding each effort up to the {format_days(r)}-day resolution makes it overrun, "
            "so a finer resolution may fit it."
        )
    elif not math.isclose(real - checked.capacity, excess, abs_tol=1e-9):
        # The headroom is in estimated days: say the overrun in those too, so the two agree.
        message += (
            f" As estimated, before rounding to the resolution, it is {format_days(real)} "
            f"days, {format_days(real - checked.capacity)} over."
        )
    return message, excess


def assemble(
    prepared: Prepared,
    outcome: Outcome,
    *,
    curve_units: int | None,
    explanations: tuple[Explanation, ...] | None,
    extra_note: str = "",
) -> Selection:
    """Turn an outcome into the public Selection."""
    checked = prepared.checked
    chosen = outcome.chosen
    effort = math.fsum(checked.effort_array[list(chosen)].tolist())
    infeasibility = None
    excess = None
    if not outcome.feasible:
        infeasibility, excess = _infeasibility(prepared, outcome)
    curve = None
    if curve_units is not None and outcome.row is not None:
        curve = _curve(prepared, outcome, curve_units)
    return Selection(
        feasible=outcome.feasible,
        chosen=_keys_of(checked, chosen),
        value=prepared.total(chosen),
        effort=effort,
        capacity=checked.capacity,
        headroom=checked.capacity - effort,
        method=outcome.method,
        method_note=outcome.note + ("; " + extra_note if extra_note else ""),
        infeasibility=infeasibility,
        excess_days=excess,
        rounding=build_rounding(checked),
        curve=curve,
        explanations=explanations,
        cells=outcome.cells,
        forced_by_needs=tuple(checked.keys[i] for i in outcome.decided.forced_by_needs),
    )


def _keys_of(checked: CheckedProblem, indices: tuple[int, ...]) -> tuple[str, ...]:
    """The keys of the given items, in that order."""
    if len(indices) < 2:
        return tuple(checked.keys[i] for i in indices)
    return operator.itemgetter(*indices)(checked.keys)


def _curve(prepared: Prepared, outcome: Outcome, curve_units: int) -> Curve:
    r = prepared.checked.resolution
    base = prepared.total(outcome.decided.in_plan)
    row = outcome.row
    assert row is not None
    points = max(0, min(curve_units - outcome.in_units + 1, len(row)))
    days = tuple((outcome.in_units + c) * r for c in range(points))
    values = tuple(base + prepared.as_value(v) for v in row[:points].tolist())
    return Curve(capacity_days=days, values=values)
