"""The plan in memory: frozen dataclasses for every section of a plan file.

A :class:`Plan` holds what a plan file records (README, "The plan file"), with
the values exactly as the file records them: numbers rounded to the file's fixed
decimals, crews' depots as node ids. So a plan made in memory and the same plan
read back from its file are equal, and every consumer (``verify``, the replan,
the reports) gets the same answer from either. JSON appears only at the file's
edge (:mod:`crewcut.plans.planfile`); producers build a plan with
:func:`crewcut.plans.planfile.build_plan`, which quantises it as the file would.

The engine's :class:`crewcut.solve.result.Route` is kept as it is: a crew plan
holds its routes as ``Route`` values (their ``stats`` are not part of a plan and
are empty). Route ids in the file are ``route-1``, ``route-2``, ... by position.
"""
from __future__ import annotations

from dataclasses import dataclass

from crewcut.solve.calendar.cycle import Cycle
from crewcut.solve.calendar.postings import Posting
from crewcut.solve.network.scope import LeftOutStreet
from crewcut.solve.profile import Crew, Profile
from crewcut.solve.readers.area import ServiceArea
from crewcut.solve.result import Route

FORMAT = "crewcut-plan"
VERSION = 1


def route_id(i: int) -> str:
    """The file's id of a crew's ``i``-th route (0-based): ``route-1``, ``route-2``, ..."""
    return f"route-{i + 1}"


# ------------------------------------------------------------------ network
@dataclass(frozen=True)
class NodeRecord:
    """A node of the plan's network; ``lon``/``lat`` are None when the network has no geometry."""

    id: int
    lon: float | None
    lat: float | None
    label: str


@dataclass(frozen=True)
class SegmentPasses:
    """Required passes of a segment: forwards, backwards, and in either direction."""

    forward: int
    backward: int
    either: int

    @property
    def total(self) -> int:
        return self.forward + self.backward + self.either


@dataclass(frozen=True)
class PostedRecord:
    """A segment's posted sweeping time as the plan file records it: the day label and ``HH:MM-HH:MM`` or ``""``."""

    day: str
    window: str = ""

    @classmethod
    def of(cls, posting: Posting | None) -> "PostedRecord | None":
        """The record of a :class:`~crewcut.solve.calendar.postings.Posting` (None for None)."""
        return None if posting is None else cls(posting.day, posting.window_text())


@dataclass(frozen=True)
class SegmentRecord:
    """A segment of the plan's network with its required passes, minutes and geometry.

    ``from_node``/``to_node`` are the file's ``from``/``to``, ``road_class`` its ``class``;
    ``coords`` are ``(lon, lat)`` pairs, or None without geometry; ``posted`` is the
    segment's posted sweeping time, or None (the file then has no ``posted`` key).
    """

    id: int
    source_id: str
    from_node: int
    to_node: int
    length_m: float
    oneway: bool
    closed: bool
    name: str
    road_class: str
    service: str
    passes: SegmentPasses
    service_min: float
    deadhead_min: float
    coords: tuple[tuple[float, float], ...] | None
    posted: PostedRecord | None = None


@dataclass(frozen=True)
class PlanNetwork:
    """The network a plan was made on: fingerprint, source file, projection origin, nodes and segments."""

    fingerprint: str
    source: str
    has_geometry: bool
    origin: tuple[float, float]
    nodes: tuple[NodeRecord, ...]
    segments: tuple[SegmentRecord, ...]


# ------------------------------------------------------------------ settings
def recorded_crew(crew: Crew) -> Crew:
    """The crew as a plan records it: id, depot node, shift limit in minutes and days off (no lon/lat depot)."""
    return Crew(crew.id, float(crew.shift_limit_min), None, None if crew.depot_node is None else int(crew.depot_node),
                tuple(crew.days_off))


def recorded_profile(profile: Profile) -> Profile:
    """The profile as a plan records it: its recorded fields (``Profile.to_dict``) on the built-in defaults.

    The config's crews, source file, service area and unservable policy are not part of the
    recorded profile (the run options record the last two).
    """
    return profile.with_recorded(Profile())


