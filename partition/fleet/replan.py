"""Rebalancing a plan when the day changes: absent crews, extra crews, closed or added streets, shorter shifts.

Problem
-------
Given a plan (connected territories and routes of k crews) and the day's
changes, find a plan for the crews at work that serves every street needing
service, keeps territories connected, keeps shifts within their limits where
possible, and changes little: every segment that leaves the crew that had it
costs something, because crews know their streets. This is the min-max
k-postman problem with depots (NP-hard; Frederickson, Hecht and Kim 1978) with
a stability term added; the method is a heuristic and the new plan reports a
lower bound on the longest shift and the gap to it, never a claim of optimality.

Method
------
1. The network of the day (see *Which networks are accepted*): the plan's
   network, the ``closed`` segments closed, the ``opened`` streets appended
   with new segment ids after the plan's (so every old id keeps its meaning).
2. Release: segments of absent crews, added streets that need service,
   segments a crew can no longer reach and come back from, and every piece a
   closure cut off a territory (all but its piece with the most work) go into
   a pool. Closed segments simply leave their territories.
3. Extra crews (and crews left with nothing) start from the street that
   needs service nearest to their depot (by round trip) and grow, streets
   nearest their depot first, until they hold a fair share of the estimated
   work (their shift limit's share of all limits).
4. Grow: the pool goes to neighbouring territories, the least loaded crew
   (estimated minutes over shift limit) taking the pool segment next to its
   territory nearest to its centre, until the pool is empty. How much each
   neighbour takes comes first from the flow of step 5 with the pool as one
   more node (:func:`_pool_quotas`): a neighbour with room beyond it takes
   more, one hemmed in by full territories less.
5. Hand on: the crews that took the pool are now heavier than the rest. A
   minimum-cost flow on the graph of neighbouring territories (OR-tools)
   says how much work each crew hands to which neighbour so that no estimated
   share exceeds the mean by more than the tolerance, with as little work
   crossing borders as possible (each segment that crosses is charged the
   stability weight, each minute of excess left in place one minute); the
   balancer's border batches carry it out.
6. Only territories that changed are routed again
   (:class:`crewcut.fleet.executor.LocalRouter`); the others keep their routes.
7. The balancer (:func:`crewcut.fleet.balancer.balance`) evens out what the
   estimates missed, with a stability charge: a move must shorten the larger
   of the two shifts by at least ``stability`` minutes for every segment it
   takes away from the crew that had it in the parent plan (segments going
   back to it are free, so are segments that had no crew: the absent crews'
   and the added ones).
8. Work that does not fit: with ``overflow="defer"`` the lowest-priority
   segments of each crew over its limit (priority per road class,
   :meth:`crewcut.solve.profile.Profile.priority_for`; lower numbers wait first, the
   farthest from the depot first among equals) are deferred until every shift
   fits; with ``"overtime"`` the plan keeps all work and reports each crew's
   overtime; with ``None`` it only says which crews are over.
9. Lower bound (:func:`crewcut.solve.postman.bounds.fleet_lower_bound`) for the crews at work,
   the summary (:func:`crewcut.fleet.assemble.fleet_summary`) and the history; steps 6,
   7 and 9 are :mod:`crewcut.fleet.assemble`, shared with a fresh plan. What changed is
   :func:`crewcut.reports.changes.change_report`.

How many segments must change hands depends on the map: the work of an
absent crew can only go to its neighbouring territories, and from there on
to theirs; the fewer neighbours it has, the more work has to travel on.

Which networks are accepted
---------------------------
Let m and n be the numbers of segments and nodes in the plan file. A network
is accepted when (a) it has at least m segments and n nodes; (b) its first m
segments, with the closure flag of every ``closed`` segment set back to open,
have exactly the plan's fingerprint (:attr:`crewcut.solve.network.model.Network.fingerprint`:
ends, lengths to the millimetre, one-way, closures, service, feature ids), and
their service and deadhead minutes under the plan's profile are the ones the
plan records; (c) any segments after the first m are exactly the ``opened``
streets (same feature ids). So the network file may be the plan's own network,
or that network with the closed streets already marked closed, or with the
added streets already appended; any other difference (a street closed in the
file but not named, a changed length, a street not in the plan) is refused
with the segments that differ named.
"""
from __future__ import annotations

