"""Cycle plans where streets are posted: every crew-day is a region of its own.

Problem
-------
Where streets carry posted days and windows, a posted district is swept by as
many crews as its window needs that day, whatever the crews' other days hold,
so crew territories for the whole cycle cannot come first. Each (crew, working
day) pair is a route of its own: a compact, connected region from the crew's
depot within its shift limit; a posted street goes to a route of its day, and no
route gets more work in one window than the window can hold.

Method
------
1. Posted streets first, day by day and window by window: the streets posted for
   a window are grown into as many routes as their work needs (the work over 70 %
   of the window, and over 70 % of a shift; the share left for driving and turns is
   common practice, no source), routes holding no window yet first, then routes
   whose windows do not overlap; k-means centres over them (scikit-learn) and
   connected growth as in :mod:`crewcut.cycle.days`. Streets posted for the day
   without a window come last.
2. Every crew-day then grows over the free streets, least loaded first.
3. Routes with clock times and posted windows, and the boundary balancer over all
   crew-days (:func:`crewcut.fleet.balancer.balance`; posted streets stay on their
   day, a move that serves more passes outside their windows is never kept); streets
   still served outside their window are handed to another route of that day that
   meets it, where one does.
4. Which crew drives which region of a day is a free choice among crews with the
   same depot and limit: regions are given to crews so that each crew's days lie
   near each other (an assignment per day, scipy's ``linear_sum_assignment``,
   towards each crew's mean region centre, three rounds).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np
from scipy.optimize import linear_sum_assignment

from crewcut.solve.calendar.clock import window_misses
from crewcut.solve.calendar.dayroute import posted_windows
from crewcut.solve.network.model import Network
from crewcut.solve.profile import Crew
from crewcut.solve.result import Route

from crewcut.cycle.days import grow_days
from crewcut.fleet.balancer import BalanceReport, FleetState, balance
from crewcut.fleet.executor import RouteJob, Router
from crewcut.fleet.streets import StreetGraph
from crewcut.fleet.territories import DEADHEAD_ALLOWANCE, territories_of

WORK_SHARE = 0.7  # share of a shift or a window left for service once driving and turns are paid


@dataclass(frozen=True)
class DayRoutes:
    """One route per crew-day: ``slots[i] = (crew index, day label)`` and ``routes[i]``."""

    slots: tuple[tuple[int, str], ...]
    routes: tuple[Route, ...]
    owner: np.ndarray  # (m,) slot index per segment
    balance: BalanceReport | None


def plan_by_day(net: Network, sg: StreetGraph, router: Router, crews: list[Crew], working: list[tuple[str, ...]],
                days: tuple[str, ...], pinned: np.ndarray, reach: np.ndarray, *, start_min: float, seed: int = 0,
                tolerance: float = 0.01, max_iterations: int = 500, time_limit_s: float | None = None,
                progress=None) -> DayRoutes:
    """Regions and routes for every crew-day (module docstring).

    ``pinned``: (m,) index into ``days`` of each segment's posted day (-1: free). ``reach``:
    (k, m) which crew can serve which segment from its depot and return.
    """
    slots = [(i, d) for i, w in enumerate(working) for d in w]
    k2, m = len(slots), sg.required.size
    day_of_slot = np.array([days.index(d) for _, d in slots])
    crew_of_slot = np.array([i for i, _ in slots])
    eligible = reach[crew_of_slot] & ((pinned[None, :] < 0) | (pinned[None, :] == day_of_slot[:, None]))
    owner = np.full(m, -1, np.int64)
    est = sg.work * (1.0 + DEADHEAD_ALLOWANCE)
    windows = _windows(net, sg)
    for j, _ in enumerate(days):
        cand = np.flatnonzero(day_of_slot == j)
        limits_j = [crews[crew_of_slot[s]].shift_limit_min for s in cand]
        held: dict[int, list[tuple[int, int]]] = {int(t): [] for t in cand}  # windows each route holds
        for win in _day_classes(sg, pinned, j, windows):
            posted = sg.required & (pinned == j) & _in_class(sg, windows, win)
            need = _regions_needed(est, posted, windows, limits_j)
            # routes holding no window yet first, then those whose windows do not overlap this one
            free_t = [t for t in held if not held[t]]
            apart = [t for t in held if held[t] and win is not None and
                     all(hi <= win[0] or lo >= win[1] for lo, hi in held[t])]
            rest = [t for t in held if t not in free_t and t not in apart]
            use = np.array((free_t + apart + rest)[:need], np.int64)
            sub = replace(sg, required=posted)
            elig = np.zeros((k2, m), bool)
            elig[use] = eligible[use] & posted[None, :]
            grow_days(net, sub, owner, elig, use, seed, "")
            for t in use.tolist():
                if win is not None and (owner[posted] == t).any():
                    held[t].append(win)
    # a route whose first window opens after the shift starts has that time to fill with free streets
    credit = {}
    for t in range(k2):
        opens = [windows[s][0] for s in np.flatnonzero(owner == t).tolist() if s in windows]
        if opens:
            credit[t] = WORK_SHARE * max(0.0, min(opens) - start_min)
    grow_days(net, sg, owner, eligible, np.arange(k2), seed, "", credit=credit)
    terr = territories_of(owner, k2)
    depots = [int(crews[i].depot_node) for i, _ in slots]
    routes = router.route_many([RouteJob.of(depots[s], terr[s], seed) for s in range(k2)])
    limits = np.array([crews[i].shift_limit_min for i, _ in slots], float)
    state = FleetState(owner=owner, routes=list(routes), depots=depots, limits=limits)
    bal = balance(state, sg, router, eligible, seed=seed, tolerance=tolerance, max_iterations=max_iterations,
                  time_limit_s=time_limit_s, progress=progress) if k2 > 1 else None
    _repair_windows(net, state, router, eligible, day_of_slot, seed)
    order = _assign_crews(sg, state, slots, crews)
    routes_out = tuple(replace(state.routes[s], day=slots[t][1], stats={}) for t, s in enumerate(order))
    owner_out = np.full(m, -1, np.int64)
    for t, s in enumerate(order):
        owner_out[state.owner == s] = t
    return DayRoutes(tuple(slots), routes_out, owner_out, bal)


def _missed(net: Network, route: Route) -> list[int]:
    """Segments a route serves outside their posted windows."""
    wins = posted_windows(net, {x.segment for x in route.traversals if x.service})
    return sorted({route.traversals[i].segment for i in window_misses(route.traversals, route.start_min or 0.0, wins)})


def _repair_windows(net: Network, state: FleetState, router: Router, eligible: np.ndarray, day_of_slot: np.ndarray,
                    seed: int, rounds: int = 4) -> None:
    """Hand streets served outside their window to another route of the same day that meets it (in place).

    Step 3's last word: for each route that still misses a window, its missed streets are
    offered to the routes of that day, least loaded first (three at most); a hand-over is
    kept when the two routes together miss fewer passes.
    """
    for _ in range(rounds):
        changed = False
        for t in range(len(state.routes)):
            segs = _missed(net, state.routes[t])
            if not segs:
                continue
            same = [n for n in np.flatnonzero(day_of_slot == day_of_slot[t]).tolist()
                    if n != t and eligible[n, segs].all()]
            same.sort(key=lambda n: (state.routes[n].totals.total_min / state.limits[n], n))
            before = len(segs)
            for n in same[:3]:
                owner = state.owner.copy()
                owner[segs] = n
                r_t, r_n = router.route_many([RouteJob.of(state.depots[t], np.flatnonzero(owner == t), seed),
                                              RouteJob.of(state.depots[n], np.flatnonzero(owner == n), seed)])
                if len(_missed(net, r_t)) + len(_missed(net, r_n)) < before + len(_missed(net, state.routes[n])):
                    state.owner[:] = owner
                    state.routes[t], state.routes[n] = r_t, r_n
                    changed = True
                    break
        if not changed:
            break


def _windows(net: Network, sg: StreetGraph) -> dict[int, tuple[int, int]]:
    out = {}
    if net.seg_posting:
        for s in np.flatnonzero(sg.required).tolist():
            p = net.posting(s)
            if p is not None and p.has_window:
                out[s] = (int(p.open_min), int(p.close_min))
    return out


def _day_classes(sg: StreetGraph, pinned: np.ndarray, j: int, windows: dict) -> list:
    """The posted classes of day ``j``: each window (in order of opening), then the day without a window."""
    segs = np.flatnonzero(sg.required & (pinned == j)).tolist()
    wins = sorted({windows[s] for s in segs if s in windows})
    return wins + ([None] if any(s not in windows for s in segs) else [])


def _in_class(sg: StreetGraph, windows: dict, win) -> np.ndarray:
    mask = np.zeros(sg.required.size, bool)
    if win is None:
        mask[:] = True
        mask[list(windows)] = False
    else:
        mask[[s for s, w in windows.items() if w == win]] = True
    return mask


def _regions_needed(est: np.ndarray, posted: np.ndarray, windows: dict, limits: list[float]) -> int:
    """How many routes a day's posted streets need: by the day's work and by each window's."""
    segs = np.flatnonzero(posted)
    shift = float(np.mean(limits)) if limits else 480.0
    need = math.ceil(float(est[segs].sum()) / (WORK_SHARE * shift))
    by_window: dict[tuple[int, int], float] = {}
    for s in segs.tolist():
        if s in windows:
            by_window[windows[s]] = by_window.get(windows[s], 0.0) + float(est[s])
    for (lo, hi), work in by_window.items():
        need = max(need, math.ceil(work / (WORK_SHARE * min(hi - lo, shift))))
    return max(1, min(len(limits), need))


