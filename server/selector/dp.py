"""Exact 0/1 and multiple-choice knapsack by dynamic programming over capacity units.

The DP walks "steps" in order. A step is one initiative, or an either-or set whose members
are all tried against the row as it was before the set (so at most one member is taken).
Rows use the "capacity at most c" convention, so every row is non-decreasing in c and the
last row is the capacity curve. Each member leaves one row of take-bits in a bit-packed
decision table (np.packbits, little bit order), which the backtrack reads from the last
step to the first.

Tie rule. Among plans of equal best value the backtrack starts from the smallest capacity
reaching that value (least effort in units), and a member is taken only when taking it is
strictly better than not, with later members of a set beating earlier ones only when strictly
better. So among equally good plans of equal effort, the one that leaves out the initiative
latest in step order (where two plans first differ, counting from the end) is returned.
Step order is the caller's processing order (see the package docstring and twins.py).
With integer-scaled values (see rounding.scale_values) every comparison is exact; a pass
whose cells all stay within int16, or within the whole numbers float32 holds exactly, runs in
that dtype (row_dtype) and hands back rows of the values' own dtype.
"""

from __future__ import annotations

from dataclasses import dataclass
from itertools import repeat
from typing import NamedTuple

import numpy as np

from . import scratch

# Unpacked take-decisions are buffered this many bytes at a time before packing.
_BLOCK_BYTES = 1 << 20


@dataclass(frozen=True)
class Steps:
    """Members of all steps in order; step s owns members bounds[s] to bounds[s + 1] - 1."""

    ids: tuple[int, ...]  # the item index of each member
    units: tuple[int, ...]
    values: np.ndarray  # DP values per member, int64 (scaled) or float64
    bounds: tuple[int, ...]

    @property
    def count(self) -> int:
        """Number of steps."""
        return len(self.bounds) - 1

    @property
    def members(self) -> int:
        """Number of members over all steps."""
        return len(self.ids)


def make_steps(groups: list[list[int]], units: list[int], values: np.ndarray) -> Steps:
    """Build Steps from per-step lists of item indices into units and values."""
    ids = [i for group in groups for i in group]
    if len(ids) == len(groups):
        bounds = list(range(len(ids) + 1))
    else:
        bounds = [0]
        for group in groups:
            bounds.append(bounds[-1] + len(group))
    index = np.asarray(ids, dtype=np.int64)
    return Steps(
        ids=tuple(ids),
        units=tuple(units[i] for i in ids),
        values=values[index] if ids else values[:0],
        bounds=tuple(bounds),
    )


@dataclass(frozen=True)
class StopRule:
    """Stop once the row is worth value at units: no plan is worth more, none needs fewer units.

    value is an upper bound on every plan's value and units a lower bound on the units of any
    plan worth value (see reduction.core_bounds). Once a prefix of the steps reaches both, the
    later steps cannot change the plan the backtrack finds: the full row would reach value at
    the same least capacity, and from there no later member is strictly better to take.
    """

    value: int
    units: int


class Forward(NamedTuple):
    """A forward pass: the last row, the DP cells evaluated, and the steps actually applied."""

    row: np.ndarray
    cells: int
    last: int


