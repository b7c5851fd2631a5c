"""Pinned, ruled-out, needs and either-or marks resolved into in / out / free initiatives."""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass

from .errors import SelectorInputError
from .validation import CheckedProblem


@dataclass(frozen=True)
class Decided:
    """What the marks alone decide, before any optimisation.

    in_plan: pinned initiatives plus everything they need (transitively), input order.
    forced_by_needs: members of in_plan that are there only because pinned work needs them.
    out_reason: initiatives that can never be chosen, with the reason in words.
    free: the rest, left to the optimiser, input order.
    free_needs: for each free initiative that needs any, the free initiatives it still needs.
    conflict: why the marks contradict each other (index of the item to blame, message).
    """

    in_plan: tuple[int, ...]
    forced_by_needs: tuple[int, ...]
    out_reason: dict[int, str]
    free: tuple[int, ...]
    free_needs: dict[int, tuple[int, ...]]
    conflict: tuple[int, str] | None


def decide(
    checked: CheckedProblem,
    *,
    force_in: Iterable[int] = (),
    force_out: Iterable[int] = (),
    release: Iterable[int] = (),
) -> Decided:
    """Resolve the marks; force_in / force_out add marks and release drops them (what-ifs)."""
    keys = checked.keys
    released = set(release)
    pins = (set(checked.pinned) - released) | set(force_in)
    outs = (set(checked.ruled_out) - released) | set(force_out)
    needed_by: dict[int, int] = {}
    in_plan = set(pins)
    stack = sorted(pins)
    while stack:
        node = stack.pop()
        for parent in checked.needs[node]:
            if parent not in in_plan:
                in_plan.add(parent)
                needed_by[parent] = needed_by.get(node, node)
                stack.append(parent)
    conflict: tuple[int, str] | None = None
    for i in sorted(in_plan & outs):
        holder = needed_by.get(i, i)
        if holder == i:
            conflict = (i, f"{keys[i]!r} is both required in and kept out of the plan")
        else:
            conflict = (holder, f"pinned {keys[holder]!r} needs ruled-out {keys[i]!r}")
        break
    out_reason: dict[int, str] = dict.fromkeys(outs, "ruled out")
    if conflict is None:
        for name, members in checked.groups.items():
            inside = [i for i in members if i in in_plan]
            if len(inside) > 1:
                first, second = inside[0], inside[1]
                conflict = (
                    second,
                    f"{keys[first]!r} and {keys[second]!r} are both required, but they are in "
                    f"the same either-or set {name!r}",
                )
                break
            if inside:
                for i in members:
                    if i not in in_plan and i not in out_reason:
                        out_reason[i] = (
                            f"{keys[inside[0]]!r} in the same either-or set {name!r} is in the plan"
                        )
    has_needs = any(checked.needs)
    if has_needs:
        if checked.groups:
            _block_needed_alternatives(checked, out_reason, in_plan)
        _block_dependents(checked, out_reason, in_plan)
    if in_plan or out_reason:
        free = tuple(i for i in range(len(keys)) if i not in in_plan and i not in out_reason)
    else:
        free = tuple(range(len(keys)))
    free_needs: dict[int, tuple[int, ...]] = {}
    if has_needs:
        free_set = set(free)
        free_needs = {
            i: tuple(p for p in checked.needs[i] if p in free_set) for i in free if checked.needs[i]
        }
    return Decided(
        in_plan=tuple(sorted(in_plan)),
        forced_by_needs=tuple(sorted(set(needed_by) - pins)),
        out_reason=out_reason,
        free=free,
        free_needs=free_needs,
        conflict=conflict,
    )


def _block_needed_alternatives(
    checked: CheckedProblem, out_reason: dict[int, str], in_plan: set[int]
) -> None:
    """Mark what needs, with itself, two members of one either-or set: it can never be chosen
    (only one of a set can be in), which is not a matter of fit."""
    keys = checked.keys
    # For each initiative, the either-or members among itself and all it needs (one per set),
    # or the first two members of one set found there. Needs are acyclic (checked before).
    members: dict[int, dict[str, int]] = {}
    clash: dict[int, tuple[int, int, str]] = {}
    for start in range(len(keys)):
        stack = [(start, False)]
        while stack:
            node, expanded = stack.pop()
            if node in members:
                continue
            parents = checked.needs[node]
            if not expanded:
                stack.append((node, True))
                stack.extend((p, False) for p in parents if p not in members)
                continue
            found: dict[str, int] = {}
            group = checked.group_of[node]
            if group is not None:
                found[group] = node
            for parent in parents:
                if parent in clash and node not in clash:
                    clash[node] = clash[parent]
                for name, member in members[parent].items():
                    if found.setdefault(name, member) != member and node not in clash:
                        clash[node] = (found[name], member, name)
            members[node] = found
    for i, (first, second, name) in clash.items():
        if i in out_reason or i in in_plan:
            continue
        if i in (first, second):
            other = second if i == first else first
            out_reason[i] = (
                f"it needs {keys[other]!r}, its alternative in the either-or set {name!r}, "
                "and only one of a set can be in the plan"
            )
        else:
            out_reason[i] = (
                f"it needs both {keys[first]!r} and {keys[second]!r}, alternatives in the "
                f"either-or set {name!r}, and only one of a set can be in the plan"
            )


def _block_dependents(
    checked: CheckedProblem, out_reason: dict[int, str], in_plan: set[int]
) -> None:
    """Mark everything that needs an initiative that can never be chosen."""
    dependents: dict[int, list[int]] = {}
    for child, parents in enumerate(checked.needs):
        for parent in parents:
            dependents.setdefault(parent, []).append(child)
    stack = sorted(out_reason)
    while stack:
        node = stack.pop()
        for child in dependents.get(node, ()):
            if child not in out_reason and child not in in_plan:
                out_reason[child] = f"it needs {checked.keys[node]!r}, which cannot be in the plan"
                stack.append(child)


def raise_conflict(checked: CheckedProblem, decided: Decided) -> None:
    """Raise SelectorInputError when the problem's own marks contradict each other."""
    if decided.conflict is None:
        return
    blame, message = decided.conflict
    key = checked.keys[blame]
    field = "either_or" if "either-or" in message else "needs"
    raise SelectorInputError(f"initiative {key!r}: {field}: {message}", field=field, key=key)
