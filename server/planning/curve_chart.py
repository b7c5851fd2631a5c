"""The capacity curve as chart geometry, and what N more or fewer days would change.

Pure: takes the selector's curve and problem, returns numbers and SVG path text for a template
to draw. The curve is a step function (the best value for a capacity holds until the next
point), so it is drawn as steps, not as a line through the points.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from functools import lru_cache

from server.planning.plans import selection_at
from server.selector import Curve, Problem, Selection
from server.selector.rounding import units_down, units_up

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
    # A sample (not every breakpoint known): points solved, exact; the value between two
    # points lies in the box they span (more capacity never lowers it), drawn instead of steps.
    sampled: bool = False
    points: tuple[tuple[float, float], ...] = ()
    ranges_path: str = ""


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


# Solves the curve of a binary-program plan may take. Each finds one whole step of the curve,
# so this many cover any plan with fewer breakpoints (the demo's have up to about 40).
MAX_CURVE_SOLVES = 96
SAMPLES = 16


@dataclass(frozen=True)
class ProbedCurve:
    """A curve read by solving at chosen capacities.

    complete: every breakpoint was found, so `curve` has a point for every resolution step (as
    the DP's last row does). Otherwise `curve` holds only the capacities solved, each exact:
    between two of them the value lies between theirs, and may change more than once.
    """

    curve: Curve
    complete: bool
    solves: int


def _units_of(problem: Problem, selection: Selection) -> int:
    """The chosen work in whole resolution steps, rounded up as the selector rounds it."""
    effort = {item.key: item.effort for item in problem.items}
    return sum(units_up(effort[key], problem.resolution) for key in selection.chosen)


@lru_cache(maxsize=32)
def probed_curve(
    problem: Problem, curve_to: float, max_solves: int = MAX_CURVE_SOLVES
) -> ProbedCurve:
    """The exact curve of a plan whose method gives no whole curve at once (the binary program).

    More capacity never lowers the best value, so a plan solved at capacity c, whose chosen work
    takes u steps, is the best from u up to c: one solve finds a whole step. Walking down from
    the end of the curve, each solve at one step below the last found step either finds the
    next breakpoint or reaches the capacity where no plan fits (or 0). When a plan has more
    breakpoints than max_solves, the rest of the curve is read at evenly spaced capacities and
    the result says it is a sample. Cached: what-if toggles and reloads ask again.
    """
    r = problem.resolution
    top = units_down(curve_to, r)
    values: dict[int, float] = {}
    solves = 0
    c = top
    complete = False
    while solves < max_solves:
        if c < 0:
            complete = True
            break
        selection = selection_at(problem, c * r)
        solves += 1
        if not selection.feasible:
            complete = True  # below the pinned work: no capacity under c fits either
            break
        low = _units_of(problem, selection)
        for k in range(low, c + 1):
            values[k] = selection.value
        c = low - 1
    if complete:
        steps = sorted(values)
        return ProbedCurve(
            Curve(tuple(k * r for k in steps), tuple(values[k] for k in steps)), True, solves
        )
    # Too many breakpoints: both ends of each step found, and samples of the capacities below
    # (today's among them, so its value is read, not guessed).
    known = {k: v for k, v in values.items() if values.get(k - 1) != v or values.get(k + 1) != v}
    step = max(1, math.ceil(c / SAMPLES))
    today = units_down(problem.capacity, r)
    for k in sorted({*range(0, c + 1, step), c, *([today] if today <= c else [])}):
        selection = selection_at(problem, k * r)
        solves += 1
        if selection.feasible:
            known[k] = selection.value
    steps = sorted(known)
    return ProbedCurve(
        Curve(tuple(k * r for k in steps), tuple(known[k] for k in steps)), False, solves
    )


def build_chart(
    curve: Curve, capacity_days: float, deltas: Sequence[float] = (), *, sampled: bool = False
) -> CurveChart:
    """Scales, step path, ticks and today's marker for a curve.

    sampled: the curve holds only some capacities (ProbedCurve.complete is False), so it is
    drawn as its points and the boxes between them, and its table lists every point."""
    days = curve.capacity_days
    values = curve.values
    x_low = 0.0
    # An empty plan (every value 0) or no capacity still gets axes of plain round numbers.
    x_high = max(days[-1], capacity_days) or 1.0
    y_high = (max(values) or 1.0) * 1.08
    plot_w = WIDTH - LEFT - RIGHT
    plot_h = HEIGHT - TOP - BOTTOM
    x_scale = plot_w / (x_high - x_low)
    y_scale = plot_h / y_high
    base_y = TOP + plot_h

    def x_of(d: float) -> float:
        return round(LEFT + (d - x_low) * x_scale, 2)

    def y_of(v: float) -> float:
        return round(base_y - v * y_scale, 2)

    points: tuple[tuple[float, float], ...] = ()
    ranges = ""
    if sampled:
        steps = tuple(Step(d, v) for d, v in zip(days, values, strict=True))
        points = tuple((x_of(d), y_of(v)) for d, v in zip(days, values, strict=True))
        pairs = list(itertools.pairwise(points))
        # Equal neighbours: the value is known all the way between them (a level line).
        line = "".join(f"M{a[0]},{a[1]}H{b[0]}" for a, b in pairs if a[1] == b[1])
        ranges = "".join(f"M{a[0]},{a[1]}H{b[0]}V{b[1]}H{a[0]}Z" for a, b in pairs if a[1] != b[1])
        area = ""
    else:
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
        sampled=sampled,
        points=points,
        ranges_path=ranges,
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
