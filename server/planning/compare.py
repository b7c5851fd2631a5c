"""Side-by-side comparison of two to four plans, and their capacity curves on one chart.

The plans are saved ones, compared on their stored snapshots only, or a team's live plan and
its scenarios solved now and not saved (Column says which). Initiatives are matched by key (the
initiative's id), so the differences are plain set arithmetic on the chosen sets: for every
pair of plans, what is in one and not the other; what every plan has; what only one has.
"""

from __future__ import annotations

import bisect
import datetime as dt
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

from pydantic import BaseModel

from server.errors import InputError
from server.models import SavedPlan
from server.planning.plans import stated_headroom
from server.planning.snapshots import PlanView, view_of
from server.schemas import MAX_ID

MIN_PLANS = 2
MAX_PLANS = 4
LABELS = "ABCD"


@dataclass(frozen=True)
class Column:
    """One plan to compare: a saved one (id), or one solved now and not saved (id None)."""

    id: int | None
    name: str
    created_at: dt.datetime  # when it was saved, or solved
    created_by: str
    inputs: Mapping[str, Any]
    result: Mapping[str, Any]
    scenario_id: int | None = None  # the scenario an unsaved column was solved from


def column_of(db_plan: SavedPlan) -> Column:
    return Column(
        id=db_plan.id or 0,
        name=db_plan.name,
        created_at=db_plan.created_at,
        created_by=db_plan.created_by,
        inputs=db_plan.inputs,
        result=db_plan.result,
    )


class ComparedPlan(BaseModel):
    id: int | None  # None: solved now, not saved
    scenario_id: int | None = None
    label: str  # A, B, C, D in the order asked for
    name: str
    team_names: str
    period_name: str
    created_at: dt.datetime
    created_by: str
    scenario_name: str | None
    changed_inputs: list[str]
    feasible: bool
    value: float
    effort: float
    capacity: float
    headroom: float
    utilisation: float | None
    confidence: float | None
    fit_probability: float | None
    fit_label: str | None
    method: str
    chosen: list[str]  # keys

    @property
    def changes_said(self) -> str:
        """What the plan changed of the live inputs, as the page and the downloads say it."""
        if self.changed_inputs:
            return "; ".join(self.changed_inputs)
        if self.scenario_name:
            return f"none (scenario “{self.scenario_name}” changed nothing)"
        return "none (the live plan)" if self.id is None else "none (saved from the live plan)"


class ComparedInitiative(BaseModel):
    key: str
    title: str
    # Per plan in order: "in", "out", or None when it was not a candidate of that plan.
    cells: list[str | None]
    # (label, title) of plans that saved it under another title than the one shown.
    saved_as: list[tuple[str, str]] = []


class PairDifference(BaseModel):
    a: str
    b: str
    only_in_a: list[str]  # keys in A's chosen set and not in B's
    only_in_b: list[str]


class CurveData(BaseModel):
    label: str
    capacity: float
    capacity_days: list[float]
    values: list[float]
    sampled: bool = False  # values exact at the listed capacities only (CurveSnapshot.sampled)


class Comparison(BaseModel):
    plan_ids: list[int]
    plans: list[ComparedPlan]
    initiatives: list[ComparedInitiative]
    titles: dict[str, str]
    pairs: list[PairDifference]
    in_all: list[str]
    in_any: list[str]
    only_in: dict[str, list[str]]  # label -> keys chosen by that plan alone
    curves: list[CurveData]


LIVE_PICK = "live"


