"""Plain-data results of the one-crew route engine."""
from __future__ import annotations

from dataclasses import asdict, dataclass, field

import numpy as np

# Turn kinds at the start of a traversal. "start" for the first traversal out of
# the depot; "unknown" where the network has no geometry to tell.
TURNS = ("start", "straight", "with_traffic", "across_traffic", "u_turn", "unknown")


@dataclass(frozen=True)
class Traversal:
    """One drive along one segment, in one direction."""

    segment: int
    from_node: int
    to_node: int
    service: bool  # True: does the work (serves one pass); False: deadhead
    metres: float
    minutes: float  # driving or service minutes, without the turn
    turn: str = "start"  # the turn made onto this segment, one of TURNS
    turn_minutes: float = 0.0
    wait_minutes: float = 0.0  # waiting before this drive (a posted window not yet open)


@dataclass(frozen=True)
class Augmentation:
    """What an Eulerization added, and what it cost.

    ``arcs``: indices into the deadhead arc arrays, one per added traversal
    (repeats allowed). ``orientation``: for each undirected task, True when it is
    driven from its ``tail`` to its ``head``. ``cost``: minutes of the added
    deadhead. ``lower_bound``: a proven lower bound on the least possible added
    cost (equal to ``cost`` when ``exact``).
    """

    arcs: np.ndarray
    orientation: np.ndarray
    cost: float
    lower_bound: float
    method: str
    exact: bool


@dataclass(frozen=True)
class RouteTotals:
    service_km: float
    service_min: float
    deadhead_km: float
    deadhead_min: float
    turn_min: float
    total_min: float
    u_turns: int
    across_turns: int
    wait_min: float = 0.0  # waiting for posted windows to open; part of total_min
    visit_min: float = 0.0  # minutes at intermediate facilities (stays and waits for opening); part of total_min

    @staticmethod
    def of(traversals: tuple[Traversal, ...] | list[Traversal], visit_min: float = 0.0) -> "RouteTotals":
        s_km = sum(t.metres for t in traversals if t.service) / 1000.0
        d_km = sum(t.metres for t in traversals if not t.service) / 1000.0
        s_min = sum(t.minutes for t in traversals if t.service)
        d_min = sum(t.minutes for t in traversals if not t.service)
        t_min = sum(t.turn_minutes for t in traversals)
        w_min = sum(t.wait_minutes for t in traversals)
        return RouteTotals(
            service_km=s_km, service_min=s_min, deadhead_km=d_km, deadhead_min=d_min,
            turn_min=t_min, total_min=s_min + d_min + t_min + w_min + visit_min,
            u_turns=sum(t.turn == "u_turn" for t in traversals),
            across_turns=sum(t.turn == "across_traffic" for t in traversals), wait_min=w_min,
            visit_min=float(visit_min))


@dataclass(frozen=True)
class Visit:
    """A stop at an intermediate facility, between two traversals of a route.

    ``after``: how many traversals of the route are driven before the stop (the vehicle
    is at the end node of traversal ``after - 1``, which is the facility's ``node``).
    ``arrive_min``: the clock time of arrival; the vehicle waits ``wait_min`` for the
    facility to open, then stays ``minutes``; ``resets`` names the capacities reset.
    """

    after: int
    facility: str
    node: int
    arrive_min: float
    wait_min: float
    minutes: float
    resets: tuple[str, ...]


@dataclass(frozen=True)
class Route:
    """A closed walk from ``depot`` serving every required pass it was given.

    ``lower_bound_min``: a proven lower bound on the total minutes of any route
    serving the same passes from the same depot (service, deadhead and the
    turns every served arrival forces, see :func:`crewcut.solve.postman.bounds.turn_lower_bound`);
    ``gap = total_min / lower_bound_min - 1``. In a cycle plan ``day`` is the cycle day the
    route is driven on and ``start_min`` its clock start (minutes after midnight); both are
    None for a route without a calendar.
    """

    depot: int
    traversals: tuple[Traversal, ...]
    totals: RouteTotals
    method: str
    exact: bool
    lower_bound_min: float
    stats: dict = field(default_factory=dict)
    day: str | None = None
    start_min: float | None = None
    visits: tuple[Visit, ...] = ()  # facility stops (trips); empty for a route without capacities

    @property
    def gap(self) -> float:
        lb = self.lower_bound_min
        return 0.0 if lb <= 0 else self.totals.total_min / lb - 1.0

    def to_dict(self) -> dict:
        return asdict(self)
