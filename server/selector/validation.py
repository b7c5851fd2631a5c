"""Check a problem and turn it into indexed, unit-rounded data the solvers share."""

from __future__ import annotations

import dataclasses
import math
import numbers
from collections.abc import Sequence
from dataclasses import dataclass
from itertools import compress

import numpy as np

from .errors import SelectorInputError
from .model import Item, Problem
from .rounding import units_down, units_up_array

# A DP row of this many float64 cells is 80 MB; beyond it the input is refused as absurd.
MAX_CAPACITY_UNITS = 10_000_000
# Beyond these an effort (in resolution steps) or a value score is refused as absurd; the
# limits keep every sum finite and far from float overflow.
MAX_EFFORT_UNITS = 10**12
MAX_VALUE = 10**15


@dataclass(frozen=True)
class CheckedProblem:
    """A valid problem by item index: efforts, values, units and constraints."""

    keys: tuple[str, ...]
    efforts: tuple[float, ...]
    values: tuple[float, ...]
    units: tuple[int, ...]
    pinned: frozenset[int]
    ruled_out: frozenset[int]
    needs: tuple[tuple[int, ...], ...]
    group_of: tuple[str | None, ...]
    groups: dict[str, tuple[int, ...]]
    capacity: float
    resolution: float
    capacity_units: int
    unit_array: np.ndarray = dataclasses.field(repr=False, compare=False)  # units as int64
    value_array: np.ndarray = dataclasses.field(repr=False, compare=False)  # values, float64
    effort_array: np.ndarray = dataclasses.field(repr=False, compare=False)  # efforts, float64
    rounded_up: tuple[int, ...] = ()  # items whose effort was not a whole number of steps


def check_number(raw: object, *, key: str | None, field: str, allow_zero: bool = False) -> float:
    """Return raw as a finite float greater than zero, or raise naming key and field."""
    if isinstance(raw, bool) or not isinstance(raw, numbers.Real):
        problem = f"must be a number, got {raw!r}"
    else:
        number = float(raw)
        if math.isnan(number):
            problem = "must be a number, got NaN"
        elif math.isinf(number):
            problem = f"must be finite, got {number}"
        elif number < 0 or (number == 0 and not allow_zero):
            problem = f"must be greater than zero, got {number:g}"
        else:
            return number
    if key is None:
        raise SelectorInputError.for_problem(field, problem)
    raise SelectorInputError.for_item(key, field, problem)


def _check_flag(raw: object, key: str, field: str) -> bool:
    if isinstance(raw, bool):
        return raw
    raise SelectorInputError.for_item(key, field, f"must be true or false, got {raw!r}")


def _check_keys(items: Sequence[Item]) -> dict[str, int]:
    index: dict[str, int] = {}
    for position, item in enumerate(items):
        key = item.key
        if not isinstance(key, str) or not key.strip():
            raise SelectorInputError(
                f"initiative {position + 1}: key must be a non-empty text, got {key!r}",
                field="key",
                key=key if isinstance(key, str) else None,
            )
        if key in index:
            raise SelectorInputError.for_item(key, "key", "is used by more than one initiative")
        index[key] = position
    return index


def _check_needs(item: Item, index: dict[str, int]) -> tuple[int, ...]:
    needs = item.needs
    if isinstance(needs, str) or not isinstance(needs, Sequence):
        raise SelectorInputError.for_item(
            item.key, "needs", f"must be a list of keys, got {needs!r}"
        )
    found: list[int] = []
    for name in needs:
        if name not in index:
            raise SelectorInputError.for_item(item.key, "needs", f"names unknown key {name!r}")
        if index[name] not in found:
            found.append(index[name])
    return tuple(found)


def _check_either_or(item: Item) -> str | None:
    name = item.either_or
    if name is None:
        return None
    if not isinstance(name, str):
        raise SelectorInputError.for_item(
            item.key, "either_or", f"must be a set name, got {name!r}"
        )
    return name.strip() or None


