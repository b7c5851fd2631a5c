"""Plain data in and out of the selector: problems, results and their parts."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field


@dataclass(frozen=True, slots=True)  # slots: faster field reads for large plans
class Item:
    """One candidate initiative for one team.

    effort is in person-days and value is a value score; both must be finite and greater than
    zero. needs names other items this one can only be chosen together with; either_or names
    the set of alternatives it belongs to (at most one member of a set is chosen).
    """

    key: str
    effort: float
    value: float
    pinned: bool = False
    ruled_out: bool = False
    needs: tuple[str, ...] = ()
    either_or: str | None = None


@dataclass(frozen=True)
class Problem:
    """Items competing for one team's capacity (person-days), solved at a resolution in days."""

    items: tuple[Item, ...]
    capacity: float
    resolution: float = 0.5


@dataclass(frozen=True)
class Rounding:
    """How days were turned into the whole capacity units the dynamic program works in."""

    resolution: float
    capacity_units: int
    capacity_days_used: float  # capacity rounded down to the resolution
    capacity_days_lost: float  # capacity - capacity_days_used
    effort_units: dict[str, int]  # per key, effort rounded up to the resolution
    items_rounded_up: tuple[str, ...]  # keys whose effort was not a multiple of the resolution


@dataclass(frozen=True)
class Explanation:
    """Why one initiative is in or out of the plan, and what the opposite decision would cost.

    value_if_in / value_if_out are the best plan values with the initiative forced in / out
    (None when that is impossible). For a pinned initiative value_if_out is the best plan with
    the pin removed and the initiative left out; for a ruled-out one value_if_in is the best
    plan with it allowed and forced in. regret is the plan value lost by the opposite decision
    (0.0 when the opposite decision is impossible or gains value). threshold_value is, for an
    initiative left out, the value score it would need to tie its way in; for one in the plan,
    the value score it could drop to before an equally good plan without it exists (0 or
    below: it stays at any value score, as work that needs it carries it); None for
    pinned, ruled-out and impossible cases. constraint_cost is, for pinned and ruled-out
    initiatives, how much value that mark costs the plan (0.0 when it costs nothing).
    """

    key: str
    chosen: bool
    value_if_in: float | None
    value_if_out: float | None
    regret: float
    threshold_value: float | None
    displaces: tuple[str, ...]  # out: chosen keys that leave if forced in; in: keys that enter
    reason: str
    constraint_cost: float | None = None
    # The other side of that change: out: keys that would come in with it (what it needs, or a
    # better mix); in: chosen keys that would leave with it (what needs it, or a new mix).
    moves_with: tuple[str, ...] = ()


@dataclass(frozen=True)
class Curve:
    """Best reachable plan value for every capacity, one point per resolution step.

    Points below the pinned work are omitted because no plan fits there, so the first point is
    the pinned work rounded to the resolution (0 when nothing is pinned).
    """

    capacity_days: tuple[float, ...]
    values: tuple[float, ...]


@dataclass(frozen=True)
class Selection:
    """The selector's answer for one team: the chosen set, its totals, and how it was found.

    When feasible is False (pinned work alone exceeds the capacity), chosen holds the pinned
    work, headroom is negative, and infeasibility and excess_days say by how much it overruns.
    """

    feasible: bool
    chosen: tuple[str, ...]  # keys in input order
    value: float
    effort: float  # real (unrounded) days of the chosen items
    capacity: float
    headroom: float  # capacity - effort
    method: str
    method_note: str
    infeasibility: str | None
    excess_days: float | None
    rounding: Rounding
    curve: Curve | None
    explanations: tuple[Explanation, ...] | None  # input order
    cells: int  # dynamic-programming cells evaluated
    forced_by_needs: tuple[str, ...] = ()  # keys in the plan because pinned work needs them


@dataclass(frozen=True)
class JointItem:
    """A cross-team initiative: effort per team (teams not listed spend nothing on it)."""

    key: str
    efforts: Mapping[str, float]
    value: float
    pinned: bool = False
    ruled_out: bool = False
    needs: tuple[str, ...] = ()
    either_or: str | None = None


@dataclass(frozen=True)
class JointSelection:
    """The selector's answer for several teams sharing cross-team initiatives."""

    feasible: bool
    chosen: tuple[str, ...]
    value: float
    effort: dict[str, float]
    capacity: dict[str, float]
    headroom: dict[str, float]
    method: str
    method_note: str
    infeasibility: str | None
    excess_days: dict[str, float] = field(default_factory=dict)  # per overrun team
