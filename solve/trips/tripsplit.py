"""A closed route split into trips: facility visits wherever a capacity would run over.

Problem
-------
A crew's closed route (:func:`crewcut.solve.route.plan_route`) serves its passes in
one order. Its vehicle has capacities (:mod:`crewcut.solve.trips.config`) that
service uses up; facilities reset them. Break the route off where needed (drive
by the least-minute legal path to a facility, or to two in a row, stay, drive
back to where the next pass starts) so that no capacity is ever exceeded, every
visit is inside its facility's opening hours, and the capacities marked
``end_empty`` are reset before the depot, at the least added minutes.

Method
------
Route first, split second: the pass order is kept and the cut points are chosen
by the exact dynamic programme of :func:`crewcut.solve.trips.split.split_sequence`.
The split is optimal over cut points and facilities *for that fixed order* in
drive, stay and waiting minutes; the order is the engine's (heuristic) circuit,
and the turns at the new joins are classified afterwards, not optimised. Clock
times for opening hours are checked with room for the worst turn at every
step, so the route as driven is inside the hours.

Reference
---------
Beasley (1983); Lacomme, Prins and Ramdane-Chérif (2001); Ghiani, Improta and
Laporte (2001) (see :mod:`crewcut.solve.trips.split`).
"""
from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from crewcut.solve.calendar.postings import clock
from crewcut.solve.circuits.bans import BanTable
from crewcut.solve.circuits.turns import TurnModel, turns_along_walk
from crewcut.solve.errors import InputError
from crewcut.solve.network.model import Network
from crewcut.solve.profile import Profile
from crewcut.solve.result import Route, RouteTotals, Traversal, Visit
from crewcut.solve.trips.loads import pass_demand
from crewcut.solve.trips.place import PlacedFacility, TripPaths
from crewcut.solve.trips.split import CutOption, split_sequence

_CACHE: dict = {}


def trip_paths(net: Network, profile: Profile, depot: int, placed: tuple[PlacedFacility, ...]) -> TripPaths:
    """The path tables of a depot, kept for the last few asked for in this process."""
    key = (id(net), id(profile), int(depot))
    hit = _CACHE.get(key)
    if hit is None or hit[0] is not net:
        if len(_CACHE) >= 8:
            _CACHE.pop(next(iter(_CACHE)))
        hit = _CACHE[key] = (net, TripPaths(net, profile, depot, placed))
    return hit[1]


def _options(paths: TripPaths, placed, masks, x: int, y: int, turn_max: float) -> list[CutOption]:
    out = []
    nf = len(placed)
    for f in range(nf):
        a, b = paths.d_to[f, x], paths.d_from[f, y]
        if np.isfinite(a) and np.isfinite(b):
            hops = int(paths.hops_to[f, x] + paths.hops_from[f, y])
            out.append(CutOption((f,), (float(a), float(b)), masks[f], turn_max * (hops + 1)))
    for f in range(nf):
        for g in range(nf):
            if f == g or (masks[g] | masks[f]) in (masks[f], masks[g]):
                continue  # a second facility only when it resets something the first does not
            a, mid, b = paths.d_to[f, x], paths.d_from[f, paths.nodes[g]], paths.d_from[g, y]
            if np.isfinite(a) and np.isfinite(mid) and np.isfinite(b):
                hops = int(paths.hops_to[f, x] + paths.hops_from[f, paths.nodes[g]] + paths.hops_from[g, y])
                out.append(CutOption((f, g), (float(a), float(mid), float(b)), masks[f] | masks[g],
                                     turn_max * (hops + 1)))
    return out


