"""Estimate uncertainty: three-point efforts, PERT figures and the chance a chosen set fits.

An effort (person-days) is either certain (one number) or a three-point estimate
(low, likely, high). A three-point estimate is read as the PERT-beta distribution on
[low, high] with shape parameters 1 + 4 (likely - low) / (high - low) and
1 + 4 (high - likely) / (high - low) (Malcolm, Roseboom, Clark and Fazar, Operations
Research 7(5), 1959). Two spreads appear here on purpose:

- `pert_sd`, the classical (high - low) / 6 shown beside an initiative;
- `pert_beta_sd`, the exact standard deviation of that beta distribution, which is what
  the Monte Carlo draws from; it equals (high - low) / 6 * sqrt(alpha * beta / 7), so it is
  larger than the classical figure for symmetric estimates and smaller for very skewed ones.

The fit probability is P(sum of efforts <= capacity), estimated by Monte Carlo and shown
with its standard error. Draws come in fixed blocks, each from its own child of one
`numpy.random.SeedSequence`, so the figure depends only on the inputs and the seed (not on
how many threads ran), and memory stays bounded.

Two samplers draw the PERT-beta efforts. "exact" is numpy's Generator.beta. "table", the
default and several times faster, is inverse-transform sampling: a uniform is mapped
through the PERT-beta quantile function, read from tables of scipy.special.betaincinv
(see the table sampler section below). Every fraction of [low, high] it returns is within
5e-5 of the exact quantile of its uniform, checked against scipy in the tests; so means and
standard deviations are within 5e-5 (high - low) too (in fact within 2e-6 and 1e-5, also
tested), and the cdf within 2.5e-4.

Shared overrun: estimates of one team tend to slip together (same unknowns, same habits of
estimating), which independent draws cannot express. With `shared_overrun = s > 0` every
draw multiplies all its efforts (certain ones included) by one common factor F, lognormal
with mean 1 and standard deviation s: ln F ~ N(-v / 2, v) with v = ln(1 + s^2). The mean
total is unchanged; its variance becomes (1 + s^2) Var(S) + s^2 E(S)^2 for the independent
total S, so a plan with capacity above its mean effort fits less often.
"""

from __future__ import annotations

import functools
import hashlib
import math
import numbers
import os
import threading
from collections.abc import Callable, Sequence
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from typing import Literal

import numpy as np
import numpy.typing as npt
from scipy import special

__all__ = [
    "EstimateError",
    "FitEstimate",
    "SamplingMethod",
    "ThreePoint",
    "default_seed",
    "effort_quantile",
    "efforts_at_confidence",
    "fit_probability",
    "pert_beta_sd",
    "pert_beta_shapes",
    "pert_beta_variance",
    "pert_mean",
    "pert_sd",
    "sample_efforts",
    "spread_contributors",
    "table_quantiles",
    "validate_confidence",
    "validate_three_point",
]

FloatArray = npt.NDArray[np.float64]
SamplingMethod = Literal["table", "exact"]

# Draws per independently seeded block. Part of what defines a figure: changing it changes
# every seeded result, exactly like changing the seed.
BLOCK_DRAWS = 1024
MAX_DRAWS = 10_000_000
# Below this many sampled cells a thread pool costs more than it saves.
_PARALLEL_MIN_CELLS = 1 << 17
_MAX_WORKERS = 4
# Sums of certain efforts carry float rounding (0.1 + 0.2 > 0.3); a total this close to the
# capacity counts as fitting. Far below the selector's 0.5-day resolution.
_FIT_TOLERANCE = 1e-9


class EstimateError(ValueError):
    """An estimate or a risk setting is not acceptable; `field` names it, and so does the text."""

    def __init__(self, field: str, problem: str) -> None:
        super().__init__(f"{field}: {problem}")
        self.field = field
        self.problem = problem


def _days_text(value: float) -> str:
    return f"{value:g}"


def _real(field: str, value: object) -> float:
    # bool is an int subclass; a tick box is not a number of days.
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise EstimateError(field, f"must be a number, not {value!r}")
    number = float(value)
    if math.isnan(number):
        raise EstimateError(field, "must be a number, not NaN")
    if math.isinf(number):
        raise EstimateError(field, "must be a finite number")
    return number + 0.0  # turns -0.0 into 0.0 so equal estimates look equal everywhere


def _checked_days(field: str, value: object) -> float:
    days = _real(field, value)
    if days < 0:
        raise EstimateError(field, f"must not be negative (got {_days_text(days)} days)")
    return days


def _checked_spread(spread: object) -> float:
    share = _real("spread", spread)
    if not 0 <= share <= 1:
        raise EstimateError(
            "spread", f"must be a share from 0 to 1, e.g. 0.2 for +/- 20 % (got {share:g})"
        )
    return share


