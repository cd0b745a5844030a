"""The balancer: move boundary segments between neighbouring territories to even out shifts.

Problem
-------
Given connected territories and their routes, reduce the longest shift, then the
spread of shifts, keeping every territory connected. Shifts are compared as a
share of each crew's shift limit, so a crew with a shorter limit gets less work;
with equal limits this is the longest shift itself. The min-max k-postman problem
behind it is NP-hard (Frederickson, Hecht and Kim 1978): this is a local search
heuristic with no optimality claim; the plan reports a lower bound and the gap.

Method
------
Repeatedly take the most loaded crew and a lighter neighbouring crew and move a
connected batch of the heavy crew's boundary segments, grown from the common
border, to the lighter one; given a :class:`crewcut.fleet.territories.BorderTurns`,
the batch is first tidied so that the new border leaves fewer stubs
(:func:`crewcut.fleet.territories.tidy_handover`; a stub costs its crew a U-turn).
The batch size comes from a fast estimate: each
territory's measured minutes per service minute (so its deadhead and turns
scale with the work). If the heavy territory would fall apart, the cut-off
pieces move too. The estimate screens moves; only the two territories touched
are routed again exactly (in parallel), and the move is kept only when the larger
of the two new shifts is below the heavy crew's old one, which makes the sorted
list of shifts decrease at every kept move (so the search ends). A rejected move
is retried at half and a quarter of the size; when all fail, the batch is offered
as a swap (the lighter crew hands back an equal amount of its own border) before
the pair is set aside until one of them changes. Stops at a tolerance on longest
over mean, an iteration limit, a time limit, or when no pair improves.

An optional ``move_cost(c, n, give, take)`` charges a move (in shares of a shift
limit, clamped at 0): the move is kept only when the new larger share plus the
charge is still below the old one. Rebalancing uses it to make segments that
leave their old crew cost something; without it the balancer is unchanged. A move
whose routes serve more passes outside their posted windows (cycle plans, the
routes' ``stats["window_misses"]``) is never kept.
"""
from __future__ import annotations

import heapq
import math
import time
from dataclasses import dataclass, field
from typing import Callable

import numpy as np

from crewcut.solve.result import Route

from crewcut.fleet.executor import RouteJob, Router
from crewcut.fleet.progress import ProgressFn
from crewcut.fleet.streets import StreetGraph
from crewcut.fleet.territories import BorderTurns, is_connected, pieces, tidy_handover

# move_cost(heavy crew, light crew, segments given, segments taken back) -> share of a shift limit
MoveCostFn = Callable[[int, int, np.ndarray, np.ndarray], float]


@dataclass
class BalanceReport:
    before_longest_min: float
    before_mean_min: float
    after_longest_min: float = 0.0
    after_mean_min: float = 0.0
    iterations: int = 0
    moves_kept: int = 0
    swaps_kept: int = 0
    trials: int = 0
    territories_routed: int = 0
    segments_moved: int = 0
    stop: str = ""
    seconds: float = 0.0

    def to_dict(self) -> dict:
        return dict(self.__dict__)


@dataclass
class FleetState:
    """Territories and routes being balanced (mutated in place)."""

    owner: np.ndarray  # (m,) crew index or -1
    routes: list[Route]
    depots: list[int]
    limits: np.ndarray  # (k,) minutes
    version: list[int] = field(default_factory=list)

    def __post_init__(self) -> None:
        if not self.version:
            self.version = [0] * len(self.routes)

    @property
    def shifts(self) -> np.ndarray:
        return np.array([r.totals.total_min for r in self.routes])

    def territory(self, c: int) -> np.ndarray:
        return np.flatnonzero(self.owner == c)


