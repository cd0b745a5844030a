"""Planning a fleet: territories, routes, balance, lower bound, the plan document.

Problem
-------
Serve every required pass of a street network with k crews, each on one closed
route from its own depot, every segment served by exactly one crew, territories
connected; minimise the longest shift (as a share of each crew's shift limit),
then the spread. This is the min-max k-postman problem with depots, NP-hard
(Frederickson, Hecht and Kim 1978); the result is a heuristic plan with a proven
lower bound on the longest shift and the gap to it, never a claim of optimality.

Method (cluster first, route second, then local search)
------
1. :mod:`crewcut.fleet.seeding`: weighted k-means seeds, anchored at the depots;
2. :mod:`crewcut.fleet.territories`: connected territories grown by estimated work,
   then border runs moved where that cuts the turns a border forces;
3. :mod:`crewcut.fleet.executor`: one rural postman route per territory
   (:func:`crewcut.solve.route.plan_route`), in parallel;
4. :mod:`crewcut.fleet.balancer`: boundary moves and swaps re-routed exactly;
5. :func:`crewcut.solve.postman.bounds.fleet_lower_bound`: max(a bound on all crews' minutes
   together / k, the longest depot -> pass -> depot round trip), after Ahr and
   Reinelt (2006); steps 3 to 5 and the plan are :mod:`crewcut.fleet.assemble`,
   shared with the replan.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from crewcut.solve.errors import InputError
from crewcut.solve.seeds import check_seed
from crewcut.solve.network.model import Network
from crewcut.solve.network.scope import ServiceScope, run_scope
from crewcut.solve.readers.area import ServiceArea
from crewcut.solve.profile import Crew, Profile
from crewcut.solve.circuits.turns import TurnModel

from crewcut.fleet.assemble import finish_plan, route_and_balance
from crewcut.solve.trips.checks import check_trips
from crewcut.fleet.executor import LocalRouter, Router, check_workers
from crewcut.fleet.progress import ProgressFn, with_log
from crewcut.fleet.seeding import seed_territories
from crewcut.fleet.streets import StreetGraph, build_street_graph, depot_travel, round_trips
from crewcut.fleet.territories import BorderTurns, describe_segment, grow_territories, polish_borders, smooth_boundaries
from crewcut.plans.model import BalanceLimits, Plan, RunOptions, recorded_crew


def plan_fleet(net: Network, profile: Profile, crews: list[Crew], *, seed: int = 0,
               workers: int | None = None, time_limit_s: float | None = None, tolerance: float = 0.003,
               max_iterations: int = 500, route_time_limit_s: float = 10.0,
               progress: ProgressFn | None = None, router: Router | None = None,
               source: str = "", area: ServiceArea | None = None, unservable: str | None = None) -> Plan:
    """Plan territories and routes for ``crews``; returns the plan.

    Parameters
    ----------
    net, profile: the street network and the work profile.
    crews: from :func:`crewcut.fleet.crews.resolve_crews` (each with its ``depot_node`` set).
    seed: seeds k-means and every route; same input and seed give the same plan
        (unless the balancer stops on ``time_limit_s``, which the summary says).
    workers: processes for routing (default: all cores); does not change the plan.
    time_limit_s: wall-clock limit of the balancer (None: none; the iteration limit is the deterministic stop).
    tolerance: the balancer stops when longest / mean share of shift limit <= 1 + tolerance.
    max_iterations: the balancer's iteration limit.
    router: a :class:`crewcut.fleet.executor.Router` to use instead of a local pool.
    progress: ``progress(description, done, total)`` callback; the library prints nothing.
    area: the service area (default: the profile's ``service_area`` file, else every street).
    unservable: ``"leave_out"`` or ``"refuse"`` for streets no closed route from a depot can
        serve (default: the profile's); see :mod:`crewcut.solve.network.scope`. Left-out
        streets are listed in the plan's ``left_out`` with their reasons.
    """
    plan_checks(crews, seed, time_limit_s, tolerance, max_iterations)
    check_workers(workers)
    check_trips(net, profile, [int(c.depot_node) for c in crews], [float(c.shift_limit_min) for c in crews],
                None)
    report = _progress(progress)
    lay = lay_out_territories(net, profile, crews, seed=seed, progress=report, area=area, unservable=unservable)
    net, sg, eligible, owner, border, scope = lay.net, lay.sg, lay.eligible, lay.owner, lay.border, lay.scope
    own_router = router is None
    if own_router:
        router = LocalRouter(net, profile, workers=workers, time_limit_s=route_time_limit_s)
    try:
        state, bal = route_and_balance(router, sg, eligible, crews, owner, seed=seed, tolerance=tolerance,
                                       max_iterations=max_iterations, time_limit_s=time_limit_s,
                                       progress=report, border=border)
    finally:
        if own_router:
            router.close()
    options = RunOptions(seed=int(seed), crews=tuple(recorded_crew(c) for c in crews),
                         balance=BalanceLimits(float(tolerance), int(max_iterations),
                                               None if time_limit_s is None else float(time_limit_s)),
                         route_time_limit_s=float(route_time_limit_s), unservable=scope.unservable,
                         area=scope.area)
    return finish_plan(net, profile, crews, state, bal, options=options, source=source, progress=report,
                       left_out=scope.left_out)


@dataclass(frozen=True)
class Layout:
    """Territories before routing: the network in scope, its street graph, who may serve what, the owners."""

    net: Network
    sg: StreetGraph
    eligible: np.ndarray  # (k, m) bool
    owner: np.ndarray  # (m,) crew index per segment, -1: no service
    border: BorderTurns
    scope: ServiceScope


@dataclass(frozen=True)
class Reach:
    """What every layout starts from: the scope, the network in scope, its street graph, who can reach what."""

    net: Network
    sg: StreetGraph
    eligible: np.ndarray  # (k, m) bool
    round_trip_min: np.ndarray  # (k, m) depot -> segment -> depot minutes
    scope: ServiceScope


def crews_reach(net: Network, profile: Profile, crews: list[Crew], *, area: ServiceArea | None = None,
                unservable: str | None = None, allowed: np.ndarray | None = None) -> Reach:
    """The scope, the street graph and which crew may serve which segment (checked: every one by some crew).

    ``allowed``: optional (k, m) bool, False where a crew may not serve a segment whatever its reach
    (a street posted for a day the crew does not work); None: every crew may serve every segment.
    """
    scope = run_scope(net, profile, [int(c.depot_node) for c in crews], area, unservable)
    net = scope.network
    sg = build_street_graph(net, profile)
    if not sg.required.any():
        raise InputError("the network has no segment that needs service under this profile",
                         "check the profile's default_service per road class and the data's service tags")
    depots = [int(c.depot_node) for c in crews]
    uniq = sorted(set(depots))
    out, back = depot_travel(net, profile, uniq)
    rt_depot = round_trips(net, sg, out, back)
    row = np.array([uniq.index(d) for d in depots])
    rt = rt_depot[row]  # (k, m)
    eligible = np.isfinite(rt)
    if allowed is not None:
        eligible &= allowed
    _check_reach(net, sg, crews, eligible, rt)
    return Reach(net, sg, eligible, rt, scope)


def lay_out_territories(net: Network, profile: Profile, crews: list[Crew], *, seed: int = 0,
                        progress: ProgressFn | None = None, area: ServiceArea | None = None,
                        unservable: str | None = None, allowed: np.ndarray | None = None) -> Layout:
    """Steps 1 and 2 of the module's method: the scope, seeds, connected territories, polished borders.

    ``allowed``: as for :func:`crews_reach`.
    """
    report = _progress(progress)
    r = crews_reach(net, profile, crews, area=area, unservable=unservable, allowed=allowed)
    net, sg, eligible, rt = r.net, r.sg, r.eligible, r.round_trip_min
    depots = [int(c.depot_node) for c in crews]
    report("territories", 0, 1)
    depot_xy = np.stack([net.node_x[depots], net.node_y[depots]], axis=1)
    centres, seeds = seed_territories(sg, depot_xy, eligible, seed=seed)
    approach = np.array([rt[c, s] - sg.service_min[s] if s >= 0 else 0.0 for c, s in enumerate(seeds)])
    owner = grow_territories(net, sg, centres, seeds, eligible, approach)
    smooth_boundaries(net, sg, owner, eligible)
    border = BorderTurns(net, sg, TurnModel.from_network(net, profile))
    polish_borders(net, sg, owner, eligible, border)
    report("territories", 1, 1)
    return Layout(net, sg, eligible, owner, border, r.scope)


def plan_checks(crews, seed, time_limit_s, tolerance, max_iterations) -> None:
    """The up-front checks of a fleet plan's parameters (InputError naming the parameter)."""
    if not crews:
        raise InputError("no crews to plan for", "give crews (`k` and `depot_lonlat`, or [[crews]] in the config)")
    check_seed(seed)
    if time_limit_s is not None and not (isinstance(time_limit_s, (int, float)) and math.isfinite(time_limit_s)
                                         and time_limit_s >= 0):
        raise InputError(f"`time_limit_s` is {time_limit_s!r}", "give the seconds the balancer may use, 0 or more",
                         param="time_limit_s")
    if not (0 <= tolerance < 1):
        raise InputError(f"balance tolerance {tolerance!r} is outside [0, 1)", "e.g. 0.01 for 1 %")
    if max_iterations < 0:
        raise InputError(f"balance iteration limit {max_iterations!r} is negative", "give 0 or more")


def _check_reach(net: Network, sg, crews: list[Crew], eligible: np.ndarray, rt: np.ndarray) -> None:
    req = sg.required
    cut = np.flatnonzero(req & ~eligible.any(axis=0))
    if cut.size:
        where = sorted({int(c.depot_node) for c in crews})
        raise InputError(
            f"{cut.size} segment(s) that need service cannot be reached from any depot and back "
            f"(depot node(s) {', '.join(map(str, where))}): {describe_segment(net, cut)}",
            "closed or one-way streets cut them off; open a street that joins them, set their service "
            "to none, or place a depot where it can reach them")
    limits = np.array([c.shift_limit_min for c in crews], float)
    fits = (rt <= limits[:, None]) & eligible
    bad = np.flatnonzero(req & ~fits.any(axis=0))
    if bad.size:
        s = int(bad[0])
        best = float(rt[:, s].min())
        raise InputError(
            f"no route can meet the shift limit: serving segment {s} ('{net.seg_source[s]}') from the nearest "
            f"depot and driving back takes {best:,.1f} min, more than the crews' limit of "
            f"{limits.max():,.0f} min ({bad.size} segment(s) affected: {describe_segment(net, bad)})",
            "raise shift_limit_min, or add a crew with a depot nearer to these streets")


def _progress(progress: ProgressFn | None) -> ProgressFn:
    return with_log(progress)