import dataclasses

import numpy as np

from crewcut.solve.network.model import Network
from crewcut.solve.profile import Crew, Profile

from crewcut.fleet.assemble import finish_plan, route_and_balance
from crewcut.fleet.balancer import FleetState
from crewcut.fleet.changes import Changes
from crewcut.fleet.day_crews import OVERFLOW_MODES, check_depots, check_params, crews_of_the_day
from crewcut.fleet.day_network import network_of_the_day, resolve_closures, scope_of_parent
from crewcut.fleet.executor import LocalRouter, RouteJob, Router, check_workers
from crewcut.fleet.handover import BAND, grow_extra, grow_pool, pool_quotas, release_pieces, transfers
from crewcut.fleet.progress import ProgressFn, with_log
from crewcut.fleet.streets import StreetGraph, build_street_graph, depot_travel, round_trips
from crewcut.fleet.territories import DEADHEAD_ALLOWANCE, attach_leftovers, territories_of
from crewcut.plans.model import Change, CrewPlan, DeferredSegment, History, Plan, ReplanLimits, recorded_crew
from crewcut.plans.planfile import plan_digest
from crewcut.plans.verify import profile_of_plan

REPLAN_METHOD = ("rebalanced from a parent plan: released streets grown into neighbouring territories, "
                 "boundary balancing with a stability charge; heuristic")

__all__ = ["OVERFLOW_MODES", "Changes", "replan", "resolve_closures"]


