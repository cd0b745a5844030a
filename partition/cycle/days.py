"""Splitting one crew's territory into one route per working day.

Problem
-------
A crew serves its territory over the working days of a cycle: every required
pass once per cycle, one closed route from the depot per day, each within the
shift limit, each day's streets contiguous (a block face gets one day, so its
signs read cleanly) and the days even. Streets posted for a fixed day go on
that day. This is the min-max k-postman problem again, with the days as the k
vehicles sharing one depot (NP-hard; Frederickson, Hecht and Kim 1978).

Method
------
The fleet layer's own machinery, one level down: posted streets start on their
day; the days without posted streets get k-means centres over the free streets
(scikit-learn, seeded); every day then grows over neighbouring free streets,
the least loaded day first, nearest its centre first (as
:func:`crewcut.fleet.territories.grow_territories` grows crews); streets left over
join a neighbouring day. Each day is routed with its clock start and posted
windows (:func:`crewcut.solve.calendar.dayroute.plan_day_route`, through the
router), then :func:`crewcut.fleet.balancer.balance` moves and swaps boundary
streets between neighbouring days; a posted street never leaves its day (it is
eligible for that day only).
"""
from __future__ import annotations

import heapq
from dataclasses import dataclass, replace

import numpy as np
from sklearn.cluster import KMeans

from crewcut.solve.errors import InputError
from crewcut.solve.network.model import Network
from crewcut.solve.result import Route

from crewcut.fleet.balancer import BalanceReport, FleetState, balance
from crewcut.fleet.executor import RouteJob, Router
from crewcut.fleet.streets import StreetGraph
from crewcut.fleet.territories import (DEADHEAD_ALLOWANCE, attach_leftovers, describe_segment, grow_least_loaded,
                                      push_neighbours, territories_of)


@dataclass(frozen=True)
class CrewWeek:
    """A crew's days: ``days`` (labels, cycle order), one route per day, and the balancer's report."""

    days: tuple[str, ...]
    routes: tuple[Route, ...]
    owner: np.ndarray  # (m,) position in ``days`` per segment of the territory, -1 elsewhere
    balance: BalanceReport | None


def split_days(net: Network, sg: StreetGraph, router: Router, *, depot: int, limit_min: float,
               days: tuple[str, ...], territory: np.ndarray, pinned: np.ndarray, seed: int = 0,
               tolerance: float = 0.03, max_iterations: int = 200, time_limit_s: float | None = None,
               crew_id: str = "") -> CrewWeek:
    """One route per working day for a crew's ``territory`` (module docstring).

    ``pinned``: (m,) the day label index into ``days`` each segment is posted for, -1 when free.
    ``router`` routes with the cycle's clock start (its routes carry ``start_min``).
    """
    m = sg.required.size
    d = len(days)
    mask = np.zeros(m, bool)
    mask[np.asarray(territory, np.int64)] = True
    sub = replace(sg, required=mask)
    eligible = np.zeros((d, m), bool)
    free = mask & (pinned < 0)
    eligible[:, free] = True
    for i in range(d):
        eligible[i, mask & (pinned == i)] = True
    owner = np.full(m, -1, np.int64)
    owner[mask & (pinned >= 0)] = pinned[mask & (pinned >= 0)]
    grow_days(net, sub, owner, eligible, np.arange(d), seed, crew_id)
    terr = territories_of(owner, d)
    routes = router.route_many([RouteJob.of(depot, terr[i], seed) for i in range(d)])
    state = FleetState(owner=owner, routes=list(routes), depots=[depot] * d, limits=np.full(d, float(limit_min)))
    bal = None
    if d > 1:
        bal = balance(state, sub, router, eligible, seed=seed, tolerance=tolerance, max_iterations=max_iterations,
                      time_limit_s=time_limit_s)
    out = tuple(replace(r, day=days[i], stats={}) for i, r in enumerate(state.routes))
    return CrewWeek(days, out, state.owner, bal)


def grow_days(net: Network, sg: StreetGraph, owner: np.ndarray, eligible: np.ndarray, active, seed: int,
              crew_id: str, credit: dict[int, float] | None = None) -> None:
    """Grow the routes ``active`` (row ids of ``eligible``) over free required streets, least loaded first.

    In place on ``owner``. Routes that own nothing yet get k-means centres over the free
    streets (and the nearest free street as a seed); the others grow from what they own.
    Streets no route could take join a neighbouring route that may serve them, else the
    least loaded route that may, else an :class:`InputError` names them. ``credit``: minutes
    a route may take beyond its load (time it would otherwise wait for a posted window).
    """
    active = [int(a) for a in np.asarray(active).tolist()]
    est = sg.work * (1.0 + DEADHEAD_ALLOWANCE)
    can = eligible[active].any(axis=0)
    free = np.flatnonzero(sg.required & (owner < 0) & can)
    load = {i: float(est[owner == i].sum()) - (credit or {}).get(i, 0.0) for i in active}
    centres = {}
    empty = [i for i in active if not (owner == i).any()]
    for i in active:
        if i not in empty:
            segs = np.flatnonzero(owner == i)
            centres[i] = np.average(np.stack([sg.mid_x[segs], sg.mid_y[segs]], 1), axis=0,
                                    weights=np.maximum(est[segs], 1e-6))
    fronts: dict[int, list] = {i: [] for i in active}
    if empty and free.size:
        x = np.stack([sg.mid_x[free], sg.mid_y[free]], axis=1)
        n = min(len(empty), free.size)
        km = KMeans(n_clusters=n, init="k-means++", n_init=4, random_state=seed)
        km.fit(x, sample_weight=np.maximum(est[free], 1e-6))
        cc = km.cluster_centers_
        # routes in order get centres in a fixed order across the area: west to east, then south to north
        cc = cc[np.lexsort((cc[:, 1], cc[:, 0]))]
        taken: set[int] = set()
        for j, i in enumerate(empty[:n]):
            centres[i] = cc[j]
            ok = free[eligible[i, free]]
            dist = np.hypot(sg.mid_x[ok] - cc[j, 0], sg.mid_y[ok] - cc[j, 1])
            for s in ok[np.lexsort((ok, dist))].tolist():
                if s not in taken and owner[s] < 0:
                    taken.add(s)
                    owner[s] = i
                    load[i] += est[s]
                    break
    for i in active:
        if i not in centres:
            centres[i] = np.array([sg.mid_x[free].mean(), sg.mid_y[free].mean()]) if free.size else np.zeros(2)
        for s in np.flatnonzero(owner == i).tolist():
            push_neighbours(sg, s, i, owner, centres, fronts[i])
    turn = [(load[i], i) for i in active if fronts[i]]
    heapq.heapify(turn)
    grow_least_loaded(sg, owner, eligible, fronts, turn, load, est, centres)
    left = np.flatnonzero(sg.required & (owner < 0))
    if left.size:
        attach_leftovers(sg, owner, eligible, left)
        left = np.flatnonzero(sg.required & (owner < 0))
    act = np.array(active)
    for s in left.tolist():  # no neighbouring route may take it: the least loaded route that may, not contiguous
        ok = act[eligible[act, s]]
        if ok.size == 0:
            raise InputError(f"crew '{crew_id}': segment {s} ({describe_segment(net, np.array([s]))}) has no "
                             "working day it may be served on", "check the street's posted day and the crew's days off")
        i = int(min(ok.tolist(), key=lambda a: (load[a], a)))
        owner[s] = i
        load[i] += est[s]