def parse_plan_ids(raw: Sequence[str]) -> list[int | None]:
    """Read plan ids from `plans=1,2,3` (or repeated `plans=`); enforce two to four, no repeats.

    "live" (None in the list) stands for the live plan now, of the first saved plan's team and
    period: at most once, and beside at least one saved plan.
    """
    parts = [p.strip() for chunk in raw for p in chunk.split(",") if p.strip()]
    ids: list[int | None] = []
    for part in parts:
        if part.lower() == LIVE_PICK:
            ids.append(None)
            continue
        if not part.isdigit() or not 1 <= int(part) <= MAX_ID:
            shown = part if len(part) <= 40 else f"{part[:40]}…"
            raise InputError(
                f"plans: “{shown}” is neither a plan id nor “{LIVE_PICK}”.", field="plans"
            )
        ids.append(int(part))
    if len(set(ids)) != len(ids):
        raise InputError("plans: Each plan may appear only once.", field="plans")
    check_count(len(ids))
    if all(i is None for i in ids):
        raise InputError(
            f"plans: “{LIVE_PICK}” is the live plan of a saved plan's team and period: "
            "choose a saved plan as well.",
            field="plans",
        )
    return ids


def check_count(count: int, *, field: str = "plans", things: str = "plans") -> None:
    """Two to four `things`; the message says which way the choice is off."""
    if count < MIN_PLANS:
        raise InputError(
            f"{field}: Choose at least {MIN_PLANS} {things} to compare ({count} chosen).",
            field=field,
        )
    if count > MAX_PLANS:
        raise InputError(
            f"{field}: Choose at most {MAX_PLANS} {things} to compare ({count} chosen).",
            field=field,
        )


def _compared(label: str, column: Column, view: PlanView) -> ComparedPlan:
    r = view.result
    return ComparedPlan(
        id=column.id,
        scenario_id=column.scenario_id,
        label=label,
        name=column.name,
        team_names=view.team_names,
        period_name=view.inputs.period.name,
        created_at=column.created_at,
        created_by=column.created_by,
        scenario_name=r.scenario_name,
        changed_inputs=r.changed_inputs,
        feasible=r.feasible,
        value=r.value,
        effort=r.effort,
        capacity=r.capacity,
        headroom=stated_headroom(
            feasible=r.feasible, headroom=r.headroom, excess_days=r.excess_days
        ),
        utilisation=r.utilisation,
        confidence=r.confidence,
        fit_probability=r.fit.probability if r.fit is not None else None,
        fit_label=r.fit.label if r.fit is not None else None,
        method=r.method,
        chosen=list(r.chosen),
    )


def compare(db_plans: Sequence[SavedPlan]) -> Comparison:
    """Compare saved plans (two to four, in the order given)."""
    return compare_columns([column_of(p) for p in db_plans])


def compare_columns(columns: Sequence[Column]) -> Comparison:
    """Compare two to four plans, saved or not, in the order given."""
    check_count(len(columns))
    views = [view_of(c.inputs, c.result) for c in columns]
    plans = [
        _compared(LABELS[i], c, v) for i, (c, v) in enumerate(zip(columns, views, strict=True))
    ]
    # Newest title wins when an initiative was renamed between saves.
    by_age = sorted(range(len(columns)), key=lambda i: (columns[i].created_at, i))
    titles: dict[str, str] = {}
    for i in by_age:
        titles.update(views[i].titles)
    order: list[str] = []
    for view in views:
        order.extend(k for k in view.titles if k not in order)
    chosen_sets = [set(p.chosen) for p in plans]
    candidate_sets = [set(v.titles) for v in views]
    initiatives = [
        ComparedInitiative(
            key=key,
            title=titles[key],
            cells=[
                ("in" if key in chosen else "out") if key in candidates else None
                for chosen, candidates in zip(chosen_sets, candidate_sets, strict=True)
            ],
            saved_as=[
                (plan.label, view.titles[key])
                for plan, view in zip(plans, views, strict=True)
                if key in view.titles and view.titles[key] != titles[key]
            ],
        )
        for key in order
    ]
    pairs = []
    for i in range(len(plans)):
        for j in range(i + 1, len(plans)):
            pairs.append(
                PairDifference(
                    a=plans[i].label,
                    b=plans[j].label,
                    only_in_a=[k for k in order if k in chosen_sets[i] - chosen_sets[j]],
                    only_in_b=[k for k in order if k in chosen_sets[j] - chosen_sets[i]],
                )
            )
    in_all = set.intersection(*chosen_sets)
    in_any = set.union(*chosen_sets)
    only_in = {
        plans[i].label: [
            k
            for k in order
            if k in chosen_sets[i] - set().union(*(s for j, s in enumerate(chosen_sets) if j != i))
        ]
        for i in range(len(plans))
    }
    curves = [
        CurveData(
            label=p.label,
            capacity=p.capacity,
            capacity_days=list(v.result.curve.capacity_days),
            values=list(v.result.curve.values),
            sampled=v.result.curve.sampled,
        )
        for p, v in zip(plans, views, strict=True)
        if v.result.curve is not None and v.result.curve.capacity_days
    ]
    return Comparison(
        plan_ids=[p.id for p in plans if p.id is not None],
        plans=plans,
        initiatives=initiatives,
        titles=titles,
        pairs=pairs,
        in_all=[k for k in order if k in in_all],
        in_any=[k for k in order if k in in_any],
        only_in=only_in,
        curves=curves,
    )