def replan(plan: Plan, net: Network, changes: Changes, *, profile: Profile | None = None, stability: float = 0.5,
           overflow: str | None = None, tolerance: float = 0.045, seed: int = 0, workers: int | None = None,
           time_limit_s: float | None = None, max_iterations: int = 500, route_time_limit_s: float | None = None,
           progress: ProgressFn | None = None, router: Router | None = None, parent: dict | None = None,
           source: str | None = None, network_name: str = "the network") -> Plan:
    """A new plan for the day's changes, starting from ``plan``.

    Parameters
    ----------
    plan: the parent plan (:func:`crewcut.plans.planfile.read_plan`, or a plan made in memory).
    net: the street network: the plan's, possibly with the closures marked or the added streets appended
        (see the module notes for the exact rule).
    changes: absent and extra crews, closed and opened streets, today's shift limits.
    profile: the work profile (default: rebuilt from the plan's settings).
    stability: minutes of the longer shift a balancing move must save per segment it takes away from the
        crew that had it in the parent plan; 0 balances without regard to the parent plan.
    overflow: when the work does not fit the limits: ``"defer"`` (defer list), ``"overtime"``, or None.
    tolerance: the balancer stops at longest / mean share of shift limit <= 1 + tolerance.
    seed: seeds every route; same input and seed give the same plan (unless a time limit cuts the balancer short).
    workers, time_limit_s, max_iterations, route_time_limit_s: as for :func:`crewcut.fleet.planner.plan_fleet`.
    router: a :class:`crewcut.fleet.executor.Router` to use instead of a local pool.
    parent: ``{"sha256": ..., "path": ...}`` of the parent plan file (default: the SHA-256 of the plan as
        crewcut writes it, no path).
    source, network_name: the network file, recorded in the new plan (default: the parent's) and named in messages.
    progress: ``progress(description, done, total)``; the library prints nothing.

    Returns the new plan; :func:`crewcut.reports.changes.change_report` says what changed.
    """
    check_params(stability, overflow, tolerance, seed, time_limit_s)
    check_workers(workers)
    report = with_log(progress)
    profile = profile or profile_of_plan(plan)
    if route_time_limit_s is None:
        recorded = plan.settings.options.route_time_limit_s
        route_time_limit_s = 10.0 if recorded is None else recorded
    closed = resolve_closures(plan, changes.closed)
    today, added = network_of_the_day(plan, scope_of_parent(plan, net, profile), profile, closed, changes.opened,
                                      name=network_name)
    crews = crews_of_the_day(plan, today, profile, changes)
    k, m = len(crews), today.n_segments
    report("network", 0, 1)
    sg = build_street_graph(today, profile)
    depots = [int(c.depot_node) for c in crews]
    uniq = sorted(set(depots))
    out, back = depot_travel(today, profile, uniq)
    rt = round_trips(today, sg, out, back)[np.array([uniq.index(d) for d in depots])]
    eligible = np.isfinite(rt)
    check_depots(today, crews, closed, eligible, sg)
    report("network", 1, 1)

    old: list[CrewPlan | None] = [plan.crew(c.id) for c in crews]  # the parent's record, None for extra crews
    orig = np.full(m, -1, np.int64)  # new index of the crew that had the segment in the parent plan
    for i, o in enumerate(old):
        if o is not None:
            orig[np.asarray(o.territory, np.int64)] = i
    owner = np.where(sg.required, orig, -1)
    rows = np.flatnonzero(owner >= 0)
    owner[rows[~eligible[owner[rows], rows]]] = -1  # streets a crew can no longer reach and leave
    release_pieces(sg, owner, k)
    limits = np.array([c.shift_limit_min for c in crews], float)
    est_rate = np.full(k, 1.0 + DEADHEAD_ALLOWANCE)
    for i, o in enumerate(old):
        if o is not None:
            w = float(sg.work[np.asarray(o.territory, np.int64)].sum())
            if w > 0:
                est_rate[i] = max(1.0, float(o.shift_min) / w)
    empty = [i for i in range(k) if not (owner == i).any()]
    total_est = float((sg.work[sg.required] * (1.0 + DEADHEAD_ALLOWANCE)).sum())
    for i in empty:  # extra crews, and crews whose streets all closed or went out of reach
        grow_extra(sg, owner, i, rt[i], eligible[i], total_est * limits[i] / limits.sum(),
                    sg.work * est_rate[i])
    if empty:
        release_pieces(sg, owner, k)
    load = np.array([float(sg.work[owner == i].sum()) * est_rate[i] for i in range(k)])
    quota = pool_quotas(sg, owner, limits, est_rate, BAND * tolerance, stability)
    grow_pool(sg, owner, eligible, load, limits, sg.work * (1.0 + DEADHEAD_ALLOWANCE), quota)
    report("handing on work", 0, 1)
    transfers(sg, owner, eligible, limits, est_rate, BAND * tolerance, stability)
    report("handing on work", 1, 1)
    left = np.flatnonzero(sg.required & (owner < 0))
    if left.size:
        attach_leftovers(sg, owner, eligible, left)
    left = np.flatnonzero(sg.required & (owner < 0))
    for s in left.tolist():  # joined to no territory at all (e.g. a new estate behind drive-through roads)
        cands = np.flatnonzero(eligible[:, s])
        owner[s] = int(cands[np.lexsort((cands, rt[cands, s]))[0]])

    own_router = router is None
    if own_router:
        router = LocalRouter(today, profile, workers=workers, time_limit_s=route_time_limit_s)
    try:
        terr = territories_of(owner, k)
        kept = {i: o.routes[0] for i, o in enumerate(old)
                if o is not None and _keeps_route(o, terr[i], depots[i], today)}

        def move_cost(c: int, n: int, give: np.ndarray, take: np.ndarray) -> float:
            away = (int(np.count_nonzero(orig[give] == c)) - int(np.count_nonzero(orig[give] == n))
                    + int(np.count_nonzero(orig[take] == n)) - int(np.count_nonzero(orig[take] == c)))
            return stability * away / float(limits[c])

        state, bal = route_and_balance(router, sg, eligible, crews, owner, seed=seed, tolerance=tolerance,
                                       max_iterations=max_iterations, time_limit_s=time_limit_s, progress=report,
                                       move_cost=move_cost if stability > 0 else None, kept=kept)
        deferred = (_defer(state, sg, router, today, profile, rt, seed, [c.id for c in crews])
                    if overflow == "defer" else None)
    finally:
        if own_router:
            router.close()

    options = dataclasses.replace(  # the parent's options, with the replan's own
        plan.settings.options, seed=int(seed), crews=tuple(recorded_crew(c) for c in crews),
        rebalance=ReplanLimits(float(stability), overflow, float(tolerance),
                               None if time_limit_s is None else float(time_limit_s), int(max_iterations)),
        route_time_limit_s=float(route_time_limit_s))
    history = _history(plan, parent, crews, changes, closed, added, today, stability, overflow)
    source = plan.network.source if source is None else source
    return finish_plan(today, profile, crews, state, bal, options=options, source=source, method=REPLAN_METHOD,
                       history=history, deferred=deferred, progress=report, left_out=plan.left_out)