def balance(state: FleetState, sg: StreetGraph, router: Router, eligible: np.ndarray, *, seed: int = 0,
            tolerance: float = 0.01, max_iterations: int = 500, time_limit_s: float | None = None,
            progress: ProgressFn | None = None, move_cost: MoveCostFn | None = None,
            border: BorderTurns | None = None) -> BalanceReport:
    """Balance ``state`` in place; returns a before/after report (``move_cost``: see the module notes).

    The iteration limit is the deterministic stop; ``time_limit_s`` (None: none) adds a
    wall-clock stop, whose result may then differ from machine to machine.
    """
    t0 = time.perf_counter()
    if time_limit_s is None:
        time_limit_s = math.inf
    k = len(state.routes)
    sh = state.shifts
    rep = BalanceReport(before_longest_min=float(sh.max()), before_mean_min=float(sh.mean()))
    row_of = np.repeat(np.arange(sg.nb_ptr.size - 1), np.diff(sg.nb_ptr))
    failed: set[tuple] = set()
    start_ratio = _ratio(state)
    if k == 1:
        rep.stop = "one crew"
    while not rep.stop:
        util = state.shifts / state.limits
        ratio = _ratio(state)
        if progress is not None:
            span = max(start_ratio - 1.0 - tolerance, 1e-9)
            done = min(1.0, max(0.0, (start_ratio - ratio) / span))
            progress(f"balancing: longest/mean {ratio:.3f}", done, 1.0)
        if ratio - 1.0 <= tolerance:
            rep.stop = "tolerance"
            break
        if rep.iterations >= max_iterations:
            rep.stop = "iteration limit"
            break
        if time.perf_counter() - t0 >= time_limit_s:
            rep.stop = "time limit"
            break
        rep.iterations += 1
        pairs = crew_pairs(state.owner, row_of, sg.nb_idx)
        kept = False
        for c in np.argsort(-util, kind="stable").tolist():
            nbrs = sorted((n for n in pairs.get(c, ()) if util[n] < util[c]), key=lambda n: (util[n], n))
            for n in nbrs:
                key = (c, n, state.version[c], state.version[n])
                if key in failed:
                    continue
                if _try_pair(state, sg, router, eligible, c, n, seed, rep, move_cost, border):
                    kept = True
                    break
                failed.add(key)
                if time.perf_counter() - t0 >= time_limit_s:
                    break
            if kept or time.perf_counter() - t0 >= time_limit_s:
                break
        if not kept and not rep.stop:
            rep.stop = "time limit" if time.perf_counter() - t0 >= time_limit_s else "no improving move"
    sh = state.shifts
    rep.after_longest_min = float(sh.max())
    rep.after_mean_min = float(sh.mean())
    rep.seconds = time.perf_counter() - t0
    return rep


def _ratio(state: FleetState) -> float:
    util = state.shifts / state.limits
    mean = float(util.mean())
    return float(util.max()) / mean if mean > 0 else 1.0


def crew_pairs(owner: np.ndarray, row_of: np.ndarray, nb_idx: np.ndarray) -> dict[int, set[int]]:
    a, b = owner[row_of], owner[nb_idx]
    ok = (a >= 0) & (b >= 0) & (a != b)
    out: dict[int, set[int]] = {}
    for x, y in np.unique(np.stack([a[ok], b[ok]], axis=1), axis=0).tolist() if ok.any() else []:
        out.setdefault(x, set()).add(y)
    return out


def _cost(move_cost: MoveCostFn | None, c: int, n: int, give: np.ndarray, take: np.ndarray) -> float:
    return 0.0 if move_cost is None else max(0.0, float(move_cost(c, n, give, take)))


def _try_pair(state: FleetState, sg: StreetGraph, router: Router, eligible: np.ndarray, c: int, n: int,
              seed: int, rep: BalanceReport, move_cost: MoveCostFn | None = None,
              border: BorderTurns | None = None) -> bool:
    """Move work from heavy crew ``c`` to its lighter neighbour ``n``; True when a move was kept."""
    rc, rn = state.routes[c], state.routes[n]
    lc, ln = state.limits[c], state.limits[n]
    tc, tn = rc.totals.total_min, rn.totals.total_min
    tc_set, tn_set = state.territory(c), state.territory(n)
    fc = _rate(rc, sg, tc_set)
    fn = _rate(rn, sg, tn_set)
    old = max(tc / lc, tn / ln)
    # service minutes W to move so that both estimated shares meet
    want = (tc * ln - tn * lc) / (fc * ln + fn * lc)
    if want <= 0:
        return False
    for frac in (1.0, 0.5, 0.25):
        batch = grow_batch(state, sg, eligible, c, n, want * frac, border=border)
        if batch is None or batch.size == 0:
            continue
        w = float(sg.work[batch].sum())
        est = max((tc - fc * w) / lc, (tn + fn * w) / ln)
        none = np.zeros(0, np.int64)
        cost = _cost(move_cost, c, n, batch, none)
        if est + cost >= old:
            continue
        if _apply_if_better(state, sg, router, c, n, batch, none, old, seed, rep, cost):
            rep.moves_kept += 1
            return True
    # a swap: the same border batch goes over, an equal share of the neighbour's border comes back
    batch = grow_batch(state, sg, eligible, c, n, want * 0.5, border=border)
    if batch is not None and batch.size:
        back = grow_batch(state, sg, eligible, n, c, float(sg.work[batch].sum()) * 0.5, avoid=batch,
                           border=border)
        if back is not None and back.size and _apply_if_better(state, sg, router, c, n, batch, back, old, seed, rep,
                                                               _cost(move_cost, c, n, batch, back)):
            rep.swaps_kept += 1
            return True
    return False