# --- the capacity curves chart -------------------------------------------------------------


@dataclass(frozen=True)
class Tick:
    at: float  # pixels along the axis
    label: str


@dataclass(frozen=True)
class SeriesLine:
    label: str
    name: str
    css_class: str
    points: str  # SVG polyline points, a step line
    capacity: float
    value_at_capacity: float | None
    marker_x: float
    marker_y: float | None
    sampled: bool = False


@dataclass(frozen=True)
class TableRow:
    capacity: float
    values: list[float | None]  # per series; None where no plan fits (pinned work)
    # Per series: the capacity lies past the end of its curve, where nothing was computed
    # (more days could still buy more), so no value is shown.
    past_end: list[bool] = field(default_factory=list)


@dataclass(frozen=True)
class CurvesChart:
    width: int
    height: int
    left: float
    top: float
    right: float
    bottom: float
    x_ticks: list[Tick]
    y_ticks: list[Tick]
    series: list[SeriesLine]
    rows: list[TableRow]
    title: str
    description: str
    missing: list[str]  # labels of plans that have no curve

    @property
    def past_any_end(self) -> bool:
        """Whether a row of the table lies past the end of some plan's curve."""
        return any(any(row.past_end) for row in self.rows)


def nice_step(span: float, target_ticks: int = 5) -> float:
    """A round step (1, 2 or 5 times a power of ten) giving about target_ticks intervals."""
    if span <= 0:
        return 1.0
    raw = span / target_ticks
    power = 10 ** math.floor(math.log10(raw))
    for factor in (1, 2, 5, 10):
        if raw <= factor * power:
            return factor * power
    return 10 * power  # pragma: no cover - the loop always returns


def value_at(curve: CurveData, capacity: float) -> float | None:
    """Best value reachable with `capacity` days: the last curve point at or below it."""
    i = bisect.bisect_right(curve.capacity_days, capacity + 1e-9) - 1
    return curve.values[i] if i >= 0 else None


def _fmt(value: float) -> str:
    return f"{round(value, 1):g}"