@dataclass(frozen=True)
class ThreePoint:
    """An effort in person-days: low <= likely <= high, likely > 0.

    low == likely == high is a certain (single) estimate. Equal bounds around a different
    likely value cannot occur: the ordering rules it out.
    """

    low: float
    likely: float
    high: float

    def __post_init__(self) -> None:
        for field in ("low", "likely", "high"):
            object.__setattr__(self, field, _checked_days(field, getattr(self, field)))
        if self.likely == 0:
            raise EstimateError("likely", "must be more than zero days")
        if self.low > self.likely:
            raise EstimateError(
                "low",
                f"must not be more than likely ({_days_text(self.low)} > "
                f"{_days_text(self.likely)} days)",
            )
        if self.likely > self.high:
            raise EstimateError(
                "high",
                f"must not be less than likely ({_days_text(self.high)} < "
                f"{_days_text(self.likely)} days)",
            )

    @classmethod
    def from_single(cls, effort: float, spread: float = 0.0) -> ThreePoint:
        """Build a certain estimate, or effort +/- spread (0.2 means +/- 20 %)."""
        days = _checked_days("effort", effort)
        if days == 0:
            raise EstimateError("effort", "must be more than zero days")
        share = _checked_spread(spread)
        if share == 0:
            return cls(days, days, days)
        return cls(days * (1 - share), days, days * (1 + share))

    @property
    def is_certain(self) -> bool:
        return self.low == self.high


def _parse_days(field: str, raw: object) -> float | None:
    """Read a raw form or file value; None or blank means not given."""
    if raw is None:
        return None
    if isinstance(raw, str):
        text = raw.strip()
        if not text:
            return None
        try:
            raw = float(text)
        except ValueError:
            raise EstimateError(field, f"must be a number of days, not {text!r}") from None
    return _checked_days(field, raw)


def validate_three_point(
    low: object, likely: object, high: object, *, default_spread: float = 0.0
) -> ThreePoint:
    """Turn raw user values into an estimate; blank low and high mean a single estimate.

    A single estimate gets the team's `default_spread` (0 keeps it certain).
    """
    low_days = _parse_days("low", low)
    likely_days = _parse_days("likely", likely)
    high_days = _parse_days("high", high)
    if likely_days is None:
        raise EstimateError("likely", "is required")
    if low_days is None and high_days is None:
        if likely_days == 0:
            raise EstimateError("likely", "must be more than zero days")
        share = _checked_spread(default_spread)
        return ThreePoint.from_single(likely_days, share)
    if low_days is None:
        raise EstimateError("low", "give both low and high, or leave both empty")
    if high_days is None:
        raise EstimateError("high", "give both low and high, or leave both empty")
    return ThreePoint(low_days, likely_days, high_days)


def validate_confidence(raw: object) -> float:
    """Read a confidence level: 0.8, "0.8", "P80", "80 %" or "80"; strictly between 0 and 1.

    Text as typed into a form may also be a bare percentage: "80" is P80, as on the plan
    page's custom level (a number of 1 or more cannot be a share). Numbers stay shares.
    """
    value: object = raw
    if isinstance(raw, str):
        text = raw.strip().upper().replace(" ", "")
        percent = text.startswith("P") or text.endswith("%")
        number = text.removeprefix("P").removesuffix("%")
        try:
            parsed = float(number)
        except ValueError:
            raise EstimateError(
                "confidence", f"must be a level such as P80, 80 % or 0.8, not “{raw.strip()}”"
            ) from None
        if percent or parsed >= 1:
            if not 0 < parsed < 100:
                raise EstimateError(
                    "confidence", f"must be a level from P1 to P99, e.g. P80 (got {raw.strip()})"
                )
            parsed /= 100
        value = parsed
    return _checked_confidence(value)


def _checked_confidence(q: object) -> float:
    level = _real("confidence", q)
    if not 0 < level < 1:
        raise EstimateError(
            "confidence",
            f"must be a level above 0 and below 1 (P1 to P99), e.g. 0.8 for P80; got {level:g}",
        )
    return level


def pert_mean(e: ThreePoint) -> float:
    """PERT mean (low + 4 likely + high) / 6."""
    if e.is_certain:
        return e.likely  # the formula would add rounding to an exact value
    return (e.low + 4 * e.likely + e.high) / 6


def pert_sd(e: ThreePoint) -> float:
    """Classical PERT standard deviation (high - low) / 6, the figure shown to people."""
    return (e.high - e.low) / 6


def pert_beta_shapes(e: ThreePoint) -> tuple[float, float]:
    """Shape parameters (alpha, beta) of the PERT-beta distribution on [low, high]."""
    if e.is_certain:
        raise ValueError("a certain estimate has no beta distribution")
    width = e.high - e.low
    return 1 + 4 * (e.likely - e.low) / width, 1 + 4 * (e.high - e.likely) / width


def pert_beta_variance(e: ThreePoint) -> float:
    """Variance of the PERT-beta distribution the sampler draws from (0 when certain)."""
    if e.is_certain:
        return 0.0
    alpha, beta = pert_beta_shapes(e)
    total = alpha + beta
    return alpha * beta * (e.high - e.low) ** 2 / (total * total * (total + 1))


