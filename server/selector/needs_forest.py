"""Exact knapsack when each initiative needs at most one other (a forest of needs).

Order the forest so every initiative comes before everything that (transitively) needs it:
the reverse of a post-order where roots and children keep input order. In that order an
initiative's dependants follow it as one contiguous run, so a suffix DP can either take the
initiative and go on to its dependants, or skip it together with all of them:

    f[i][c] = max(f[next(i)][c], value[i] + f[i + 1][c - units[i]])

where next(i) is the first position after i's dependants. Rows f[k] are kept only while a
later (smaller) position still refers to them, at most the forest's depth plus two.

The DP runs over the post-order front to back and the backtrack reads it back to front,
leaving an initiative out whenever that is as good; so among equally good plans of equal
effort, the one leaving out the initiative latest in that post-order wins (with no needs at
all this would be input order; the plain DP also moves twins up, see twins.py).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from .dp import least_effort_capacity, table_bytes


@dataclass(frozen=True)
class ForestResult:
    """Items chosen, the last DP row (capacity curve) and the cells evaluated."""

    taken: list[int]
    row: np.ndarray
    cells: int
    note: str


def forest_order(
    free: Sequence[int], parent_of: dict[int, int | None]
) -> tuple[list[int], list[int]]:
    """Return (order, next_position): parents before dependants, subtrees contiguous."""
    children: dict[int, list[int]] = {i: [] for i in free}
    roots: list[int] = []
    for i in free:
        parent = parent_of.get(i)
        if parent is None:
            roots.append(i)
        else:
            children[parent].append(i)
    post: list[int] = []
    size: dict[int, int] = {}
    for root in roots:
        stack: list[tuple[int, int]] = [(root, 0)]
        while stack:
            node, cursor = stack.pop()
            kids = children[node]
            if cursor < len(kids):
                stack.append((node, cursor + 1))
                stack.append((kids[cursor], 0))
            else:
                size[node] = 1 + sum(size[k] for k in kids)
                post.append(node)
    order = post[::-1]
    next_position = [position + size[node] for position, node in enumerate(order)]
    return order, next_position


def solve_forest(
    free: Sequence[int],
    parent_of: dict[int, int | None],
    units: Sequence[int],
    values: np.ndarray,
    capacity: int,
    width: int,
    budget_bytes: int,
) -> ForestResult | None:
    """Best plan within capacity, or None when the table and live rows exceed the budget."""
    width = max(width, capacity + 1)
    order, next_position = forest_order(free, parent_of)
    count = len(order)
    uses = [0] * (count + 1)
    for position in range(count):
        uses[next_position[position]] += 1
        uses[position + 1] += 1
    live_peak = _live_peak(next_position, uses)
    need = table_bytes(count, width) + live_peak * width * values.itemsize
    if need > budget_bytes:
        return None
    stride = (width + 7) // 8
    table = np.zeros((count, stride), dtype=np.uint8)
    rows: dict[int, np.ndarray] = {count: np.zeros(width, dtype=values.dtype)}
    remaining = list(uses)
    bits = np.empty(width, dtype=np.bool_)
    cells = 0
    for position in range(count - 1, -1, -1):
        item = order[position]
        skip = rows[next_position[position]]
        take = rows[position + 1]
        new = skip.copy()
        w = units[item]
        if w < width:
            n = width - w
            cand = take[:n] + values[item]
            bits[:w] = False
            np.greater(cand, skip[w:], out=bits[w:])
            np.maximum(new[w:], cand, out=new[w:])
            table[position] = np.packbits(bits, bitorder="little")
            cells += n
        for used in (next_position[position], position + 1):
            remaining[used] -= 1
            if remaining[used] == 0:
                del rows[used]
        rows[position] = new
    final = rows[0]
    start = least_effort_capacity(final, capacity)
    flat = memoryview(table.reshape(-1)) if table.size else memoryview(b"")
    taken: list[int] = []
    position = 0
    c = start
    while position < count:
        if (flat[position * stride + (c >> 3)] >> (c & 7)) & 1:
            item = order[position]
            taken.append(item)
            c -= units[item]
            position += 1
        else:
            position = next_position[position]
    note = (
        f"needs form a forest: DP over {count} initiatives in depth-first order x {width:,} "
        f"capacity units, decision table and {live_peak} live rows {need / 2**20:,.1f} MiB"
    )
    return ForestResult(sorted(taken), final, cells, note)


def _live_peak(next_position: Sequence[int], uses: Sequence[int]) -> int:
    """Largest number of rows held at once by the loop in solve_forest."""
    count = len(next_position)
    remaining = list(uses)
    live = 1
    peak = 1
    for position in range(count - 1, -1, -1):
        live += 1
        peak = max(peak, live)
        for used in (next_position[position], position + 1):
            remaining[used] -= 1
            if remaining[used] == 0:
                live -= 1
    return peak
