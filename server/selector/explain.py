"""Why each initiative is in or out: best plan values with it forced in and forced out.

For the plain and multiple-choice DPs the forced values come from prefix and suffix rows
(see prefix_suffix), O(C) per initiative after two passes. For the needs-forest DP and the
binary program, and for pinned, ruled-out and blocked initiatives everywhere, they come
from re-solving with the initiative forced in or out (one exact solve each). What would move
with each initiative (what it displaces, what comes or goes with it) is read from the same
tables for large plans; for page-sized ones (EXACT_MOVES_*) from one re-solve of each
initiative forced (the values still from the tables), so that it is exactly the plan a
what-if shows, tie rule included. A pinned
initiative is re-solved with its pin removed and itself left out; a ruled-out one with the
mark removed and itself forced in.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

from .constraints import Decided, decide
from .engine import Outcome, Prepared, run
from .model import Explanation
from .prefix_suffix import IMPOSSIBLE, ForcedPlan, forced_plans

# Each re-solve is a full solve; beyond this many the explanations are left out, not slow.
MAX_RESOLVES = 400
# What would move with an initiative is read from one re-solve per initiative while that stays
# cheap (page-sized plans): it is then the very plan a what-if forcing it shows, tie rule
# included. The tables find a plan of the same value and the same units, but where several
# plans tie on both they may name another of them. Bounds: initiatives, and their count
# squared times the capacity units (the re-solves' DP cells at most).
EXACT_MOVES_MAX = 120
EXACT_MOVES_CELLS = 20_000_000


@dataclass(frozen=True)
class _Context:
    prepared: Prepared
    outcome: Outcome
    chosen: frozenset[int]
    best: float
    budget_bytes: int

    @property
    def decided(self) -> Decided:
        return self.outcome.decided


def explain_outcome(
    prepared: Prepared, outcome: Outcome, budget_bytes: int
) -> tuple[tuple[Explanation, ...] | None, str]:
    """One Explanation per initiative (input order), and a note on how they were computed.

    None (with the reason in the note) when more than MAX_RESOLVES initiatives would each
    need their own re-solve, which could take minutes.
    """
    context = _Context(
        prepared, outcome, frozenset(outcome.chosen), prepared.total(outcome.chosen), budget_bytes
    )
    fast, note = forced_plans(prepared, outcome, budget_bytes)
    resolves = len(prepared.checked.keys) - len(fast)
    if resolves > MAX_RESOLVES:
        why = (
            f"no explanations: {resolves} initiatives would each need a re-solve with "
            f"{outcome.method} (at most {MAX_RESOLVES})"
        )
        return None, (note + "; " if note else "") + why
    count = len(prepared.checked.keys)
    exact_moves = bool(fast) and (
        count <= EXACT_MOVES_MAX
        and count * count * (outcome.free_capacity + 1) <= EXACT_MOVES_CELLS
    )
    explanations = []
    for i in range(count):
        if i not in fast:
            forced_in, forced_out = _resolve_both(context, i)
        elif exact_moves:
            forced_in, forced_out = _moves_resolved(context, i, *fast[i])
        else:
            forced_in, forced_out = fast[i]
        explanations.append(_explanation(context, i, forced_in, forced_out))
    if exact_moves:
        note += "; what moves with each by re-solving it forced"
    if not fast:
        note = (note + "; " if note else "") + "explanations by re-solving each initiative forced"
    elif len(fast) < len(explanations):
        note += "; pinned, ruled-out and blocked initiatives re-solved"
    return tuple(explanations), note


def _moves_resolved(
    context: _Context, i: int, forced_in: ForcedPlan, forced_out: ForcedPlan
) -> tuple[ForcedPlan, ForcedPlan]:
    """The tables' values, with what moves read from a re-solve of the side the plan is not
    (the same value: both are exact; the re-solve's plan is the tie rule's own)."""
    resolved_in, resolved_out = _resolve_both(context, i)
    if i in context.chosen and resolved_out.value is not None:
        forced_out = replace(resolved_out, value=forced_out.value)
    elif i not in context.chosen and resolved_in.value is not None:
        forced_in = replace(resolved_in, value=forced_in.value)
    return forced_in, forced_out


def _resolve_both(context: _Context, i: int) -> tuple[ForcedPlan, ForcedPlan]:
    checked = context.prepared.checked
    here = ForcedPlan(context.best)
    release = [i] if (i in checked.pinned or i in checked.ruled_out) else []
    if i in context.chosen:
        return here, _resolve(context, force_out=[i], release=release)
    return _resolve(context, force_in=[i], release=release), here


def _resolve(
    context: _Context,
    *,
    force_in: list[int] | None = None,
    force_out: list[int] | None = None,
    release: list[int],
) -> ForcedPlan:
    decided = decide(
        context.prepared.checked,
        force_in=force_in or (),
        force_out=force_out or (),
        release=release,
    )
    if decided.conflict is not None:
        return IMPOSSIBLE
    outcome = run(context.prepared, decided, budget_bytes=context.budget_bytes)
    if not outcome.feasible:
        return IMPOSSIBLE
    plan = frozenset(outcome.chosen)
    return ForcedPlan(
        context.prepared.total(outcome.chosen), plan - context.chosen, context.chosen - plan
    )


def _explanation(
    context: _Context, i: int, forced_in: ForcedPlan, forced_out: ForcedPlan
) -> Explanation:
    checked = context.prepared.checked
    keys = checked.keys
    is_chosen = i in context.chosen
    opposite = forced_out if is_chosen else forced_in
    best = context.best
    regret = 0.0 if opposite.value is None else max(0.0, best - opposite.value)
    moved = opposite.added if is_chosen else opposite.removed
    displaces = tuple(keys[j] for j in sorted(moved))
    moves_with = _moves_with(context, i, opposite)
    marked = i in checked.pinned or i in checked.ruled_out
    optimised = i in context.decided.free
    threshold = None
    constraint_cost = None
    if marked:
        constraint_cost = 0.0 if opposite.value is None else max(0.0, opposite.value - best)
    elif optimised and opposite.value is not None:
        threshold = checked.values[i] - regret if is_chosen else checked.values[i] + regret
    return Explanation(
        key=keys[i],
        chosen=is_chosen,
        value_if_in=forced_in.value,
        value_if_out=forced_out.value,
        regret=regret,
        threshold_value=threshold,
        displaces=displaces,
        reason=_reason(context, i, opposite.value, regret, displaces, moves_with),
        constraint_cost=constraint_cost,
        moves_with=moves_with,
    )


def _number(x: float) -> str:
    return f"{x:,.6g}"


def _moves_with(context: _Context, i: int, opposite: ForcedPlan) -> tuple[str, ...]:
    """What moves the same way as i in the opposite plan: for a chosen i, the chosen
    initiatives that would leave with it (what needs it, or a new best mix); for one left
    out, the others that would come in with it (what it needs, or a new best mix)."""
    if opposite.value is None:
        return ()
    same_way = opposite.removed if i in context.chosen else opposite.added
    keys = context.prepared.checked.keys
    return tuple(keys[j] for j in sorted(same_way) if j != i)


def _reason(
    context: _Context,
    i: int,
    opposite: float | None,
    regret: float,
    displaces: tuple[str, ...],
    moves_with: tuple[str, ...] = (),
) -> str:
    checked = context.prepared.checked
    best = context.best
    names = ", ".join(displaces)
    if i in checked.pinned:
        if opposite is None:
            return "Pinned: always in the plan; the other marks need it there."
        if opposite > best:
            return (
                f"Pinned: always in the plan; without the pin the best plan would reach "
                f"{_number(opposite)}, {_number(opposite - best)} more."
            )
        return "Pinned: always in the plan; the pin costs no value."
    if i in checked.ruled_out:
        if opposite is None:
            return "Ruled out: never in the plan; it could not be fitted in anyway."
        if opposite > best:
            return (
                f"Ruled out: never in the plan; allowed in, the best plan would reach "
                f"{_number(opposite)}, {_number(opposite - best)} more."
            )
        return "Ruled out: never in the plan; letting it in would not raise the plan value."
    if i in context.decided.forced_by_needs:
        return "In the plan because pinned work needs it."
    blocked = context.decided.out_reason.get(i)
    if blocked is not None:
        return f"Left out: {blocked}."
    if i in context.chosen:
        if regret == 0:
            return "In the plan; an equally good plan without it exists, and the tie rule kept it."
        tail = f"; {names} would take its place." if names else "; nothing would take its place."
        if moves_with:
            tail = f"; {', '.join(moves_with)} would leave the plan too" + tail
        return f"In the plan: leaving it out costs {_number(regret)} value{tail}"
    if opposite is None:
        free_days = context.outcome.free_capacity * checked.resolution
        # "With what it needs" only of work that needs something still to be chosen.
        what = "with what it needs it takes" if context.decided.free_needs.get(i) else "it takes"
        return (
            f"Left out: it does not fit; {what} more than the {free_days:g} days left after "
            "pinned work."
        )
    if regret == 0:
        return "Left out; an equally good plan with it exists, and the tie rule left it out."
    joining = ", ".join(moves_with)
    if names:
        tail = f"; it would displace {names}" + (f" and bring in {joining}." if joining else ".")
    else:
        tail = f"; it would bring in {joining} too." if joining else "."
    return f"Left out: forcing it in costs {_number(regret)} value{tail}"
