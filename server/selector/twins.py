"""Twins: undecided initiatives outside either-or sets with the same effort in units and value.

Twins are interchangeable in every plan. The processing order (the tie rule's order, see the
package docstring) puts each twin right after the first of them, so among twins the earlier
ones are taken first, and the DP takes a run of m twins as one bounded step made of 0/1
pieces of 1, 2, 4, ... twins and a remainder, each worth that many times the effort and value.

Why the plan is unchanged, tie rule included: the sums of distinct pieces are exactly the
counts 0..m, so the row after the pieces is the row after the m single steps. At a
capacity, the single steps' backtrack takes the least count k that reaches the best value, as
the earliest k twins. The pieces' backtrack, from the remainder down to the piece of 1, takes
a piece only when the pieces before it cannot reach that value, and the pieces before the one
of 2^j make up exactly the counts 0..2^j - 1 (before the remainder r, 0..m - r, where
m - r >= r - 1); so it ends at the same least k. A run of m twins then costs about log2(m)
steps instead of m.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from . import dp

# Runs shorter than this gain nothing from pieces (two twins are two pieces of one).
_SHORTEST_RUN = 3


def twins_first(items: np.ndarray, units: np.ndarray, values: np.ndarray) -> np.ndarray:
    """Item indices in processing order: each twin moved up to follow the first of its twins."""
    if items.size < 2:
        return items
    u, v = units[items], values[items]
    kinds = _kinds(u, v)
    if kinds is not None:
        return _by_first_twin(items, *kinds)
    anchors = _anchors(u, v)
    if anchors is None:
        return items
    return items[np.argsort(anchors, kind="stable")]


# With at most this many kinds of initiative (distinct effort and value), a loop over the kinds
# in Python costs less than the vectorised reordering's fixed cost of a dozen numpy calls.
_FEW_KINDS = 64


def ordered_steps(
    items: np.ndarray, units: np.ndarray, values: np.ndarray, top: int, *, exact: bool
) -> tuple[np.ndarray, Bundled]:
    """twins_first(items, ...) and bundle_items of that order, in one pass where kinds are few."""
    u, v = units[items], values[items]
    kinds = _kinds(u, v) if exact and items.size >= _SHORTEST_RUN else None
    if kinds is None:
        order = twins_first(items, units, values)
        return order, bundle_items(order, units, values, top, exact=exact)
    if kinds[1].size == items.size:  # no twins: input order, one step per initiative
        return items, _singles(items, u, v)
    by_key, starts = kinds
    sizes = _kind_sizes(starts, items.size)
    has_runs = sizes.max() >= _SHORTEST_RUN
    if not has_runs or starts.size > _FEW_KINDS:
        # No kind with enough twins for pieces, or many kinds: lay them out vectorised,
        # reusing the sort.
        order = _by_first_twin(items, by_key, starts, sizes)
        if not has_runs:  # one step per initiative
            return order, _singles(order, units[order], values[order])
        return order, bundle_items(order, units, values, top, exact=exact)
    # Kinds in order of their first initiative: the processing order, kind by kind.
    firsts = by_key[starts]
    bounds = [*starts.tolist(), items.size]
    sorted_items = items[by_key].tolist()
    kind_units = u[firsts].tolist()
    kind_values = v[firsts].tolist()
    processing: list[int] = []
    builder = _StepsBuilder()
    for k in np.argsort(firsts).tolist():
        members = sorted_items[bounds[k] : bounds[k + 1]]
        processing += members
        w, value = kind_units[k], kind_values[k]
        if len(members) < _SHORTEST_RUN:
            builder.add_singles(members, [w] * len(members), [value] * len(members))
        else:
            builder.add_run(members, w, value, top)
    return np.asarray(processing, dtype=np.int64), builder.build(values.dtype)


def _kinds(units: np.ndarray, values: np.ndarray) -> tuple[np.ndarray, np.ndarray] | None:
    """For whole-number values: positions sorted by kind (same units and value), input order
    within a kind, and where each kind starts in that sort; None for other values."""
    if values.dtype.kind not in "iu" or int(values.min()) < 0 or int(units.max()) >= 2**31:
        return None
    keys = (units << 32) | values.astype(np.int64)
    by_key = np.argsort(keys, kind="stable")
    ordered = keys[by_key]
    new_kind = np.empty(keys.size, dtype=np.bool_)
    new_kind[0] = True
    np.not_equal(ordered[1:], ordered[:-1], out=new_kind[1:])
    return by_key, np.flatnonzero(new_kind)


def _kind_sizes(starts: np.ndarray, count: int) -> np.ndarray:
    """How many initiatives each kind has, from where the kinds start in a sort of count."""
    # Not np.diff(starts, append=count): at these sizes its concatenation costs more than this.
    sizes = np.empty(starts.size, dtype=np.int64)
    np.subtract(starts[1:], starts[:-1], out=sizes[:-1])
    sizes[-1] = count - starts[-1]
    return sizes


def _by_first_twin(
    items: np.ndarray, by_key: np.ndarray, starts: np.ndarray, sizes: np.ndarray | None = None
) -> np.ndarray:
    """items with the kinds (see _kinds) laid out by the position of their first twin, without
    a second sort of all items. sizes: _kind_sizes(starts, items.size), when already known."""
    if starts.size == items.size:
        return items  # no twins
    if sizes is None:
        sizes = _kind_sizes(starts, items.size)
    by_first = np.argsort(by_key[starts])  # kinds in order of their first twin
    out_start = np.empty(starts.size, dtype=np.int64)
    out_start[by_first] = np.cumsum(sizes[by_first]) - sizes[by_first]
    kind = np.repeat(np.arange(starts.size), sizes)
    target = out_start[kind] + (np.arange(items.size) - starts[kind])
    result = np.empty_like(items)
    result[target] = items[by_key]
    return result


def _anchors(units: np.ndarray, values: np.ndarray) -> np.ndarray | None:
    """Per position, the position of the first twin of its initiative; None: no twins at all."""
    pairs = np.column_stack([units.astype(np.float64), values.astype(np.float64)])
    _, first, inverse = np.unique(pairs, axis=0, return_index=True, return_inverse=True)
    if first.size == units.size:
        return None
    return first[inverse.reshape(-1)]


@dataclass(frozen=True)
class Bundled:
    """DP steps with runs of twins as pieces, and what each piece stands for.

    runs holds the twins of each run in processing order; pieces maps a member of steps to
    (run number, count): the run it belongs to and how many twins it is worth.
    """

    steps: dp.Steps
    runs: list[list[int]]
    pieces: dict[int, tuple[int, int]]

    def describe(self) -> str:
        """The DP's rows in words when runs of twins became pieces, else empty."""
        if not self.pieces:
            return ""
        twins = sum(map(len, self.runs))
        singles = self.steps.members - len(self.pieces)
        return (
            f"{singles + twins} initiatives as {self.steps.members} decision rows ({twins} "
            f"twins of equal effort and value in {len(self.runs)} "
            f"run{'' if len(self.runs) == 1 else 's'}, taken 1, 2, 4, ... "
            "at a time)"
        )

    def items(self, taken: Sequence[int]) -> list[int]:
        """The initiatives behind the members taken: for a run, its first twins by count."""
        ids = self.steps.ids
        if not self.pieces:
            return [ids[m] for m in taken]
        counts = [0] * len(self.runs)
        chosen: list[int] = []
        for m in taken:
            piece = self.pieces.get(m)
            if piece is None:
                chosen.append(ids[m])
            else:
                counts[piece[0]] += piece[1]
        for run, count in zip(self.runs, counts, strict=True):
            chosen.extend(run[:count])
        return chosen