def pert_beta_sd(e: ThreePoint) -> float:
    """Standard deviation of the PERT-beta distribution the sampler draws from."""
    return math.sqrt(pert_beta_variance(e))


def effort_quantile(e: ThreePoint, q: float) -> float:
    """Effort at confidence level q: the PERT-beta quantile; a certain effort is itself."""
    level = _checked_confidence(q)
    if e.is_certain:
        return e.likely
    alpha, beta = pert_beta_shapes(e)
    fraction = float(special.betaincinv(alpha, beta, level))
    return min(e.high, max(e.low, e.low + (e.high - e.low) * fraction))


@dataclass(frozen=True)
class _Columns:
    """Estimates as arrays, split into certain and uncertain ones."""

    certain_index: npt.NDArray[np.intp]
    certain_values: FloatArray
    uncertain_index: npt.NDArray[np.intp]
    lows: FloatArray
    highs: FloatArray
    widths: FloatArray
    alphas: FloatArray
    betas: FloatArray


def _checked_estimates(estimates: Sequence[ThreePoint]) -> list[ThreePoint]:
    checked = list(estimates)
    for position, estimate in enumerate(checked):
        if not isinstance(estimate, ThreePoint):
            raise TypeError(f"estimate {position} is {type(estimate).__name__}, not ThreePoint")
    return checked


def _columns(estimates: Sequence[ThreePoint]) -> _Columns:
    estimates = _checked_estimates(estimates)
    rows = [(e.low, e.likely, e.high) for e in estimates]
    table = np.array(rows, dtype=np.float64).reshape(-1, 3)
    low, likely, high = table[:, 0], table[:, 1], table[:, 2]
    certain = low == high
    uncertain_index = np.flatnonzero(~certain)
    lows = low[uncertain_index]
    widths = high[uncertain_index] - lows
    return _Columns(
        certain_index=np.flatnonzero(certain),
        certain_values=likely[certain],
        uncertain_index=uncertain_index,
        lows=lows,
        highs=high[uncertain_index],
        widths=widths,
        alphas=1 + 4 * (likely[uncertain_index] - lows) / widths,
        betas=1 + 4 * (high[uncertain_index] - likely[uncertain_index]) / widths,
    )


def efforts_at_confidence(estimates: Sequence[ThreePoint], q: float) -> FloatArray:
    """Each effort at confidence level q (what the selector plans with at P80, P90, ...)."""
    level = _checked_confidence(q)
    columns = _columns(estimates)
    out = np.empty(len(estimates), dtype=np.float64)
    out[columns.certain_index] = columns.certain_values
    fractions = special.betaincinv(columns.alphas, columns.betas, level)
    # (high - low) + low can miss high by a rounding step; a quantile never exceeds high.
    out[columns.uncertain_index] = np.minimum(
        columns.lows + columns.widths * fractions, columns.highs
    )
    return out


def _checked_draws(draws: object) -> int:
    if isinstance(draws, bool) or not isinstance(draws, numbers.Integral):
        raise EstimateError("draws", f"must be a whole number, not {draws!r}")
    if not 1 <= int(draws) <= MAX_DRAWS:
        raise EstimateError("draws", f"must be from 1 to {MAX_DRAWS:,} (got {int(draws)})")
    return int(draws)


def _checked_seed(seed: object) -> int:
    if isinstance(seed, bool) or not isinstance(seed, numbers.Integral) or int(seed) < 0:
        raise EstimateError("seed", f"must be a non-negative whole number, not {seed!r}")
    return int(seed)


def _checked_overrun(shared_overrun: object) -> float:
    share = _real("shared_overrun", shared_overrun)
    if not 0 <= share <= 1:
        raise EstimateError(
            "shared_overrun", f"must be a standard deviation from 0 to 1 (got {share:g})"
        )
    return share


def _checked_capacity(capacity: object) -> float:
    days = _real("capacity", capacity)
    if days < 0:
        raise EstimateError("capacity", f"must not be negative (got {_days_text(days)} days)")
    return days


def _checked_workers(workers: object) -> int | None:
    if workers is None:
        return None
    if isinstance(workers, bool) or not isinstance(workers, numbers.Integral) or workers < 1:
        raise EstimateError("workers", f"must be a whole number of at least 1, not {workers!r}")
    return int(workers)


def _checked_method(method: object) -> SamplingMethod:
    if method == "table":
        return "table"
    if method == "exact":
        return "exact"
    raise EstimateError("method", f'must be "table" or "exact", not {method!r}')


def _overrun_factors(
    sequence: np.random.SeedSequence, draws: int, shared_overrun: float
) -> FloatArray:
    """One lognormal factor per draw with mean 1 and standard deviation shared_overrun."""
    log_variance = math.log1p(shared_overrun**2)
    normals = np.random.default_rng(sequence).standard_normal(draws)
    return np.exp(math.sqrt(log_variance) * normals - log_variance / 2)