def find_needs_cycle(keys: Sequence[str], needs: Sequence[Sequence[int]]) -> list[str] | None:
    """Return one needs cycle as keys (first key repeated at the end), or None."""
    state = [0] * len(keys)  # 0 unseen, 1 on the current path, 2 done
    for start in range(len(keys)):
        if state[start]:
            continue
        path = [start]
        cursors = [0]
        state[start] = 1
        while path:
            node = path[-1]
            if cursors[-1] < len(needs[node]):
                nxt = needs[node][cursors[-1]]
                cursors[-1] += 1
                if state[nxt] == 1:
                    cycle = [*path[path.index(nxt) :], nxt]
                    return [keys[i] for i in cycle]
                if state[nxt] == 0:
                    state[nxt] = 1
                    path.append(nxt)
                    cursors.append(0)
            else:
                state[node] = 2
                path.pop()
                cursors.pop()
    return None


def _check_sets(
    keys: Sequence[str],
    group_of: Sequence[str | None],
    pinned: frozenset[int],
    ruled_out: frozenset[int],
) -> dict[str, tuple[int, ...]]:
    members: dict[str, list[int]] = {}
    if group_of.count(None) == len(group_of):
        return {}  # no either-or sets: the common case, without a loop over every item
    for position, name in enumerate(group_of):
        if name is not None:
            members.setdefault(name, []).append(position)
    for name, group in members.items():
        pins = [i for i in group if i in pinned]
        if len(pins) > 1:
            raise SelectorInputError.for_item(
                keys[pins[1]],
                "either_or",
                f"is pinned, but so is {keys[pins[0]]!r} in the same either-or set {name!r}; "
                "at most one member can be in the plan",
            )
        outs = [i for i in group if i in ruled_out]
        if pins and outs:
            # Listed as bad input: the pin already keeps every other member out, so a
            # ruled-out mark beside it is contradictory bookkeeping rather than a choice.
            raise SelectorInputError.for_item(
                keys[outs[0]],
                "either_or",
                f"is ruled out, but {keys[pins[0]]!r} in the same either-or set {name!r} is "
                "pinned, which already keeps it out; clear one of the two marks",
            )
    return {name: tuple(group) for name, group in members.items()}


@dataclass(frozen=True)
class _Columns:
    efforts: list[float]
    values: list[float]
    pinned: set[int]
    ruled_out: set[int]
    needs: list[tuple[int, ...]]
    group_of: list[str | None]
    keys: tuple[str, ...]
    effort_array: np.ndarray  # the same efforts and values as float64 arrays
    value_array: np.ndarray


_PLAIN_NUMBERS = {int, float}


def _columns_fast(items: Sequence[Item]) -> _Columns | None:
    """Check the common case column by column in C-level loops; None means look closer."""
    count = len(items)
    if count == 0:
        empty = np.zeros(0)
        return _Columns([], [], set(), set(), [], [], (), empty, empty)
    if set(map(type, items)) != {Item}:
        return None
    # One comprehension per field is several times faster than transposing attrgetter rows.
    keys = [item.key for item in items]
    efforts = [item.effort for item in items]
    values = [item.value for item in items]
    pins = [item.pinned for item in items]
    outs = [item.ruled_out for item in items]
    needs = [item.needs for item in items]
    sets = [item.either_or for item in items]
    try:
        blank_key = not all(map(str.strip, keys))  # TypeError for a key that is not text
    except TypeError:
        return None
    if (
        blank_key
        or len(set(keys)) != count
        or not set(map(type, efforts)) <= _PLAIN_NUMBERS
        or not set(map(type, values)) <= _PLAIN_NUMBERS
        or set(map(type, pins)) != {bool}
        or set(map(type, outs)) != {bool}
        # No needs at all (every one the empty tuple) is the common case, told in one pass.
        or (needs.count(()) != count and not set(map(type, needs)) <= {tuple, list})
    ):
        return None
    effort_array = np.array(efforts, dtype=np.float64)
    value_array = np.array(values, dtype=np.float64)
    for column in (effort_array, value_array):
        # NaN fails both comparisons, so two reductions check positive, finite and a number.
        if not (column.min() > 0 and column.max() < math.inf):
            return None
    pinned = set(compress(range(count), pins))
    ruled_out = set(compress(range(count), outs))
    if pinned & ruled_out:
        return None
    need_lists: list[tuple[int, ...]] = [()] * count
    if needs.count(()) != count:
        index = dict(zip(keys, range(count), strict=True))
        for position in compress(range(count), needs):
            need_lists[position] = _check_needs(items[position], index)
    group_of: list[str | None] = [None] * count
    if sets.count(None) != count:
        for position in compress(range(count), [name is not None for name in sets]):
            group_of[position] = _check_either_or(items[position])
    return _Columns(
        effort_array.tolist(),
        value_array.tolist(),
        pinned,
        ruled_out,
        need_lists,
        group_of,
        tuple(keys),
        effort_array,
        value_array,
    )