def table_bytes(members: int, width: int) -> int:
    """Bytes of a bit-packed decision table for members rows over width capacities."""
    return members * ((width + 7) // 8)


def run_forward(
    steps: Steps,
    width: int,
    *,
    init: np.ndarray | None = None,
    table: np.ndarray | None = None,
    first: int = 0,
    last: int | None = None,
    low: int = 0,
    reach_out: list[int] | None = None,
    stop: StopRule | None = None,
) -> Forward:
    """Apply steps first..last-1 to a row of width capacities (fewer with a stop rule).

    With a table, row r of it receives the take-bits of member bounds[first] + r, valid from
    the member's units up to its reach (appended to reach_out); below its units a member is
    never taken and above its reach it always is, so those bits are not written. Cells counts
    the candidate evaluations:

    - reach: starting from the zero row, capacities at or above the total units seen so far
      are not evaluated; there taking everything is optimal and the row is constant.
      Either-or sets end that shortcut.
    - low: when only capacities >= low of the last row will be read, each member skips the
      capacities that the members after it could not lift to low (left stale, never read).
    - stop: after each step, a row already worth stop.value at stop.units ends the pass.
      Stale cells only ever hold the value of a plan of earlier steps, so they can delay the
      stop but never cause a wrong one.
    """
    last = steps.count if last is None else last
    bounds = steps.bounds
    units = steps.units
    first_member = bounds[first]
    member_values = steps.values[first_member : bounds[last]]
    dtype = row_dtype(member_values, init)
    row = np.zeros(width, dtype=dtype) if init is None else init[:width].astype(dtype)
    cand_buf = scratch.take(dtype, width)
    # 0-d views of the row's dtype: cheaper in ufunc calls than numpy scalars or Python numbers
    value_array = member_values.astype(dtype, copy=False)
    values = [value_array[m, ...] for m in range(value_array.size)]
    top = width - 1
    reach = 0 if init is None else top  # the row is exact on 0..reach, constant above
    block = None
    if table is not None:
        block_rows = max(1, min(bounds[last] - first_member, _BLOCK_BYTES // max(width, 1)))
        block = scratch.take(np.bool_, (block_rows, width))
    if low <= 0 and stop is None and bounds[last] - first_member == last - first:
        # Every step one member, nothing to skip or stop at: the common plan, on a lean loop.
        cells, reach = _forward_singles(
            units[first_member : bounds[last]],
            values,
            row,
            cand_buf,
            reach,
            block,
            table,
            reach_out,
        )
        return _finish_forward(row, reach, cand_buf, block, steps, cells, last)
    after = _units_after(steps, first, last, top) if low > 0 else None
    cells = 0
    slots: list[np.ndarray] = [] if block is None else list(block)
    filled = 0
    packed_to = 0
    add, greater, maximum = np.add, np.greater, np.maximum
    stop_value = stop.value if stop is not None else None
    stop_units = min(stop.units, top) if stop is not None else 0
    applied = last
    for s in range(first, last):
        start, end_member = bounds[s], bounds[s + 1]
        if end_member - start == 1:
            source = row
        else:
            if reach < top:
                row[reach + 1 :] = row[reach]
                reach = top
            source = row.copy()
        lowest = 0 if after is None else low - after[s - first]
        for m in range(start, end_member):
            w = units[m]
            if w <= top:
                end = reach + w + 1
                if end > width:
                    end = width
                if end > reach + 1:
                    row[reach + 1 : end] = row[reach]
                begin = w if w > lowest else lowest
                if begin < end:
                    cand = cand_buf[: end - begin]
                    add(source[begin - w : end - w], values[m - first_member], out=cand)
                    target = row[begin:end]
                    if block is not None:
                        greater(cand, target, out=slots[filled][begin:end])
                    maximum(target, cand, out=target)
                    cells += end - begin
                reach = end - 1
            if reach_out is not None:
                reach_out.append(reach)
            if block is not None:
                filled += 1
                if filled == len(slots):
                    table[packed_to : packed_to + filled] = np.packbits(
                        block, axis=1, bitorder="little"
                    )
                    packed_to += filled
                    filled = 0
        # Below stop_units the row cannot hold a plan of that many units yet: nothing to check.
        if stop_value is not None and reach >= stop_units and row.item(stop_units) >= stop_value:
            applied = s + 1
            break
    if block is not None and filled:
        table[packed_to : packed_to + filled] = np.packbits(
            block[:filled], axis=1, bitorder="little"
        )
    del slots
    return _finish_forward(row, reach, cand_buf, block, steps, cells, applied)


def _forward_singles(
    units: tuple[int, ...],
    values: list[np.ndarray],
    row: np.ndarray,
    cand_buf: np.ndarray,
    reach: int,
    block: np.ndarray | None,
    table: np.ndarray | None,
    reach_out: list[int] | None,
) -> tuple[int, int]:
    """run_forward's pass when each step is one member: return cells and the final reach.

    The same update as run_forward's general loop with source = row and begin = w, without
    its per-step bookkeeping, which at a few thousand cells per row costs as much as the
    arithmetic. block, when given, buffers the take-bits that are packed into table.
    """
    width = row.size
    top = width - 1
    cells = 0
    add, greater, maximum = np.add, np.greater, np.maximum
    chunk = len(units) if block is None else block.shape[0]
    for start in range(0, len(units), max(chunk, 1)):
        chunk_end = start + chunk
        slots = repeat(None) if block is None else block
        # The last chunk can be shorter than the block: slots may outnumber the members.
        members = zip(units[start:chunk_end], values[start:chunk_end], slots, strict=False)
        for w, value, slot in members:
            if w <= top:
                end = reach + w + 1
                if end > width:
                    end = width
                if end > reach + 1:
                    row[reach + 1 : end] = row[reach]
                cand = cand_buf[: end - w]
                add(row[: end - w], value, out=cand)
                target = row[w:end]
                if slot is not None:
                    greater(cand, target, out=slot[w:end])
                maximum(target, cand, out=target)
                cells += end - w
                reach = end - 1
            if reach_out is not None:
                reach_out.append(reach)
        if block is not None and table is not None:
            filled = min(chunk, len(units) - start)
            table[start : start + filled] = np.packbits(block[:filled], axis=1, bitorder="little")
    return cells, reach


def _finish_forward(
    row: np.ndarray,
    reach: int,
    cand_buf: np.ndarray,
    block: np.ndarray | None,
    steps: Steps,
    cells: int,
    applied: int,
) -> Forward:
    """Fill the row above its reach, give the scratch buffers back, hand the row back."""
    if reach < row.size - 1:
        row[reach + 1 :] = row[reach]
    scratch.give_back(cand_buf)
    if block is not None:
        scratch.give_back(block)
    return Forward(row.astype(steps.values.dtype, copy=False), cells, applied)


# Narrower rows than int32 cost a conversion pass in and out: worth it over several members.
_INT16_MAX = 2**15 - 1
_FLOAT32_EXACT = 2**24  # every whole number up to this is a float32
_NARROW_MIN_MEMBERS = 8


def row_dtype(member_values: np.ndarray, init: np.ndarray | None) -> np.dtype:
    """The dtype the forward pass works in for whole-number (int32) values.

    No cell can exceed the initial row's largest value plus every member's value. With that
    sum within int16's range, or within the whole numbers float32 holds exactly, every
    addition and comparison of the pass is exact in that dtype.
    """
    dtype = member_values.dtype
    if dtype != np.int32 or member_values.size < _NARROW_MIN_MEMBERS:
        return dtype
    most = int(member_values.sum(dtype=np.int64))
    if init is not None and init.size:
        most += int(init.max())
    if most <= _INT16_MAX:
        return np.dtype(np.int16)  # half the memory traffic of int32
    if most <= _FLOAT32_EXACT:
        return np.dtype(np.float32)  # int32's traffic, but numpy's float32 loops run faster
    return dtype


def _units_after(steps: Steps, first: int, last: int, top: int) -> list[int]:
    """For each step, the most units the later steps could add (capped at top)."""
    bounds = np.asarray(steps.bounds[first : last + 1])
    units = np.asarray(steps.units[bounds[0] : bounds[-1]], dtype=np.int64)
    if units.size == 0:
        return []
    most = np.maximum.reduceat(units, bounds[:-1] - bounds[0])
    most[most > top] = 0  # a step that can never fit adds nothing
    after = np.cumsum(most[::-1])[::-1] - most
    return np.minimum(after, top).tolist()


def backtrack(
    steps: Steps,
    table: np.ndarray,
    capacity: int,
    *,
    first: int = 0,
    last: int | None = None,
    reach: list[int] | None = None,
) -> tuple[list[int], int]:
    """Read the take-bits from step last-1 down to first; return members taken and capacity left.

    reach holds each member's reach from run_forward (None: bits are valid everywhere).
    """
    last = steps.count if last is None else last
    bounds = steps.bounds
    units = steps.units
    first_member = bounds[first]
    stride = table.shape[1] if table.ndim == 2 else 0
    flat = memoryview(np.ascontiguousarray(table).reshape(-1)) if table.size else memoryview(b"")
    taken: list[int] = []
    c = capacity
    for s in range(last - 1, first - 1, -1):
        for m in range(bounds[s + 1] - 1, bounds[s] - 1, -1):
            r = m - first_member
            if c < units[m]:
                continue
            if (reach is not None and c > reach[r]) or (flat[r * stride + (c >> 3)] >> (c & 7)) & 1:
                taken.append(m)
                c -= units[m]
                break
    taken.reverse()
    return taken, c


def least_effort_capacity(row: np.ndarray, capacity: int, low: int = 0) -> int:
    """Smallest capacity from low reaching the best value of a non-decreasing row."""
    return low + int(np.argmax(row[low : capacity + 1] == row[capacity]))


@dataclass(frozen=True)
class DpResult:
    """Members chosen, the last DP row (capacity curve), work done and how."""

    taken: list[int]
    row: np.ndarray
    cells: int
    low_memory: bool
    note: str
    stopped: bool = False  # the stop rule ended the pass: the row covers a prefix of steps


def solve_steps(
    steps: Steps,
    capacity: int,
    width: int,
    budget_bytes: int,
    *,
    low: int = 0,
    stop: StopRule | None = None,
    rows: str = "",
) -> DpResult:
    """Best plan within capacity units, with the last row computed over width capacities.

    rows says in words what the steps' members are (default: that many initiatives).

    low > 0 promises that no best plan uses fewer units (see reduction.core_bounds);
    the returned row is then only valid from low up. A stop rule may end the pass early
    (see StopRule); the row then belongs to the steps applied. Both are for plan-only solves.
    """
    width = max(width, capacity + 1)
    if width != capacity + 1:
        low, stop = 0, None
    need = table_bytes(steps.members, width)
    if need <= budget_bytes:
        table = scratch.take(np.uint8, (steps.members, (width + 7) // 8))
        reach: list[int] = []
        row, cells, applied = run_forward(
            steps, width, table=table, low=low, reach_out=reach, stop=stop
        )
        start = least_effort_capacity(row, capacity, low)
        taken, _ = backtrack(steps, table, start, last=applied, reach=reach)
        scratch.give_back(table)
        # The row runs past the capacity when the capacity curve is asked for: say so, or
        # the units read as the plan's own.
        beyond = (
            f" (0 to {capacity:,} for the plan, {capacity + 1:,} to {width - 1:,} for the "
            "capacity curve)"
            if width > capacity + 1
            else ""
        )
        note = (
            f"{rows or count_initiatives(steps.members)} x {width:,} capacity units{beyond}; "
            f"decision table {_mib(need)} within the {_mib(budget_bytes)} budget"
        )
        if applied < steps.count:
            note += (
                f"; stopped after {applied} of {steps.count} steps: the plan had reached the "
                "value bound with the least units any plan of that value needs"
            )
        return DpResult(taken, row, cells, False, note, applied < steps.count)
    row, cells, _ = run_forward(steps, width)
    start = least_effort_capacity(row, capacity)
    counter = [cells]
    taken, _ = _divide_and_conquer(steps, 0, steps.count, None, start, budget_bytes, counter)
    note = (
        f"decision table would need {_mib(need)} > {_mib(budget_bytes)} budget; "
        "divide-and-conquer reconstruction keeps one table slice within the budget plus "
        "O(log n) rows"
    )
    return DpResult(taken, row, counter[0], True, note)


def _divide_and_conquer(
    steps: Steps,
    first: int,
    last: int,
    init: np.ndarray | None,
    capacity: int,
    budget_bytes: int,
    counter: list[int],
) -> tuple[list[int], int]:
    """Backtrack steps first..last-1 from capacity as the full table would, in less memory.

    The later half is solved first starting from the row the earlier half leads to; the
    capacity where its backtrack stops is where the earlier half's backtrack starts. This is
    exactly the path the full decision table gives, so the tie rule is kept.
    """
    width = capacity + 1
    members = steps.bounds[last] - steps.bounds[first]
    if last - first == 1 or table_bytes(members, width) <= budget_bytes:
        table = np.empty((members, (width + 7) // 8), dtype=np.uint8)
        reach: list[int] = []
        _, cells, _ = run_forward(
            steps, width, init=init, table=table, first=first, last=last, reach_out=reach
        )
        counter[0] += cells
        return backtrack(steps, table, capacity, first=first, last=last, reach=reach)
    half = steps.bounds[first] + members // 2
    middle = min(max(first + 1, _step_at(steps, half)), last - 1)
    row_middle, cells, _ = run_forward(steps, width, init=init, first=first, last=middle)
    counter[0] += cells
    later, capacity_middle = _divide_and_conquer(
        steps, middle, last, row_middle, capacity, budget_bytes, counter
    )
    del row_middle
    earlier, capacity_first = _divide_and_conquer(
        steps, first, middle, init, capacity_middle, budget_bytes, counter
    )
    return earlier + later, capacity_first


def _step_at(steps: Steps, member: int) -> int:
    return int(np.searchsorted(np.asarray(steps.bounds), member, side="right")) - 1


def count_initiatives(count: int) -> str:
    """'1 initiative', '2 initiatives': for the method notes."""
    return f"{count} initiative" if count == 1 else f"{count} initiatives"


def _mib(size: int) -> str:
    return f"{size / 2**20:,.1f} MiB" if size >= 2**20 else f"{size / 1024:,.1f} KiB"