def _assign_crews(sg: StreetGraph, state: FleetState, slots, crews: list[Crew]) -> list[int]:
    """For each slot position (crew, day), the region (state index) it drives (module step 4)."""
    k2 = len(slots)
    cen = np.zeros((k2, 2))
    for s in range(k2):
        segs = np.flatnonzero(state.owner == s)
        if segs.size:
            w = sg.work[segs] + 1e-9
            cen[s] = (np.average(sg.mid_x[segs], weights=w), np.average(sg.mid_y[segs], weights=w))
    order = list(range(k2))
    key = [(int(crews[i].depot_node), float(crews[i].shift_limit_min), d) for i, d in slots]
    groups: dict[tuple, list[int]] = {}
    for t, kk in enumerate(key):
        groups.setdefault(kk, []).append(t)
    for _ in range(3):
        home = {}
        for t, (i, _d) in enumerate(slots):
            home.setdefault(i, []).append(cen[order[t]])
        home = {i: np.mean(v, axis=0) for i, v in home.items()}
        for pos in groups.values():
            if len(pos) < 2:
                continue
            regions = [order[t] for t in pos]
            cost = np.array([[float(np.hypot(*(cen[r] - home[slots[t][0]]))) for r in regions] for t in pos])
            rows, cols = linear_sum_assignment(np.round(cost, 3))
            for r_, c_ in zip(rows, cols):
                order[pos[r_]] = regions[c_]
    return order