# --- table sampler ---------------------------------------------------------------------------
#
# A PERT-beta on [0, 1] is Beta(alpha, 6 - alpha) with alpha in [1, 5], so one table over
# alpha serves every estimate. The sampler draws a uniform u and returns the quantile
# Q(alpha, u), read from knots of scipy.special.betaincinv, linear between knots:
# - body, u in [2^-6, 1 - 2^-6): 1,024 equal-probability cells, so a float32 uniform's cell
#   is u * 1024 and costs no search;
# - ends, u within 2^-6 of 0 or 1 (power-law tails, where equal cells are far too coarse):
#   the distance v from the end is drawn again with 53 bits, and the table has 16 knots per
#   halving of v down to 2^-20, the knot read from the bits of the float v; below 2^-20
#   (about six values in a 3-million-value run) betaincinv itself is called. The upper end
#   uses Q(alpha, 1 - v) = 1 - Q(6 - alpha, v).
# Knots exist at alpha = 0.875, 1, ..., 5.125; a plan's shapes get 4-point Lagrange weights
# once per call. The error bound, checked against scipy in the tests, is in
# docs/benchmarks.md. Nothing here calls BLAS: its own threads fight the block threads.

_ALPHA_STEP = 0.125
_ALPHA_NODES = 0.875 + _ALPHA_STEP * np.arange(35)
_BODY_CELLS_LOG2 = 10
_BODY_CELLS = 1 << _BODY_CELLS_LOG2
_ROW_LENGTH = 2 * _BODY_CELLS  # a body table row: the cell starts, then their rises
_END_CELLS = 16
_END_SHARE = _END_CELLS / _BODY_CELLS  # 2**-6 exactly: each end region's probability
_KNOTS_PER_OCTAVE_LOG2 = 4
_DEEPEST_OCTAVE = -20  # nearer the end than 2**-20, betaincinv is called directly
_DEEP = 2.0**_DEEPEST_OCTAVE
# The knots run one octave past 2**-6, so a distance of exactly 2**-6 is covered too.
_TOP_OCTAVE = -6
# A positive float64's bits read as an integer grow with the float; the exponent and the
# top mantissa bits name the octave and the knot within it.
_END_SHIFT = 52 - _KNOTS_PER_OCTAVE_LOG2
_END_MASK = (1 << _END_SHIFT) - 1
_END_KNOT_BASE = (1023 + _DEEPEST_OCTAVE) << _KNOTS_PER_OCTAVE_LOG2
# Uniforms are drawn and mapped this many at a time, so the working arrays stay in cache.
# Results do not depend on it.
_CHUNK_CELLS = 1 << 17


def _end_knots() -> FloatArray:
    """Distances from the end at which the end table holds the quantile: 2^-20 to 2^-5."""
    per_octave = 1 << _KNOTS_PER_OCTAVE_LOG2
    octaves = np.arange(_DEEPEST_OCTAVE, _TOP_OCTAVE + 1)
    inner = np.ldexp(1 + np.arange(per_octave) / per_octave, octaves[:, np.newaxis])
    return np.append(inner.ravel(), 2.0 ** (_TOP_OCTAVE + 1))


@dataclass(frozen=True)
class _QuantileGrid:
    """Q(alpha, .) = betaincinv(alpha, 6 - alpha, .) at every alpha node, float32."""

    body: npt.NDArray[np.float32]  # (nodes, 1024): at u = j / 1024
    ends: npt.NDArray[np.float32]  # (nodes, knots): at distance v = _end_knots() from 0


@functools.cache
def _quantile_grid() -> _QuantileGrid:
    """Built on first use, once per process: 44,000 betaincinv values."""
    alphas = _ALPHA_NODES[:, np.newaxis]
    levels = np.arange(_BODY_CELLS) / _BODY_CELLS
    body = special.betaincinv(alphas, 6 - alphas, levels)
    ends = special.betaincinv(alphas, 6 - alphas, _end_knots())
    return _QuantileGrid(body=body.astype(np.float32), ends=ends.astype(np.float32))


def _interpolated_rows(
    node_rows: npt.NDArray[np.float32], alphas: FloatArray, out: npt.NDArray[np.float32]
) -> None:
    """Rows of a node table at other alphas, by cubic Lagrange through four nodes, into out."""
    position = (alphas - _ALPHA_NODES[0]) / _ALPHA_STEP
    second = np.clip(np.floor(position).astype(np.intp), 1, _ALPHA_NODES.size - 3)
    t = (position - second)[:, np.newaxis]  # in [0, 1]: offset from the second node
    weights = [
        -t * (t - 1) * (t - 2) / 6,
        (t + 1) * (t - 1) * (t - 2) / 2,
        -(t + 1) * t * (t - 2) / 2,
        (t + 1) * t * (t - 1) / 6,
    ]
    term = np.empty_like(out)
    for node in range(4):
        # mode="clip" skips a buffered bounds check; the rows are in range.
        np.take(node_rows, second - 1 + node, axis=0, out=term, mode="clip")
        term *= weights[node].astype(np.float32)
        if node == 0:
            out[...] = term
        else:
            out += term