def split_route(net: Network, profile: Profile, route: Route, placed: tuple[PlacedFacility, ...],
                start_min: float) -> Route:
    """``route`` with facility visits (:class:`crewcut.solve.result.Visit`) where its capacities call for them.

    Parameters
    ----------
    net, profile: the network and the work profile with its ``capacities``.
    route: a closed route from its depot (waits, if any, are kept where they are).
    placed: the facilities on their nodes (:func:`crewcut.solve.trips.place.place_facilities`).
    start_min: the route's clock start (minutes after midnight) for opening hours.

    Returns the route with ``visits`` and its totals (``visit_min``); ``stats`` gain
    ``trips``, ``trip_added_min`` (the split's objective) and ``trip_lower_bound_min``.
    Raises :class:`InputError` when one pass needs more than a capacity holds, or no
    split meets the facilities' hours.
    """
    caps = profile.capacities
    tr = list(route.traversals)
    svc = [i for i, t in enumerate(tr) if t.service]
    if not caps or not svc:
        return route
    names = [c.name for c in caps]
    sseg = np.array([tr[i].segment for i in svc], np.int64)
    demand = pass_demand(net, caps, sseg)
    limits = np.array([c.limit for c in caps])
    over = np.argwhere(demand > limits * (1 + 1e-9))
    if over.size:
        k, c = (int(v) for v in over[0])
        s = int(sseg[k])
        raise InputError(f"capacity.{names[c]}: one pass of segment {s} ('{net.seg_source[s]}') needs "
                         f"{demand[k, c]:.4g} {caps[c].unit}, more than the limit {caps[c].limit:g}",
                         f"raise capacity.{names[c]}.limit, lower its per_km, or split the street in the data")
    end_mask = sum(1 << c for c, cap in enumerate(caps) if cap.end_empty)
    masks = [sum(1 << names.index(r) for r in p.facility.resets) for p in placed]
    paths = trip_paths(net, profile, route.depot, placed)
    model = TurnModel.from_network(net, profile)
    turn_max = float(max(profile.turn_penalty_s.values())) / 60.0
    m = len(svc)
    step = np.array([t.wait_minutes + t.turn_minutes + t.minutes for t in tr])
    clock_end = float(start_min) + np.cumsum(step)
    leave = clock_end[np.array(svc)]
    gap = np.zeros(m)
    options = []
    for k in range(m):
        lo, hi = svc[k] + 1, (svc[k + 1] if k + 1 < m else len(tr))
        gap[k] = float(step[lo:hi].sum())
        y = tr[svc[k + 1]].from_node if k + 1 < m else route.depot
        options.append(_options(paths, placed, masks, tr[svc[k]].to_node, y, turn_max))
    fmin = [p.facility.minutes for p in placed]
    fopen = [p.facility.open_min for p in placed]
    fclose = [p.facility.close_min for p in placed]
    res = split_sequence(demand, limits, end_mask, gap, leave, options, fmin, fopen, fclose)
    if res is None:
        raise InputError(f"route from depot node {route.depot}: no split into trips keeps every capacity within its "
                         "limit with the facilities open when the route reaches them (the route alone takes "
                         f"{route.totals.total_min / 60:.1f} h from {clock(start_min)}; facility hours are one "
                         "interval within the day)",
                         "widen the facilities' hours, add a facility nearer the streets, or raise the capacities")
    cut_at = {c.after: c for c in res.cuts}
    out: list[Traversal] = tr[:svc[0] + 1]
    visits: list[Visit] = []
    for k in range(m):
        lo, hi = svc[k] + 1, (svc[k + 1] if k + 1 < m else len(tr))
        cut = cut_at.get(k)
        if cut is None:
            out.extend(tr[lo:hi])
        else:
            fs = cut.option.facilities
            out.extend(paths.to_facility(fs[0], out[-1].to_node))
            for j, f in enumerate(fs):
                visits.append(Visit(len(out), placed[f].facility.id, placed[f].node, 0.0, 0.0,
                                    placed[f].facility.minutes, placed[f].facility.resets))
                nxt = placed[fs[j + 1]].node if j + 1 < len(fs) else (
                    tr[svc[k + 1]].from_node if k + 1 < m else route.depot)
                out.extend(paths.from_facility(f, nxt))
        if k + 1 < m:
            out.append(tr[svc[k + 1]])
    out = turns_along_walk(net, model, out)
    visits = _clock_visits(out, visits, placed, start_min)
    bans = BanTable.of(net)
    if bans is not None and _forbidden(net, bans, out, route.depot):
        raise InputError(f"route from depot node {route.depot}: a trip to a facility would make a forbidden turn",
                         "trips with turn restrictions are not supported yet: plan without [[facilities]], or "
                         "move the facility")
    visit_min = sum(v.wait_min + v.minutes for v in visits)
    totals = RouteTotals.of(out, visit_min)
    stats = dict(route.stats)
    stats.update(trips=1 + sum(c.after < m - 1 for c in res.cuts), visits=len(visits),
                 trip_added_min=res.added_min, trip_labels=res.labels,
                 trip_lower_bound_min=trip_lower_bound(route.lower_bound_min, demand, caps, placed))
    return replace(route, traversals=tuple(out), totals=totals, visits=tuple(visits), stats=stats,
                   method=f"{route.method}; trips split exactly over cut points for this order",
                   exact=False)


def trip_lower_bound(postman_lb: float, demand: np.ndarray, caps, placed) -> float:
    """The postman bound plus the stays no route can avoid.

    Capacity ``c`` with total demand ``D`` and limit ``Q`` needs at least
    ``ceil(D/Q) - 1`` resets (``ceil(D/Q)`` when it must end empty); one visit may
    reset several capacities, so the largest count over capacities, times the shortest
    stay among facilities, is added. Drive minutes to facilities are not counted (a
    facility may lie on the route), which keeps the bound valid.
    """
    need = 0
    for c, cap in enumerate(caps):
        n = math.ceil(float(demand[:, c].sum()) / cap.limit - 1e-9)
        need = max(need, n if cap.end_empty else max(0, n - 1))
    stay = min((p.facility.minutes for p in placed), default=0.0)
    return float(postman_lb) + need * stay



def _clock_visits(walk: list[Traversal], visits: list[Visit], placed, start_min: float) -> list[Visit]:
    by_id = {p.facility.id: p.facility for p in placed}
    out = []
    t = float(start_min)
    vi = 0
    for i in range(len(walk) + 1):
        while vi < len(visits) and visits[vi].after == i:
            f = by_id[visits[vi].facility]
            wait = max(0.0, f.open_min - t)
            if t + wait + f.minutes > f.close_min + 1e-6:  # the planner's clock is kept on the safe side
                raise InputError(f"facility '{f.id}' would be reached at {t:.1f} min, too late for its hours "
                                 f"{f.hours}", "widen its hours")
            out.append(replace(visits[vi], arrive_min=t, wait_min=wait))
            t += wait + f.minutes
            vi += 1
        if i < len(walk):
            t += walk[i].wait_minutes + walk[i].turn_minutes + walk[i].minutes
    return out


def _forbidden(net: Network, bans: BanTable, walk: list[Traversal], depot: int) -> bool:
    seg = np.array([t.segment for t in walk], np.int64)
    fwd = np.array([t.from_node for t in walk], np.int64) == net.seg_u[seg]
    at = np.array([t.to_node for t in walk[:-1]], np.int64)
    return bool((bans.banned(seg[:-1], fwd[:-1], seg[1:], fwd[1:]) & (at != depot)).any())
