"""The capacity curve as chart geometry, and what N more or fewer days would change.

Pure: takes the selector's curve and problem, returns numbers and SVG path text for a template
to draw. The curve is a step function (the best value for a capacity holds until the next
point), so it is drawn as steps, not as a line through the points.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from functools import lru_cache

from server.planning.plans import selection_at
from server.selector import Curve, Problem, Selection

WIDTH = 640.0
HEIGHT = 260.0
LEFT, RIGHT, TOP, BOTTOM = 56.0, 16.0, 16.0, 40.0
DELTA_SHARE = 0.10  # default readout: about a tenth of the capacity


@dataclass(frozen=True)
class Tick:
    position: float  # in SVG units along its axis
    value: float
    label: str


@dataclass(frozen=True)
class Step:
    """From this capacity on (until the next step) the best reachable value is `value`."""

    capacity_days: float
    value: float


@dataclass(frozen=True)
class CurveChart:
    width: float
    height: float
    plot_left: float
    plot_right: float
    plot_top: float
    plot_bottom: float
    line_path: str
    area_path: str
    x_ticks: tuple[Tick, ...]
    y_ticks: tuple[Tick, ...]
    today_days: float
    today_value: float
    today_x: float
    today_y: float
    marks: tuple[tuple[str, float], ...]  # (label, x) of the +N / -N readout positions
    steps: tuple[Step, ...]
    today_step: int  # index of the step today's capacity falls in
    first_days: float  # below this (the pinned work) no plan fits
    last_days: float


@dataclass(frozen=True)
class Readout:
    """What a capacity of `capacity_days` (today's +/- `delta_days`) would do to the plan."""

    delta_days: float  # positive: more days; negative: fewer
    capacity_days: float
    feasible: bool
    value: float | None
    value_change: float | None
    entering: tuple[str, ...]  # titles of initiatives that would join the plan
    leaving: tuple[str, ...]  # titles that would leave it


def nice_step(span: float, target_ticks: int = 5) -> float:
    """A round tick spacing (1, 2 or 5 times a power of ten) giving about target_ticks ticks."""
    if span <= 0 or not math.isfinite(span):
        return 1.0
    raw = span / target_ticks
    power = 10 ** math.floor(math.log10(raw))
    for factor in (1, 2, 5, 10):
        if raw <= factor * power:
            return factor * power
    return 10 * power


def _ticks(low: float, high: float, scale: float, origin: float, flip: bool) -> tuple[Tick, ...]:
    step = nice_step(high - low)
    first = math.ceil(low / step - 1e-9) * step
    ticks = []
    value = first
    while value <= high + 1e-9:
        offset = (value - low) * scale
        position = origin - offset if flip else origin + offset
        ticks.append(Tick(round(position, 2), value, f"{value:g}"))
        value += step
    return tuple(ticks)


def default_delta(capacity_days: float, resolution: float) -> float:
    """About 10 % of the capacity, rounded to the resolution, at least one resolution step."""
    steps = max(1, round(capacity_days * DELTA_SHARE / resolution))
    return steps * resolution


def curve_steps(curve: Curve) -> tuple[Step, ...]:
    """The points where the best value changes (the first point always included)."""
    steps: list[Step] = []
    for days, value in zip(curve.capacity_days, curve.values, strict=True):
        if not steps or value != steps[-1].value:
            steps.append(Step(days, value))
    return tuple(steps)


def value_at(curve: Curve, capacity_days: float) -> float | None:
    """Best value for a capacity from the curve (None below its first point)."""
    best = None
    for days, value in zip(curve.capacity_days, curve.values, strict=True):
        if days <= capacity_days + 1e-9:
            best = value
        else:
            break
    return best


@lru_cache(maxsize=32)
def sampled_curve(problem: Problem, curve_to: float, samples: int = 16) -> Curve:
    """The curve at about `samples` capacities, each point exact, for plans found by methods
    that do not give the whole curve at once (the binary program). Cached: what-if toggles and
    reloads ask for the same problem again."""
    r = problem.resolution
    step = max(r, math.ceil(curve_to / samples / r) * r)
    capacities = {k * step for k in range(int(curve_to // step) + 1)} | {problem.capacity}
    days: list[float] = []
    values: list[float] = []
    for capacity in sorted(capacities):
        selection = selection_at(problem, capacity)
        if selection.feasible:
            days.append(capacity)
            values.append(selection.value)
    return Curve(capacity_days=tuple(days), values=tuple(values))


def build_chart(curve: Curve, capacity_days: float, deltas: Sequence[float] = ()) -> CurveChart:
    """Scales, step path, ticks and today's marker for a curve."""
    days = curve.capacity_days
    values = curve.values
    x_low = 0.0
    x_high = max(days[-1], capacity_days, 1e-9)
    y_high = max(max(values), 1e-9) * 1.08
    plot_w = WIDTH - LEFT - RIGHT
    plot_h = HEIGHT - TOP - BOTTOM
    x_scale = plot_w / (x_high - x_low)
    y_scale = plot_h / y_high
    base_y = TOP + plot_h

    def x_of(d: float) -> float:
        return round(LEFT + (d - x_low) * x_scale, 2)

    def y_of(v: float) -> float:
        return round(base_y - v * y_scale, 2)

    steps = curve_steps(curve)
    parts = [f"M{x_of(steps[0].capacity_days)},{y_of(steps[0].value)}"]
    for step in steps[1:]:
        parts.append(f"H{x_of(step.capacity_days)}V{y_of(step.value)}")
    parts.append(f"H{x_of(days[-1])}")
    line = "".join(parts)
    area = f"{line}V{base_y}H{x_of(steps[0].capacity_days)}Z"
    today_value = value_at(curve, capacity_days)
    marks = tuple(
        (f"{'+' if d > 0 else '−'}{abs(d):g} d", x_of(capacity_days + d))
        for d in deltas
        if x_low <= capacity_days + d <= x_high
    )
    return CurveChart(
        width=WIDTH,
        height=HEIGHT,
        plot_left=LEFT,
        plot_right=WIDTH - RIGHT,
        plot_top=TOP,
        plot_bottom=base_y,
        line_path=line,
        area_path=area,
        x_ticks=_ticks(x_low, x_high, x_scale, LEFT, flip=False),
        y_ticks=_ticks(0.0, y_high, y_scale, base_y, flip=True),
        today_days=capacity_days,
        today_value=today_value if today_value is not None else 0.0,
        today_x=x_of(capacity_days),
        today_y=y_of(today_value if today_value is not None else 0.0),
        marks=marks,
        steps=steps,
        today_step=max(0, sum(1 for s in steps if s.capacity_days <= capacity_days + 1e-9) - 1),
        first_days=days[0],
        last_days=days[-1],
    )


def readout(
    problem: Problem,
    selection: Selection,
    delta_days: float,
    titles: Mapping[str, str],
) -> Readout:
    """Re-solve at today's capacity + delta_days and say what would join or leave the plan."""
    capacity = max(0.0, problem.capacity + delta_days)
    other = selection_at(problem, capacity)
    if not other.feasible:
        return Readout(delta_days, capacity, False, None, None, (), ())
    now = set(selection.chosen)
    then = set(other.chosen)
    keys = [item.key for item in problem.items]
    return Readout(
        delta_days=delta_days,
        capacity_days=capacity,
        feasible=True,
        value=other.value,
        value_change=other.value - selection.value,
        entering=tuple(titles.get(k, k) for k in keys if k in then - now),
        leaving=tuple(titles.get(k, k) for k in keys if k in now - then),
    )