@dataclass(frozen=True)
class _PlanTable:
    """Quantile tables for the distinct shapes of one plan, float32 (small enough for cache).

    Body row c holds shape c's 1,024 cell starts, then their rises. End cells have NaN as
    their rise, so a uniform that lands there comes out NaN and is redrawn at the end
    resolution. End rows 2c and 2c + 1 hold the lower and the upper end of shape c (the
    upper one as 1 - Q(6 - alpha, v)), knots then rises, in the same way.
    """

    body: npt.NDArray[np.float32]  # (shapes, 2048)
    offsets: npt.NDArray[np.int32]  # per plan column: its shape's body row, times 2048
    ends: npt.NDArray[np.float32]  # (2 * shapes, 2 * knots)
    end_alphas: FloatArray  # per end row: alpha, then 6 - alpha, for betaincinv itself


def _plan_table(alphas: FloatArray) -> _PlanTable:
    grid = _quantile_grid()
    distinct, inverse = np.unique(alphas, return_inverse=True)
    if distinct.size and not (distinct[0] >= 1 and distinct[-1] <= 5):
        raise ValueError("PERT-beta shapes lie in [1, 5]")
    if distinct.size * _ROW_LENGTH >= 2**31:
        raise ValueError("too many distinct estimates for the table sampler")
    body = np.empty((distinct.size, _ROW_LENGTH), dtype=np.float32)
    starts, rises = body[:, :_BODY_CELLS], body[:, _BODY_CELLS:]
    _interpolated_rows(grid.body, distinct, starts)
    # The last cell is an end cell, so no knot past u = 1023/1024 is needed.
    np.subtract(starts[:, 1:], starts[:, :-1], out=rises[:, :-1])
    rises[:, :_END_CELLS] = np.nan
    rises[:, -_END_CELLS:] = np.nan
    end_alphas = np.stack([distinct, 6 - distinct], axis=1).ravel()
    count = grid.ends.shape[1]
    ends = np.empty((end_alphas.size, 2 * count), dtype=np.float32)
    knots, knot_rises = ends[:, :count], ends[:, count:]
    _interpolated_rows(grid.ends, end_alphas, knots)
    np.clip(knots, 0, 1, out=knots)
    np.subtract(1, knots[1::2], out=knots[1::2])
    np.subtract(knots[:, 1:], knots[:, :-1], out=knot_rises[:, :-1])
    knot_rises[:, -1] = 0  # past the last knot (never reached)
    return _PlanTable(
        body=body,
        offsets=(inverse.ravel() * _ROW_LENGTH).astype(np.int32),
        ends=ends,
        end_alphas=end_alphas,
    )


def _body_fractions(
    table: _PlanTable,
    columns: slice,
    uniforms: npt.NDArray[np.float32],
    cells: npt.NDArray[np.int32],
    out: npt.NDArray[np.float32],
    scratch: npt.NDArray[np.float32],
) -> npt.NDArray[np.intp]:
    """Map float32 uniforms to fractions in `out`; return the flat end positions.

    Arrays are (plan columns, draws): each row reads one shape's 8 KiB of table, which stays
    in the fastest cache. `uniforms` is overwritten; `cells` keeps each value's cell.
    """
    uniforms *= _BODY_CELLS  # exact: a power of two
    np.floor(uniforms, out=scratch)
    np.copyto(cells, scratch, casting="unsafe")
    uniforms -= scratch  # position inside the cell, exact
    cells += table.offsets[columns, np.newaxis]
    flat = table.body.reshape(-1)
    # mode="clip" only skips numpy's buffered bounds check; every cell is in range.
    np.take(flat, cells, out=out, mode="clip")
    np.take(flat[_BODY_CELLS:], cells, out=scratch, mode="clip")
    scratch *= uniforms
    out += scratch
    return np.flatnonzero(np.isnan(out))