@dataclass(frozen=True)
class BalanceLimits:
    """The balancer's stops in a fresh plan: tolerance, iteration limit, wall-clock limit (None: none)."""

    tolerance: float
    max_iterations: int
    time_limit_s: float | None


@dataclass(frozen=True)
class ReplanLimits:
    """A replan's own settings: stability weight, overflow mode, and the balancer's stops."""

    stability: float
    overflow: str | None
    tolerance: float
    time_limit_s: float | None
    max_iterations: int


@dataclass(frozen=True)
class RunOptions:
    """The options of the command that made a plan (None: not recorded by that command).

    ``plan`` records ``seed``, ``crews`` (each with its depot node and shift limit),
    ``balance`` and ``route_time_limit_s``; ``route`` records ``command``,
    ``depot_node``, ``seed`` and ``turn_aware``; a replan keeps its parent's options
    and sets ``seed``, ``crews``, ``rebalance`` and ``route_time_limit_s``. Both
    record ``unservable`` (the policy for streets no closed route can serve,
    :mod:`crewcut.solve.network.scope`) and ``area`` (the service area, None: every street).
    """

    seed: int | None = None
    crews: tuple[Crew, ...] | None = None
    balance: BalanceLimits | None = None
    route_time_limit_s: float | None = None
    rebalance: ReplanLimits | None = None
    command: str | None = None
    depot_node: int | None = None
    turn_aware: bool | None = None
    unservable: str | None = None
    area: ServiceArea | None = None
    cycle: Cycle | None = None  # cycle plans: the working days and the shift start


@dataclass(frozen=True)
class PlanSettings:
    """What a plan was made with: the work profile (:func:`recorded_profile`) and the run options."""

    profile: Profile
    options: RunOptions = RunOptions()


# ------------------------------------------------------------------ crews
@dataclass(frozen=True)
class CrewPlan:
    """One crew in a plan: the crew, its territory (segment ids, ascending) and its routes.

    ``crew`` is the crew as the plan records it: its depot is a node
    (``crew.depot_node``; ``crew.depot_lonlat`` is None, the node's position is
    in the network) and its shift limit is in minutes.
    """

    crew: Crew
    territory: tuple[int, ...]
    routes: tuple[Route, ...] = ()

    @property
    def id(self) -> str:
        return self.crew.id

    @property
    def depot_node(self) -> int:
        return int(self.crew.depot_node)

    @property
    def shift_limit_min(self) -> float:
        return float(self.crew.shift_limit_min)

    @property
    def shift_min(self) -> float:
        """The crew's shift: the sum of its routes' totals (in a cycle plan, the whole cycle's work)."""
        return sum(r.totals.total_min for r in self.routes)

    @property
    def longest_day_min(self) -> float:
        """The longest of its routes (a cycle plan's longest day; 0 without routes)."""
        return max((r.totals.total_min for r in self.routes), default=0.0)


# ------------------------------------------------------------------ summary
@dataclass(frozen=True)
class OverLimit:
    """A crew whose shift exceeds its limit, by ``over_min`` minutes."""

    crew: str
    shift_min: float
    limit_min: float
    over_min: float
    day: str | None = None  # cycle plans: the day whose route is over the limit


@dataclass(frozen=True)
class BalanceOutcome:
    """What the balancer did (:class:`crewcut.fleet.balancer.BalanceReport` without its wall time)."""

    before_longest_min: float
    before_mean_min: float
    after_longest_min: float
    after_mean_min: float
    iterations: int
    moves_kept: int
    swaps_kept: int
    trials: int
    territories_routed: int
    segments_moved: int
    stop: str


