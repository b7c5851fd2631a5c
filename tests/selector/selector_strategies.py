"""Hypothesis strategies for random selector problems with every kind of mark."""

from __future__ import annotations

from hypothesis import strategies as st

from server.selector import Item, Problem


def _closure(needs: list[list[int]], start: set[int]) -> set[int]:
    seen = set(start)
    stack = list(start)
    while stack:
        for parent in needs[stack.pop()]:
            if parent not in seen:
                seen.add(parent)
                stack.append(parent)
    return seen


def repair_marks(
    pinned: list[bool], ruled_out: list[bool], needs: list[list[int]], sets: list[str | None]
) -> None:
    """Drop marks until they are consistent (the selector rejects contradictions)."""
    while True:
        closure = _closure(needs, {i for i, p in enumerate(pinned) if p})
        members: dict[str, list[int]] = {}
        for i in sorted(closure):
            if sets[i] is not None:
                members.setdefault(sets[i], []).append(i)
        clash = next((group for group in members.values() if len(group) > 1), None)
        if clash is None:
            break
        # Unpin the last pinned item whose closure reaches the clashing set.
        for i in range(len(pinned) - 1, -1, -1):
            if pinned[i] and _closure(needs, {i}) & set(clash):
                pinned[i] = False
                break
    closure = _closure(needs, {i for i, p in enumerate(pinned) if p})
    pinned_sets = {sets[i] for i in closure if sets[i] is not None}
    for i in range(len(ruled_out)):
        if i in closure or (sets[i] is not None and sets[i] in pinned_sets):
            ruled_out[i] = False


@st.composite
def problems(
    draw: st.DrawFn,
    *,
    max_n: int = 10,
    max_units: int = 20,
    marks: bool = True,
    either_or: bool = False,
    needs: str | None = None,
    decimals: bool = False,
    off_grid: bool = False,
    min_n: int = 0,
) -> Problem:
    """A random problem; needs is None, "forest" (at most one each) or "general"."""
    n = draw(st.integers(min_n, max_n))
    resolution = draw(st.sampled_from([0.5, 1.0, 0.25]))
    units = draw(st.lists(st.integers(1, max_units), min_size=n, max_size=n))
    efforts = [u * resolution for u in units]
    if off_grid:
        shaved = draw(st.lists(st.sampled_from([0.0, 0.1, 0.3]), min_size=n, max_size=n))
        efforts = [max(0.05, e - s * resolution) for e, s in zip(efforts, shaved, strict=True)]
    if decimals:
        values = draw(
            st.lists(st.integers(1, 10_000).map(lambda v: v / 100), min_size=n, max_size=n)
        )
    else:
        values = draw(st.lists(st.integers(1, 100), min_size=n, max_size=n))
    fraction = draw(st.sampled_from([0.2, 0.35, 0.5, 0.7, 1.1]))
    capacity_units = max(1, int(sum(units) * fraction))
    capacity = capacity_units * resolution + draw(st.sampled_from([0.0, 0.3 * resolution]))
    state = st.sampled_from(["free"] * 8 + ["pinned", "ruled_out"]) if marks else st.just("free")
    states = draw(st.lists(state, min_size=n, max_size=n))
    pinned = [s == "pinned" for s in states]
    ruled_out = [s == "ruled_out" for s in states]
    need_lists: list[list[int]] = [[] for _ in range(n)]
    if needs is not None:
        for i in range(1, n):
            if draw(st.booleans()):
                most = 1 if needs == "forest" else min(3, i)
                count = draw(st.integers(1, most))
                need_lists[i] = sorted(
                    draw(st.sets(st.integers(0, i - 1), min_size=count, max_size=count))
                )
    sets: list[str | None] = [None] * n
    if either_or:
        sets = draw(st.lists(st.sampled_from([None, None, "x", "y", "z"]), min_size=n, max_size=n))
    repair_marks(pinned, ruled_out, need_lists, sets)
    # Present the items in a random order so needs do not always point backwards.
    order = draw(st.permutations(range(n))) if n else []
    keys = [f"k{i}" for i in range(n)]
    items = tuple(
        Item(
            key=keys[i],
            effort=efforts[i],
            value=values[i],
            pinned=pinned[i],
            ruled_out=ruled_out[i],
            needs=tuple(keys[j] for j in need_lists[i]),
            either_or=sets[i],
        )
        for i in order
    )
    return Problem(items=items, capacity=capacity, resolution=resolution)