def _end_fractions(
    table: _PlanTable, cells: npt.NDArray[np.int32], distances: FloatArray
) -> FloatArray:
    """Fractions for values that landed in end cells, at float64 distances v from the end."""
    # cells = shape * 2048 + j with j < 1024, and j >= 512 at the upper end, so
    # cells >> 9 = 4 shape + side and cells >> 10 = 2 shape: their difference is the end row.
    row = (cells >> (_BODY_CELLS_LOG2 - 1)) - (cells >> _BODY_CELLS_LOG2)
    bits = distances.view(np.int64)
    knot = np.maximum((bits >> _END_SHIFT) - _END_KNOT_BASE, 0)
    within = (bits & _END_MASK) * 2.0**-_END_SHIFT
    row_length = table.ends.shape[1]
    at = row * row_length + knot
    flat = table.ends.reshape(-1)
    fractions = np.take(flat, at) + within * np.take(flat[row_length // 2 :], at)
    deep = np.flatnonzero(distances < _DEEP)
    if deep.size:
        shapes = table.end_alphas[row[deep]]
        quantiles = special.betaincinv(shapes, 6 - shapes, distances[deep])
        fractions[deep] = np.where(row[deep] & 1, 1 - quantiles, quantiles)
    return fractions


@dataclass(frozen=True)
class _ChunkArrays:
    """Flat working arrays for one thread's chunks, reused from block to block."""

    uniforms: npt.NDArray[np.float32]
    cells: npt.NDArray[np.int32]
    fractions: npt.NDArray[np.float32]
    scratch: npt.NDArray[np.float32]

    @classmethod
    def for_columns(cls, n: int) -> _ChunkArrays:
        # At least one whole column of a block; no more than a whole block.
        size = min(max(_CHUNK_CELLS, BLOCK_DRAWS), n * BLOCK_DRAWS)
        return cls(
            uniforms=np.empty(size, dtype=np.float32),
            cells=np.empty(size, dtype=np.int32),
            fractions=np.empty(size, dtype=np.float32),
            scratch=np.empty(size, dtype=np.float32),
        )

    def views(self, shape: tuple[int, int]) -> tuple[npt.NDArray[np.float32], ...]:
        cells = shape[0] * shape[1]
        return tuple(
            a[:cells].reshape(shape) for a in (self.uniforms, self.fractions, self.scratch)
        )


def _draw_table_block(
    table: _PlanTable,
    sequence: np.random.SeedSequence,
    rows: slice,
    arrays: _ChunkArrays,
    consume: Callable[[slice, slice, npt.NDArray[np.floating]], None],
) -> None:
    """One block by the table sampler, a few plan columns at a time.

    The block's uniforms are drawn column by column (all its draws of column 0, then of
    column 1, ...), its end distances in the same order, each from a generator of its own;
    so the chunk size does not change a single value.
    """
    body_sequence, end_sequence = sequence.spawn(2)
    body_generator = np.random.default_rng(body_sequence)
    end_generator = np.random.default_rng(end_sequence)
    draws = rows.stop - rows.start
    n = table.offsets.size
    width = max(1, min(n, arrays.fractions.size // draws))
    for first in range(0, n, width):
        columns = slice(first, min(n, first + width))
        shape = (columns.stop - columns.start, draws)
        uniforms, fractions, scratch = arrays.views(shape)
        cells = arrays.cells[: shape[0] * shape[1]].reshape(shape)
        body_generator.random(out=uniforms, dtype=np.float32)
        at_ends = _body_fractions(table, columns, uniforms, cells, fractions, scratch)
        if at_ends.size:
            distances = end_generator.random(at_ends.size) * _END_SHARE  # exact scaling
            end_cells = cells.reshape(-1)[at_ends]
            fractions.reshape(-1)[at_ends] = _end_fractions(table, end_cells, distances)
        consume(rows, columns, fractions.T)


def table_quantiles(
    alphas: Sequence[float], levels: Sequence[float], *, from_top: bool = False
) -> FloatArray:
    """The table sampler's PERT-beta fraction for each uniform level u: (levels, alphas).

    This is the map the sampler applies, exposed to check it against
    scipy.special.betaincinv. In the body a level is first rounded down to a multiple of
    2^-24, as the sampler's float32 uniforms are; at the ends the sampler draws the distance
    from the end with 53 bits. With from_top each level is given as 1 - u instead, which
    reaches into the upper end as deep as the sampler does.
    """
    shapes = np.asarray(alphas, dtype=np.float64).ravel()
    given = np.asarray(levels, dtype=np.float64).ravel()
    if from_top:
        if given.size and not (given.min() > 0 and given.max() <= 1):
            raise ValueError("levels from the top must lie in (0, 1]")
        from_upper, u = given, 1 - given
    else:
        if given.size and not (given.min() >= 0 and given.max() < 1):
            raise ValueError("levels must lie in [0, 1)")
        from_upper, u = 1 - given, given
    table = _plan_table(shapes)
    out = np.empty((given.size, shapes.size))
    lower = u < _END_SHARE
    upper = ~lower & (from_upper <= _END_SHARE)
    body = ~lower & ~upper
    if body.any():
        grid_levels = (np.floor(u[body] * 2.0**24) / 2.0**24).astype(np.float32)
        uniforms = np.repeat(grid_levels[np.newaxis, :], shapes.size, axis=0)
        cells = np.empty(uniforms.shape, dtype=np.int32)
        fractions = np.empty(uniforms.shape, dtype=np.float32)
        scratch = np.empty_like(fractions)
        everything = slice(0, shapes.size)
        at_ends = _body_fractions(table, everything, uniforms, cells, fractions, scratch)
        if at_ends.size:
            raise AssertionError("a body level fell into an end cell")
        out[body] = fractions.T
    for chosen, distances, edge_cell in (
        (lower, u[lower], 0),
        (upper, from_upper[upper], _BODY_CELLS - 1),
    ):
        if distances.size:
            cells_here = np.tile(table.offsets + edge_cell, distances.size)
            spread = np.repeat(distances, shapes.size)
            fractions64 = _end_fractions(table, cells_here, spread)
            out[chosen] = fractions64.reshape(distances.size, shapes.size)
    return out


def _run_blocks(
    draws: int,
    seed: int,
    columns: _Columns,
    workers: int | None,
    method: SamplingMethod,
    consume: Callable[[slice, slice, npt.NDArray[np.floating]], None],
) -> np.random.SeedSequence:
    """Draw PERT-beta fractions block by block; hand them to `consume` piece by piece.

    consume(rows, columns, fractions) gets the fractions of those draws and of those
    uncertain columns, shape (rows, columns).

    Returns the seed sequence reserved for the shared overrun factor, independent of the
    blocks so that turning the overrun on keeps the same underlying effort draws.
    """
    effort_sequence, overrun_sequence = np.random.SeedSequence(seed).spawn(2)
    n_blocks = -(-draws // BLOCK_DRAWS)
    block_sequences = effort_sequence.spawn(n_blocks)
    n_sampled = columns.alphas.size
    if n_sampled == 0:
        return overrun_sequence
    table = _plan_table(columns.alphas) if method == "table" else None
    per_thread = threading.local()

    def run(block: int) -> None:
        start = block * BLOCK_DRAWS
        rows = slice(start, min(draws, start + BLOCK_DRAWS))
        if table is not None:
            if not hasattr(per_thread, "arrays"):
                per_thread.arrays = _ChunkArrays.for_columns(n_sampled)
            _draw_table_block(table, block_sequences[block], rows, per_thread.arrays, consume)
            return
        generator = np.random.default_rng(block_sequences[block])
        size = (rows.stop - rows.start, n_sampled)
        consume(rows, slice(0, n_sampled), generator.beta(columns.alphas, columns.betas, size))

    if workers is None:
        big = draws * n_sampled >= _PARALLEL_MIN_CELLS
        workers = min(os.cpu_count() or 1, _MAX_WORKERS) if big else 1
    workers = min(workers, n_blocks)
    if workers == 1:
        for block in range(n_blocks):
            run(block)
    else:
        # numpy's generators, ufuncs, take, einsum and Generator.beta release the GIL, so
        # threads share the work; each block writes only its own rows.
        with ThreadPoolExecutor(max_workers=workers) as pool:
            list(pool.map(run, range(n_blocks)))
    return overrun_sequence


def sample_efforts(
    estimates: Sequence[ThreePoint],
    draws: int,
    *,
    seed: int,
    shared_overrun: float = 0.0,
    workers: int | None = None,
    method: SamplingMethod = "table",
) -> FloatArray:
    """Monte Carlo efforts, shape (draws, len(estimates)); certain efforts are constant columns.

    Uncertain efforts are PERT-beta draws: method "table" (the default) maps uniforms through
    the tabulated quantile function, "exact" uses numpy's Generator.beta. With
    shared_overrun every row, certain efforts included, is multiplied by one lognormal
    factor (mean 1, sd shared_overrun); see the module text. The same arguments always give
    the same array, whatever `workers` is.
    """
    draws = _checked_draws(draws)
    seed = _checked_seed(seed)
    share = _checked_overrun(shared_overrun)
    workers = _checked_workers(workers)
    method = _checked_method(method)
    columns = _columns(estimates)
    out = np.empty((draws, len(estimates)), dtype=np.float64)
    out[:, columns.certain_index] = columns.certain_values

    def consume(rows: slice, part: slice, fractions: npt.NDArray[np.floating]) -> None:
        efforts = columns.lows[part] + columns.widths[part] * fractions
        out[rows, columns.uncertain_index[part]] = np.minimum(efforts, columns.highs[part])

    overrun_sequence = _run_blocks(draws, seed, columns, workers, method, consume)
    if share > 0:
        out *= _overrun_factors(overrun_sequence, draws, share)[:, np.newaxis]
    return out


def _sample_totals(
    columns: _Columns,
    draws: int,
    seed: int,
    share: float,
    workers: int | None,
    method: SamplingMethod,
) -> FloatArray:
    """Total effort per draw, without keeping the (draws, n) array."""
    totals = np.full(draws, math.fsum(columns.certain_values) + math.fsum(columns.lows))

    def consume(rows: slice, part: slice, fractions: npt.NDArray[np.floating]) -> None:
        # einsum sums in float64 without BLAS (whose threads would fight the block threads).
        totals[rows] += np.einsum("ij,j->i", fractions, columns.widths[part])

    overrun_sequence = _run_blocks(draws, seed, columns, workers, method, consume)
    if share > 0:
        totals *= _overrun_factors(overrun_sequence, draws, share)
    return totals


def _canonical_key(e: ThreePoint) -> tuple[float, float, float]:
    return (e.low, e.likely, e.high)


def default_seed(estimates: Sequence[ThreePoint], capacity: float | None = None) -> int:
    """A stable seed from the estimates (and the capacity, when given), order ignored.

    sha256 of the estimates rounded to a millionth of a day, not Python's hash(), which
    changes between processes. fit_probability leaves the capacity out so that one set of
    estimates uses the same draws at every capacity: its figure can then only grow as the
    capacity grows.
    """
    digest = hashlib.sha256(b"loadline-risk-1")
    for key in sorted(_canonical_key(e) for e in _checked_estimates(estimates)):
        digest.update(";".join(f"{round(x, 6):.6f}" for x in key).encode() + b"|")
    if capacity is not None:
        digest.update(f"capacity={round(_checked_capacity(capacity), 6):.6f}".encode())
    return int.from_bytes(digest.digest()[:8], "big") >> 1


@dataclass(frozen=True)
class FitEstimate:
    """Chance that a set of efforts fits a capacity, with its Monte Carlo standard error.

    exact is True when nothing was uncertain, so no draws were needed (draws is then 0).
    """

    probability: float
    standard_error: float
    draws: int
    seed: int
    exact: bool = False

    def label(self) -> str:
        """Short text such as "87 % ± 1 %"; the ± is one standard error, rounded up."""
        if self.exact or self.draws == 0:
            return f"{100 * self.probability:.0f} %"
        hits = round(self.probability * self.draws)
        # No miss (or no fit) in n draws: by the rule of three the rare outcome has
        # probability below about 3 / n at 95 % confidence (Hanley and Lippman-Hand, JAMA
        # 249(13), 1983).
        bound = 300 / self.draws
        if hits == self.draws:
            return f"> {math.floor((100 - bound) * 10) / 10:.1f} %"
        if hits == 0:
            return f"< {math.ceil(bound * 10 - 1e-9) / 10:.1f} %"
        error = 100 * self.standard_error
        decimals = 0 if error >= 1 else 1
        scale = 10**decimals
        error_text = f"{math.ceil(error * scale - 1e-9) / scale:.{decimals}f}"
        shown = f"{100 * self.probability:.{decimals}f}"
        if float(shown) >= 100:
            return f"> {100 - 1 / scale:.{decimals}f} %"
        if float(shown) <= 0:
            return f"< {1 / scale:.{decimals}f} %"
        return f"{shown} % ± {error_text} %"


def fit_probability(
    estimates: Sequence[ThreePoint],
    capacity: float,
    *,
    draws: int = 10_000,
    seed: int | None = None,
    shared_overrun: float = 0.0,
    workers: int | None = None,
    method: SamplingMethod = "table",
) -> FitEstimate:
    """Probability that the efforts together fit the capacity (total <= capacity).

    seed None derives one from the estimates (default_seed), so the same plan always shows
    the same figure, whatever the order of its initiatives. workers None uses up to four
    threads for large plans; the result does not depend on it. method as in sample_efforts.
    """
    limit = _checked_capacity(capacity)
    draws = _checked_draws(draws)
    share = _checked_overrun(shared_overrun)
    workers = _checked_workers(workers)
    method = _checked_method(method)
    ordered = sorted(_checked_estimates(estimates), key=_canonical_key)
    seed = default_seed(ordered) if seed is None else _checked_seed(seed)
    columns = _columns(ordered)
    limit += _FIT_TOLERANCE * max(1.0, limit)
    certain_total = math.fsum(columns.certain_values)
    if columns.alphas.size == 0 and (share == 0 or certain_total == 0):
        fits = certain_total <= limit
        return FitEstimate(1.0 if fits else 0.0, 0.0, 0, seed, exact=True)
    totals = _sample_totals(columns, draws, seed, share, workers, method)
    probability = int(np.count_nonzero(totals <= limit)) / draws
    standard_error = math.sqrt(probability * (1 - probability) / draws)
    return FitEstimate(probability, standard_error, draws, seed)


def spread_contributors(
    keys: Sequence[str], estimates: Sequence[ThreePoint], top: int = 5
) -> list[tuple[str, float]]:
    """Share of the total effort variance per key, largest first; certain efforts left out.

    Uses the PERT-beta variance (what the Monte Carlo samples). Equal shares are ordered by
    key so the list never flickers.
    """
    if len(keys) != len(estimates):
        raise ValueError(f"{len(keys)} keys for {len(estimates)} estimates")
    if isinstance(top, bool) or not isinstance(top, numbers.Integral) or top < 0:
        raise ValueError(f"top must be a non-negative whole number, not {top!r}")
    variances = [pert_beta_variance(e) for e in estimates]
    total = math.fsum(variances)
    if total == 0:
        return []
    ranked = sorted(
        ((key, variance) for key, variance in zip(keys, variances, strict=True) if variance > 0),
        key=lambda pair: (-pair[1], pair[0]),
    )
    return [(key, variance / total) for key, variance in ranked[:top]]