def _rate(route: Route, sg: StreetGraph, segs: np.ndarray) -> float:
    """Route minutes per service minute of a territory (>= 1)."""
    w = float(sg.work[segs].sum())
    return max(1.0, route.totals.total_min / w) if w > 0 else 1.0


def grow_batch(state: FleetState, sg: StreetGraph, eligible: np.ndarray, c: int, n: int, target: float,
                avoid: np.ndarray | None = None, border: BorderTurns | None = None) -> np.ndarray | None:
    """A connected batch of ``c``'s segments along its border with ``n``, about ``target`` service minutes.

    Segments nearest to ``n``'s centre (relative to ``c``'s) go first. Returns the
    batch including any piece of ``c`` it would cut off, or None when ``c`` would
    lose everything or a segment ``n`` cannot serve.
    """
    owner = state.owner
    tc = state.territory(c)
    tn = state.territory(n)
    if tc.size <= 1:
        return None
    cx, cy = _centre(sg, tc)
    nx_, ny_ = _centre(sg, tn)
    avoid_set = set() if avoid is None else set(int(s) for s in avoid)

    def key(s: int) -> float:
        return float(np.hypot(sg.mid_x[s] - nx_, sg.mid_y[s] - ny_) - np.hypot(sg.mid_x[s] - cx, sg.mid_y[s] - cy))

    heap: list = []
    seen: set[int] = set()
    for s in tc.tolist():
        nb = sg.neighbours(s)
        if np.any(owner[nb] == n) and eligible[n, s] and s not in avoid_set:
            heapq.heappush(heap, (key(s), s))
            seen.add(s)
    batch: list[int] = []
    w = 0.0
    while heap and w < target:
        _, s = heapq.heappop(heap)
        if w + sg.work[s] > target * 1.5 and batch:
            continue
        batch.append(s)
        w += float(sg.work[s])
        for t in sg.neighbours(s).tolist():
            if owner[t] == c and t not in seen and eligible[n, t] and t not in avoid_set:
                seen.add(t)
                heapq.heappush(heap, (key(t), t))
    if batch and border is not None:
        tidied = tidy_handover(sg, owner, eligible, c, n, batch, border)
        if tidied and avoid_set.isdisjoint(tidied) and is_connected(sg, np.concatenate([tn, tidied])):
            batch = tidied
    if not batch or len(batch) >= tc.size:
        return None
    bset = set(batch)
    rest = [s for s in tc.tolist() if s not in bset]
    parts = pieces(sg, rest)
    if len(parts) > 1:
        wparts = [float(sg.work[p].sum()) for p in parts]
        keep = int(np.argmax(wparts))
        for i, p in enumerate(parts):
            if i != keep:
                if not all(eligible[n, s] for s in p):
                    return None
                batch.extend(p)
    return np.array(sorted(batch), np.int64)


def _centre(sg: StreetGraph, segs: np.ndarray) -> tuple[float, float]:
    w = sg.work[segs] + 1e-9
    return float(np.average(sg.mid_x[segs], weights=w)), float(np.average(sg.mid_y[segs], weights=w))


def _misses(route: Route) -> int:
    """Passes a route serves outside their posted windows (0 for routes without a clock)."""
    return int(route.stats.get("window_misses", 0)) if route.stats else 0


def _apply_if_better(state: FleetState, sg: StreetGraph, router: Router, c: int, n: int, give: np.ndarray,
                     take: np.ndarray, old: float, seed: int, rep: BalanceReport, cost: float = 0.0) -> bool:
    owner = state.owner.copy()
    owner[give] = n
    owner[take] = c
    new_c = np.flatnonzero(owner == c)
    new_n = np.flatnonzero(owner == n)
    if new_c.size == 0 or (take.size and (len(pieces(sg, new_c)) > 1 or len(pieces(sg, new_n)) > 1)):
        return False
    rep.trials += 1
    jobs = [RouteJob.of(state.depots[c], new_c, seed), RouteJob.of(state.depots[n], new_n, seed)]
    r_c, r_n = router.route_many(jobs)
    rep.territories_routed += 2
    new = max(r_c.totals.total_min / state.limits[c], r_n.totals.total_min / state.limits[n])
    if _misses(r_c) + _misses(r_n) > _misses(state.routes[c]) + _misses(state.routes[n]):
        return False  # cycle plans: never trade a posted window for a shorter day
    if new < old - 1e-9 and new + cost < old - 1e-9:
        state.owner[:] = owner
        state.routes[c], state.routes[n] = r_c, r_n
        state.version[c] += 1
        state.version[n] += 1
        rep.segments_moved += int(give.size + take.size)
        return True
    return False