@dataclass(frozen=True)
class FleetSummary:
    """Figures about a fleet plan (``plan`` and ``rebalance``).

    ``gap``: longest shift over the lower bound, minus one. ``crews_needed_estimate``:
    see :func:`crewcut.fleet.assemble.crews_needed`. ``deferred_segments`` and
    ``deferred_min`` are set when a replan deferred streets to another day.
    """

    crews: int
    longest_min: float
    mean_min: float
    shortest_min: float
    longest_over_mean: float
    lower_bound_min: float
    gap: float
    total_shift_min: float
    service_min: float
    deadhead_min: float
    deadhead_pct: float
    over_limit: tuple[OverLimit, ...]
    crews_needed_estimate: int
    method: str
    balance: BalanceOutcome | None = None
    deferred_segments: int | None = None
    deferred_min: float | None = None
    # cycle plans: routes planned (one per crew and working day), the worst crew's longest
    # day over its mean day, and passes served outside their posted window
    crew_days: int | None = None
    day_balance: float | None = None
    window_misses: int | None = None


@dataclass(frozen=True)
class RouteSummary:
    """Figures about a one-crew plan (``route``): the route's total, bound and gap, and its turns
    against the plain circuit's (None when the engine did not compare)."""

    crews: int
    total_min: float
    lower_bound_min: float
    gap: float
    exact: bool
    method: str
    u_turns: int
    across_turns: int
    plain_u_turns: int | None
    plain_across_turns: int | None


# ------------------------------------------------------------------ history, deferred
@dataclass(frozen=True)
class Change:
    """One of the day's changes a replan was made for.

    ``kind`` is ``absent`` (``crew``), ``extra_crew`` (``crew``, ``lon``, ``lat``,
    ``depot_node``), ``shift_limit`` (``crew``, ``from_min``, ``to_min``),
    ``closed`` or ``added_streets`` (``segments``, ``features``); the other
    fields stay at their defaults.
    """

    kind: str
    crew: str | None = None
    lon: float | None = None
    lat: float | None = None
    depot_node: int | None = None
    from_min: float | None = None
    to_min: float | None = None
    segments: tuple[int, ...] = ()
    features: tuple[str, ...] = ()
    day: str | None = None  # cycle plans: the day the change is for (only that day's routes changed)


CHANGE_FIELDS: dict[str, tuple[str, ...]] = {
    "absent": ("crew",),
    "extra_crew": ("crew", "lon", "lat", "depot_node"),
    "shift_limit": ("crew", "from_min", "to_min"),
    "closed": ("segments", "features"),
    "added_streets": ("segments", "features"),
}


@dataclass(frozen=True)
class History:
    """Where a plan came from. A fresh plan has no parent and no changes (``generation`` None).

    A replanned one names its parent plan file (SHA-256 and path), the parent's
    network fingerprint, its generation and lineage (every ancestor's SHA-256),
    the changes, and the replan's stability weight and overflow mode.
    """

    parent: str | None = None
    changes: tuple[Change, ...] = ()
    parent_path: str | None = None
    parent_fingerprint: str | None = None
    generation: int | None = None
    lineage: tuple[str, ...] = ()
    stability: float | None = None
    overflow: str | None = None


@dataclass(frozen=True)
class DeferredSegment:
    """A street left for another day by a replan with ``overflow="defer"``; no crew holds it."""

    segment: int
    source_id: str
    name: str
    road_class: str
    priority: int
    crew: str
    work_min: float
    length_m: float


# ------------------------------------------------------------------ the plan
@dataclass(frozen=True)
class Plan:
    """A whole plan (format ``crewcut-plan``, version 1, implied).

    ``summary`` is None when the producer recorded none (the file's ``{}``);
    ``deferred`` is None when the plan has no defer list (a replan with
    ``overflow="defer"`` always has one, possibly empty). ``left_out``: the streets
    that need service but no crew serves, each with its reason (None: a plan made
    before such lists were kept).
    """

    settings: PlanSettings
    network: PlanNetwork
    crews: tuple[CrewPlan, ...]
    summary: FleetSummary | RouteSummary | None = None
    history: History = History()
    deferred: tuple[DeferredSegment, ...] | None = None
    left_out: tuple[LeftOutStreet, ...] | None = None

    def crew_ids(self) -> list[str]:
        return [c.id for c in self.crews]

    def crew(self, crew_id: str) -> CrewPlan | None:
        """The crew with this id, or None."""
        return next((c for c in self.crews if c.id == crew_id), None)