class _StepsBuilder:
    """Collects DP steps in processing order: single initiatives, either-or sets and runs."""

    def __init__(self) -> None:
        self.ids: list[int] = []
        self.units: list[int] = []
        self.values: list[int] = []
        self.bounds = [0]
        self.runs: list[list[int]] = []
        self.pieces: dict[int, tuple[int, int]] = {}

    def add_step(self, ids: list[int], units: list[int], values: list[int]) -> None:
        """One step whose members are ids (one initiative, or an either-or set)."""
        self.ids += ids
        self.units += units
        self.values += values
        self.bounds.append(len(self.ids))

    def add_singles(self, ids: list[int], units: list[int], values: list[int]) -> None:
        """A step for each of the initiatives ids."""
        self.ids += ids
        self.units += units
        self.values += values
        self.bounds += range(self.bounds[-1] + 1, len(self.ids) + 1)

    def add_run(self, run: list[int], units: int, value: int, top: int) -> None:
        """A run of twins (each of units and value) as pieces, cut to what top can hold."""
        for size in _piece_sizes(min(len(run), top // units)):
            self.pieces[len(self.ids)] = (len(self.runs), size)
            self.add_step([run[0]], [size * units], [size * value])
        self.runs.append(run)

    def build(self, dtype: np.dtype) -> Bundled:
        steps = dp.Steps(
            ids=tuple(self.ids),
            units=tuple(self.units),
            values=np.asarray(self.values, dtype=dtype),
            bounds=tuple(self.bounds),
        )
        return Bundled(steps, self.runs, self.pieces)


def bundle_items(
    items: np.ndarray, units: np.ndarray, values: np.ndarray, top: int, *, exact: bool
) -> Bundled:
    """Steps of one initiative each (item indices, processing order), runs of twins as pieces.

    top is the largest capacity in the DP: no more than top // w twins of w units can be
    taken, so a run is cut to that many. exact says the values are whole numbers whose sums
    are exact (a piece's value must equal the sum of its twins' values); otherwise every
    initiative stays a step of its own.
    """
    u = units[items]
    v = values[items]
    spans = _runs(u, v) if exact else []
    if not spans:
        return _singles(items, u, v)
    item_list, unit_list, value_list = items.tolist(), u.tolist(), v.tolist()
    builder = _StepsBuilder()
    done = 0  # positions placed so far
    for start, end in spans:
        builder.add_singles(item_list[done:start], unit_list[done:start], value_list[done:start])
        builder.add_run(item_list[start:end], unit_list[start], value_list[start], top)
        done = end
    builder.add_singles(item_list[done:], unit_list[done:], value_list[done:])
    return builder.build(values.dtype)


def _singles(items: np.ndarray, units: np.ndarray, values: np.ndarray) -> Bundled:
    """One step per initiative, in the order of items (units and values already theirs)."""
    steps = dp.Steps(
        tuple(items.tolist()), tuple(units.tolist()), values, tuple(range(items.size + 1))
    )
    return Bundled(steps, [], {})


def _runs(units: np.ndarray, values: np.ndarray) -> list[tuple[int, int]]:
    """(start, end) positions of each run of at least _SHORTEST_RUN twins in a row."""
    count = units.size
    if count < _SHORTEST_RUN:
        return []
    same = (units[1:] == units[:-1]) & (values[1:] == values[:-1])
    if not same.any():
        return []
    breaks = (np.flatnonzero(~same) + 1).tolist()
    return [
        (start, end)
        for start, end in zip([0, *breaks], [*breaks, count], strict=True)
        if end - start >= _SHORTEST_RUN
    ]


def _piece_sizes(count: int) -> list[int]:
    """1, 2, 4, ... and the remainder: sums of distinct sizes give every count 0..count."""
    sizes: list[int] = []
    size = 1
    while count > 0:
        sizes.append(min(size, count))
        count -= sizes[-1]
        size *= 2
    return sizes


def bundle(
    layout: list[list[int]], units: np.ndarray, values: np.ndarray, top: int, *, exact: bool
) -> Bundled:
    """Steps for layout (processing order): either-or sets as they are, runs of twins among
    the single steps as pieces (see bundle_items)."""
    if all(len(group) == 1 for group in layout):
        items = np.asarray([group[0] for group in layout], dtype=np.int64)
        return bundle_items(items, units, values, top, exact=exact)
    unit_list = units.tolist()
    builder = _StepsBuilder()
    s = 0
    while s < len(layout):
        end = s + 1
        if exact and len(layout[s]) == 1:
            first = layout[s][0]
            while (
                end < len(layout)
                and len(layout[end]) == 1
                and unit_list[layout[end][0]] == unit_list[first]
                and values[layout[end][0]] == values[first]
            ):
                end += 1
        if end - s >= _SHORTEST_RUN:
            run = [group[0] for group in layout[s:end]]
            builder.add_run(run, unit_list[run[0]], values[run[0]], top)
        else:
            for group in layout[s:end]:
                builder.add_step(group, [unit_list[i] for i in group], [values[i] for i in group])
        s = end
    return builder.build(values.dtype)