def _keeps_route(old: CrewPlan, terr: np.ndarray, depot: int, today: Network) -> bool:
    """The parent's route still fits: same depot, same territory, no street on it closed today."""
    if old.depot_node != depot or len(old.routes) != 1:
        return False
    if sorted(old.territory) != terr.tolist():
        return False
    used = np.array([t.segment for t in old.routes[0].traversals], np.int64)
    return not bool(today.seg_closed[used].any()) if used.size else True


def _defer(state: FleetState, sg: StreetGraph, router: Router, today: Network, profile: Profile, rt: np.ndarray,
           seed: int, ids: list[str]) -> list[DeferredSegment]:
    """Take the lowest-priority segments off each crew over its limit until its shift fits; the defer list."""
    prio = np.array([profile.priority_for(c) for c in today.seg_class], np.int64)
    out: list[DeferredSegment] = []
    for c in range(len(state.routes)):
        for _attempt in range(12):
            over = state.routes[c].totals.total_min - state.limits[c]
            terr = state.territory(c)
            if over <= 1e-9 or terr.size == 0:
                break
            w = float(sg.work[terr].sum())
            rate = max(1.0, state.routes[c].totals.total_min / w) if w > 0 else 1.0
            order = terr[np.lexsort((terr, -rt[c, terr], prio[terr]))]
            cum = np.cumsum(sg.work[order]) * rate
            n = int(np.searchsorted(cum, over - 1e-9)) + 1
            take = order[:min(n, order.size)]
            state.owner[take] = -1
            for s in take.tolist():
                out.append(DeferredSegment(int(s), today.seg_source[s], today.seg_name[s], today.seg_class[s],
                                           int(prio[s]), ids[c], float(sg.work[s]), float(today.seg_length[s])))
            state.routes[c] = router.route_many([RouteJob.of(state.depots[c], state.territory(c), seed)])[0]
            state.version[c] += 1
    out.sort(key=lambda d: (d.priority, d.segment))
    return out


def _history(plan: Plan, parent: dict | None, crews: list[Crew], changes: Changes, closed: np.ndarray,
             added: np.ndarray, today: Network, stability: float, overflow: str | None) -> History:
    if parent is None:
        parent = {"sha256": plan_digest(plan), "path": None}
    out: list[Change] = [Change("absent", crew=a) for a in sorted(set(str(x) for x in changes.absent))]
    by_id = {c.id: c for c in crews}
    for e in changes.added_crews:
        c = by_id[str(e.id).strip()]
        node = int(c.depot_node)
        lon, lat = e.depot_lonlat if e.depot_lonlat is not None else (today.node_lon[node], today.node_lat[node])
        out.append(Change("extra_crew", crew=c.id, lon=float(lon), lat=float(lat), depot_node=node))
    old_limits = {c.id: c.shift_limit_min for c in plan.crews}
    limits = changes.shift_limits or {}
    for cid in sorted(limits):
        out.append(Change("shift_limit", crew=cid, from_min=old_limits.get(cid), to_min=float(limits[cid])))
    if closed.size:
        out.append(Change("closed", segments=tuple(closed.tolist()),
                          features=tuple(sorted({today.seg_source[int(s)] for s in closed}))))
    if added.size:
        out.append(Change("added_streets", segments=tuple(added.tolist()),
                          features=tuple(sorted({today.seg_source[int(s)] for s in added}))))
    prev = plan.history
    return History(parent=parent["sha256"], changes=tuple(out), parent_path=parent.get("path"),
                   parent_fingerprint=plan.network.fingerprint, generation=(prev.generation or 0) + 1,
                   lineage=tuple(prev.lineage) + (parent["sha256"],), stability=float(stability), overflow=overflow)
