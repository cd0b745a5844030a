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
from crewcut.fleet.territories import DEADHEAD_ALLOWANCE, attach_leftovers, describe_segment, territories_of


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
    _grow(net, sub, owner, eligible, d, seed, crew_id)
    terr = territories_of(owner, d)
    routes = router.route_many([RouteJob.of(depot, terr[i], seed) for i in range(d)])
    state = FleetState(owner=owner, routes=list(routes), depots=[depot] * d, limits=np.full(d, float(limit_min)))
    bal = None
    if d > 1:
        bal = balance(state, sub, router, eligible, seed=seed, tolerance=tolerance, max_iterations=max_iterations,
                      time_limit_s=time_limit_s)
    out = tuple(replace(r, day=days[i], stats={}) for i, r in enumerate(state.routes))
    return CrewWeek(days, out, state.owner, bal)


def _grow(net: Network, sg: StreetGraph, owner: np.ndarray, eligible: np.ndarray, d: int, seed: int,
          crew_id: str) -> None:
    """Grow every day over free neighbouring streets, least loaded first (in place)."""
    est = sg.work * (1.0 + DEADHEAD_ALLOWANCE)
    free = np.flatnonzero(sg.required & (owner < 0))
    load = np.array([est[owner == i].sum() for i in range(d)])
    centres = np.zeros((d, 2))
    empty = [i for i in range(d) if not (owner == i).any()]
    for i in range(d):
        if i not in empty:
            segs = np.flatnonzero(owner == i)
            centres[i] = np.average(np.stack([sg.mid_x[segs], sg.mid_y[segs]], 1), axis=0,
                                    weights=np.maximum(est[segs], 1e-6))
    fronts: list[list] = [[] for _ in range(d)]
    if empty and free.size:
        x = np.stack([sg.mid_x[free], sg.mid_y[free]], axis=1)
        n = min(len(empty), free.size)
        km = KMeans(n_clusters=n, init="k-means++", n_init=4, random_state=seed)
        km.fit(x, sample_weight=np.maximum(est[free], 1e-6))
        cc = km.cluster_centers_
        # days in cycle order get centres in a fixed order around the territory: west to east, then south to north
        cc = cc[np.lexsort((cc[:, 1], cc[:, 0]))]
        taken: set[int] = set()
        for j, i in enumerate(empty[:n]):
            centres[i] = cc[j]
            dist = np.hypot(sg.mid_x[free] - cc[j, 0], sg.mid_y[free] - cc[j, 1])
            for s in free[np.lexsort((free, dist))].tolist():
                if s not in taken:
                    taken.add(s)
                    owner[s] = i
                    load[i] += est[s]
                    break
    for i in range(d):
        for s in np.flatnonzero(owner == i).tolist():
            _push(sg, s, i, owner, centres, fronts[i])
    turn = [(float(load[i]), i) for i in range(d) if fronts[i]]
    heapq.heapify(turn)
    while turn:
        _, i = heapq.heappop(turn)
        got = -1
        while fronts[i]:
            _, s = heapq.heappop(fronts[i])
            if owner[s] < 0 and eligible[i, s]:
                got = s
                break
        if got < 0:
            continue
        owner[got] = i
        load[i] += est[got]
        _push(sg, got, i, owner, centres, fronts[i])
        heapq.heappush(turn, (float(load[i]), i))
    left = np.flatnonzero(sg.required & (owner < 0))
    if left.size:
        attach_leftovers(sg, owner, eligible, left)
        left = np.flatnonzero(sg.required & (owner < 0))
    for s in left.tolist():  # no neighbouring day may take it: the least loaded day that may, not contiguous
        ok = np.flatnonzero(eligible[:, s])
        if ok.size == 0:
            raise InputError(f"crew '{crew_id}': segment {s} ({describe_segment(net, np.array([s]))}) has no "
                             "working day it may be served on", "check the street's posted day and the crew's days off")
        i = int(ok[np.argmin(load[ok])])
        owner[s] = i
        load[i] += est[s]


def _push(sg: StreetGraph, s: int, i: int, owner: np.ndarray, centres: np.ndarray, front: list) -> None:
    nb = sg.neighbours(s)
    nb = nb[owner[nb] < 0]
    if nb.size == 0:
        return
    dist = np.hypot(sg.mid_x[nb] - centres[i, 0], sg.mid_y[nb] - centres[i, 1])
    for dd, t in zip(dist.tolist(), nb.tolist()):
        heapq.heappush(front, (dd, t))