def curves_chart(
    comparison_curves: Sequence[CurveData],
    names: dict[str, str],
    *,
    width: int = 720,
    height: int = 340,
) -> CurvesChart:
    """Geometry of one SVG with up to four step curves, their capacity marks and a table."""
    left, top, right, bottom = 64.0, 16.0, width - 16.0, height - 44.0
    x_max = max((c.capacity_days[-1] for c in comparison_curves), default=0.0)
    x_max = max(x_max, *(c.capacity for c in comparison_curves), 1.0) if comparison_curves else 1.0
    y_top = max((max(c.values) for c in comparison_curves if c.values), default=0.0)
    # The axes end just past the data (no empty band up to the next round number); ticks sit
    # on round steps inside them.
    y_step = nice_step(y_top or 1.0)
    y_max = (y_top or 1.0) * 1.05
    x_step = nice_step(x_max)
    x_end = x_max * 1.02

    def sx(days: float) -> float:
        return round(left + (right - left) * days / x_end, 2)

    def sy(value: float) -> float:
        return round(bottom - (bottom - top) * value / y_max, 2)

    series = []
    for index, curve in enumerate(comparison_curves):
        points: list[tuple[float, float]] = []
        previous: float | None = None
        for x, y in zip(curve.capacity_days, curve.values, strict=True):
            if previous is None:
                points.append((sx(x), sy(y)))
            elif y != previous:  # a step: run along at the old value, then up
                points.append((sx(x), sy(previous)))
                points.append((sx(x), sy(y)))
            previous = y
        end = sx(curve.capacity_days[-1])
        if points[-1][0] != end:
            points.append((end, sy(curve.values[-1])))
        at_capacity = value_at(curve, curve.capacity)
        series.append(
            SeriesLine(
                label=curve.label,
                name=names.get(curve.label, curve.label),
                css_class=f"cmp-series-{index}",
                points=" ".join(f"{x:g},{y:g}" for x, y in points),
                capacity=curve.capacity,
                value_at_capacity=at_capacity,
                marker_x=sx(curve.capacity),
                marker_y=sy(at_capacity) if at_capacity is not None else None,
                sampled=curve.sampled,
            )
        )
    x_count = math.floor(x_end / x_step + 1e-9)
    y_count = math.floor(y_max / y_step + 1e-9)
    x_ticks = [Tick(sx(k * x_step), _fmt(k * x_step)) for k in range(x_count + 1)]
    y_ticks = [Tick(sy(k * y_step), _fmt(k * y_step)) for k in range(y_count + 1)]
    grid = sorted(
        {round(k * x_step, 6) for k in range(x_count + 1)}
        | {round(c.capacity, 6) for c in comparison_curves}
        | {round(x_max, 6)}
    )
    rows = [
        TableRow(
            capacity=g,
            values=[value_at(c, g) for c in comparison_curves],
            past_end=[g > c.capacity_days[-1] + 1e-9 for c in comparison_curves],
        )
        for g in grid
    ]
    labels = [c.label for c in comparison_curves]
    missing = [label for label in names if label not in labels]
    parts = []
    for s in series:
        at = _fmt(s.value_at_capacity) if s.value_at_capacity is not None else "no plan fits"
        parts.append(f"{s.label} ({s.name}): value {at} at its capacity of {_fmt(s.capacity)} days")
    description = (
        "Best reachable value score against capacity in person-days, one step line per plan. "
        + "; ".join(parts)
        + "."
        + (f" No curve for {', '.join(missing)}." if missing else "")
    )
    return CurvesChart(
        width=width,
        height=height,
        left=left,
        top=top,
        right=right,
        bottom=bottom,
        x_ticks=x_ticks,
        y_ticks=y_ticks,
        series=series,
        rows=rows,
        title=_chart_title(series),
        description=description,
        missing=missing,
    )


def _chart_title(series: Sequence[Any]) -> str:
    """The chart's name for a screen reader: the plans by name, not only by their letters."""
    if not series:
        return "No capacity curves"
    if len(series) == 1:
        return f"Capacity curve of “{series[0].name}”"
    return "Capacity curves of " + ", ".join(f"{s.label} (“{s.name}”)" for s in series)


def single_curve_chart(view: PlanView, *, label: str, name: str) -> CurvesChart | None:
    """The chart of one stored plan (saved, scenario or published page); None without a curve."""
    curve = view.result.curve
    if curve is None or not curve.capacity_days:
        return None
    data = CurveData(
        label=label,
        capacity=view.result.capacity,
        capacity_days=curve.capacity_days,
        values=curve.values,
        sampled=curve.sampled,
    )
    return curves_chart([data], {label: name})