def _columns_checked(items: Sequence[Item]) -> _Columns:
    """Check every field item by item, raising SelectorInputError for the first bad one."""
    index: dict[str, int] = {}
    efforts: list[float] = []
    values: list[float] = []
    pinned: set[int] = set()
    ruled_out: set[int] = set()
    needs: list[tuple[int, ...]] = []
    group_of: list[str | None] = []
    # Plain ints and floats take a fast path; anything else goes through check_number.
    plain = (int, float)
    for position, item in enumerate(items):
        if type(item) is not Item and not isinstance(item, Item):
            raise SelectorInputError(
                f"items must be Item objects, got {type(item).__name__}", field="items"
            )
        key = item.key
        if type(key) is not str or not key or key.isspace():
            _check_keys(items)
        if key in index:
            raise SelectorInputError.for_item(key, "key", "is used by more than one initiative")
        index[key] = position
        effort = item.effort
        if type(effort) not in plain or not 0 < effort < math.inf:
            effort = check_number(effort, key=key, field="effort")
        efforts.append(float(effort))
        value = item.value
        if type(value) not in plain or not 0 < value < math.inf:
            value = check_number(value, key=key, field="value")
        values.append(float(value))
        is_pinned = item.pinned
        if is_pinned is not False and _check_flag(is_pinned, key, "pinned"):
            pinned.add(position)
        is_out = item.ruled_out
        if is_out is not False and _check_flag(is_out, key, "ruled_out"):
            ruled_out.add(position)
        needs.append(())
        group_of.append(None if item.either_or is None else _check_either_or(item))
    for position, item in enumerate(items):
        if item.needs != ():
            needs[position] = _check_needs(item, index)
        if position in pinned and position in ruled_out:
            raise SelectorInputError.for_item(
                item.key, "pinned", "and ruled_out are both set; choose one"
            )
    return _Columns(
        efforts,
        values,
        pinned,
        ruled_out,
        needs,
        group_of,
        tuple(index),
        np.asarray(efforts, dtype=np.float64),
        np.asarray(values, dtype=np.float64),
    )


def _check_absurd(items: Sequence[Item], columns: _Columns, resolution: float) -> None:
    efforts, values = columns.efforts, columns.values
    steps = columns.effort_array / resolution
    for column, limit, field, what in (
        (steps, MAX_EFFORT_UNITS, "effort", f"resolution steps of {resolution:g} days"),
        (columns.value_array, MAX_VALUE, "value", "as a value score"),
    ):
        if column.size == 0 or column.max() <= limit:
            continue  # one reduction for the usual case; NaN was refused before this
        over = np.flatnonzero(~(column <= limit))
        if over.size:
            i = int(over[0])
            shown = efforts[i] if field == "effort" else values[i]
            raise SelectorInputError.for_item(
                items[i].key, field, f"of {shown:g} is absurd: more than {limit:.0e} {what}"
            )


def check_resolution(resolution: object) -> float:
    """Return the resolution as a float, or raise naming the field."""
    return check_number(resolution, key=None, field="resolution")


def check_capacity_units(capacity: float, resolution: float, *, field: str = "capacity") -> int:
    """Return the capacity in whole units, refusing absurdly fine grids."""
    capacity_units = units_down(capacity, resolution)
    if capacity_units > MAX_CAPACITY_UNITS:
        raise SelectorInputError.for_problem(
            field,
            f"of {capacity:g} days at a resolution of {resolution:g} days is "
            f"{capacity_units:,} units; the selector handles at most {MAX_CAPACITY_UNITS:,}: "
            "use a coarser resolution",
        )
    return capacity_units


def check_problem(problem: Problem, *, allow_zero_capacity: bool = False) -> CheckedProblem:
    """Validate every field of problem; raise SelectorInputError naming the first bad one.

    allow_zero_capacity admits a capacity of 0 days, a valid point on the capacity curve.
    """
    if not isinstance(problem, Problem):
        raise SelectorInputError(f"expected a Problem, got {type(problem).__name__}", field="items")
    capacity = check_number(
        problem.capacity, key=None, field="capacity", allow_zero=allow_zero_capacity
    )
    resolution = check_resolution(problem.resolution)
    capacity_units = check_capacity_units(capacity, resolution)
    items = problem.items
    if not isinstance(items, Sequence) or isinstance(items, str):
        raise SelectorInputError(f"items must be a list of Item, got {items!r}", field="items")
    columns = _columns_fast(items) or _columns_checked(items)
    efforts, values = columns.efforts, columns.values
    pinned, ruled_out = columns.pinned, columns.ruled_out
    needs, group_of = columns.needs, columns.group_of
    _check_absurd(problem.items, columns, resolution)
    unit_array, whole = units_up_array(columns.effort_array, resolution)
    units = tuple(unit_array.tolist())
    keys = columns.keys
    cycle = find_needs_cycle(keys, needs) if any(needs) else None
    if cycle is not None:
        raise SelectorInputError(
            f"initiative {cycle[0]!r}: needs cycle: " + " -> ".join(cycle),
            field="needs",
            key=cycle[0],
        )
    frozen_pinned = frozenset(pinned)
    frozen_out = frozenset(ruled_out)
    groups = _check_sets(keys, group_of, frozen_pinned, frozen_out)
    return CheckedProblem(
        keys=keys,
        efforts=tuple(efforts),
        values=tuple(values),
        units=units,
        pinned=frozen_pinned,
        ruled_out=frozen_out,
        needs=tuple(needs),
        group_of=tuple(group_of),
        groups=groups,
        capacity=capacity,
        resolution=resolution,
        capacity_units=capacity_units,
        unit_array=unit_array,
        value_array=columns.value_array,
        effort_array=columns.effort_array,
        rounded_up=() if whole.all() else tuple(np.flatnonzero(~whole).tolist()),
    )


def rounded_up_keys(checked: CheckedProblem) -> tuple[str, ...]:
    """Keys whose effort was not already a whole number of resolution steps."""
    return tuple(checked.keys[i] for i in checked.rounded_up)


def check_budget(memory_budget_bytes: object) -> int:
    """Return the memory budget as a positive whole number of bytes, or raise."""
    budget = memory_budget_bytes
    if isinstance(budget, bool) or not isinstance(budget, numbers.Integral):
        raise SelectorInputError.for_problem(
            "memory_budget_bytes", f"must be a whole number of bytes, got {budget!r}"
        )
    if budget <= 0:
        raise SelectorInputError.for_problem("memory_budget_bytes", "must be greater than zero")
    return int(budget)


def check_curve_to(curve_to: object, resolution: float) -> int:
    """Return the end of the capacity curve in whole units, or raise."""
    if isinstance(curve_to, bool) or not isinstance(curve_to, numbers.Real):
        raise SelectorInputError.for_problem("curve_to", f"must be a number, got {curve_to!r}")
    days = float(curve_to)
    if not math.isfinite(days) or days < 0:
        raise SelectorInputError.for_problem(
            "curve_to", f"must be a finite number of days >= 0, got {days}"
        )
    return check_capacity_units(days, resolution, field="curve_to")
