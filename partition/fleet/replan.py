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
   network, the ``close`` segments closed, the ``opened`` streets appended
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
   the summary (:func:`crewcut.fleet.planner.fleet_summary`), the history and the
   change report.

How many segments must change hands depends on the map: the work of an
absent crew can only go to its neighbouring territories, and from there on
to theirs; the fewer neighbours it has, the more work has to travel on.

Which networks are accepted
---------------------------
Let m and n be the numbers of segments and nodes in the plan file. A network
is accepted when (a) it has at least m segments and n nodes; (b) its first m
segments, with the closure flag of every ``close`` segment set back to open,
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

import hashlib
from typing import Iterable, Sequence

import numpy as np

from crewcut.solve.network.model import Network, RawLine
from crewcut.solve.profile import Profile
from crewcut.solve.result import Route

from crewcut.fleet.balancer import FleetState, balance
from crewcut.fleet.day_crews import OVERFLOW_MODES, check_depots, check_params, crews_of_the_day
from crewcut.fleet.day_network import network_of_the_day, resolve_closures
from crewcut.fleet.executor import LocalRouter, RouteJob, Router, check_workers
from crewcut.fleet.handover import BAND, grow_extra, grow_pool, pool_quotas, release_pieces, transfers
from crewcut.fleet.planner import fleet_summary
from crewcut.fleet.progress import ProgressFn
from crewcut.fleet.streets import StreetGraph, build_street_graph, depot_travel, round_trips
from crewcut.fleet.territories import DEADHEAD_ALLOWANCE, attach_leftovers, territories_of
from crewcut.plans.planfile import CrewPlan, build_plan, dumps, route_from_section
from crewcut.plans.verify import profile_of_plan
from crewcut.reports.changes import change_report

__all__ = ["OVERFLOW_MODES", "rebalance_plan", "resolve_closures"]


def rebalance_plan(plan: dict, net: Network, *, absent: Sequence[str] = (),
                   add_crews: Sequence[tuple[str, float, float]] = (), close: Iterable = (),
                   opened: Network | Sequence[RawLine] | None = None, shift_limits: dict[str, float] | None = None,
                   stability: float = 0.5, overflow: str | None = None, tolerance: float = 0.045, seed: int = 0,
                   workers: int | None = None, time_limit_s: float | None = None, max_iterations: int = 500,
                   route_time_limit_s: float | None = None, progress: ProgressFn | None = None,
                   router: Router | None = None, profile: Profile | None = None, parent: dict | None = None,
                   source: str | None = None, network_name: str = "the network") -> tuple[dict, dict]:
    """A new plan for the day's changes, starting from ``plan``; returns ``(new_plan, change_report)``.

    Parameters
    ----------
    plan: the parent plan document (:func:`crewcut.plans.planfile.read_plan`).
    net: the street network: the plan's, possibly with the closures marked or the added streets appended
        (see the module notes for the exact rule).
    absent: ids of crews not at work today.
    add_crews: extra crews as ``(id, lon, lat)`` of their depot.
    close: segments closed today: segment ids, or feature ids (see :func:`resolve_closures`).
    opened: streets added today (a :class:`Network` or reader lines); they get new segment ids.
    shift_limits: crew id -> today's shift limit in minutes (default: the plan's, or the profile's for extra crews).
    stability: minutes of the longer shift a balancing move must save per segment it takes away from the
        crew that had it in the parent plan; 0 balances without regard to the parent plan.
    overflow: when the work does not fit the limits: ``"defer"`` (defer list), ``"overtime"``, or None.
    tolerance: the balancer stops at longest / mean share of shift limit <= 1 + tolerance.
    seed: seeds every route; same input and seed give the same plan (unless a time limit cuts the balancer short).
    workers, time_limit_s, max_iterations, route_time_limit_s: as for :func:`crewcut.fleet.planner.plan_fleet`.
    profile: the work profile (default: rebuilt from the plan's settings).
    parent: ``{"sha256": ..., "path": ...}`` of the parent plan file (default: the SHA-256 of the plan as
        crewcut writes it).
    source, network_name: the network file, recorded in the new plan (default: the parent's) and named in messages.
    progress: ``progress(description, done, total)``; the library prints nothing.
    """
    check_params(stability, overflow, tolerance, seed, time_limit_s)
    check_workers(workers)
    report = progress or (lambda *a: None)
    profile = profile or profile_of_plan(plan)
    settings = plan.get("settings", {})
    if route_time_limit_s is None:
        route_time_limit_s = float(settings.get("route_time_limit_s", 10.0))
    closed = resolve_closures(plan, close)
    today, added = network_of_the_day(plan, net, profile, closed, opened, name=network_name)
    crews = crews_of_the_day(plan, today, profile, absent, add_crews, shift_limits)
    k, m = len(crews), today.n_segments
    report("network", 0, 1)
    sg = build_street_graph(today, profile)
    depots = [c.depot for c in crews]
    uniq = sorted(set(depots))
    out, back = depot_travel(today, profile, uniq)
    rt = round_trips(today, sg, out, back)[np.array([uniq.index(d) for d in depots])]
    eligible = np.isfinite(rt)
    check_depots(today, crews, closed, eligible, sg)
    report("network", 1, 1)

    old = plan["crews"]
    new_of_old = {c.old: i for i, c in enumerate(crews) if c.old >= 0}
    orig = np.full(m, -1, np.int64)  # new index of the crew that had the segment in the parent plan
    for oi, crew in enumerate(old):
        if oi in new_of_old:
            orig[np.asarray(crew["territory"], np.int64)] = new_of_old[oi]
    owner = np.where(sg.required, orig, -1)
    rows = np.flatnonzero(owner >= 0)
    owner[rows[~eligible[owner[rows], rows]]] = -1  # streets a crew can no longer reach and leave
    release_pieces(sg, owner, k)
    limits = np.array([c.shift_limit_min for c in crews], float)
    est_rate = np.full(k, 1.0 + DEADHEAD_ALLOWANCE)
    for i, c in enumerate(crews):
        if c.old >= 0:
            w = float(sg.work[np.asarray(old[c.old]["territory"], np.int64)].sum())
            if w > 0:
                est_rate[i] = max(1.0, float(old[c.old]["shift_min"]) / w)
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
        routes: list[Route | None] = [None] * k
        terr = territories_of(owner, k)
        jobs, which = [], []
        for i, c in enumerate(crews):
            if c.old >= 0 and _keeps_route(old[c.old], terr[i], c.depot, today):
                routes[i] = route_from_section(old[c.old]["routes"][0], c.depot)
            else:
                jobs.append(RouteJob.of(c.depot, terr[i], seed))
                which.append(i)
        report("routing territories", 0, len(jobs))
        for i, r in zip(which, router.route_many(jobs)):
            routes[i] = r
        report("routing territories", len(jobs), len(jobs))
        state = FleetState(owner=owner, routes=list(routes), depots=depots, limits=limits)

        def move_cost(c: int, n: int, give: np.ndarray, take: np.ndarray) -> float:
            away = (int(np.count_nonzero(orig[give] == c)) - int(np.count_nonzero(orig[give] == n))
                    + int(np.count_nonzero(orig[take] == n)) - int(np.count_nonzero(orig[take] == c)))
            return stability * away / float(limits[c])

        bal = balance(state, sg, router, eligible, seed=seed, tolerance=tolerance, max_iterations=max_iterations,
                      time_limit_s=time_limit_s, progress=progress,
                      move_cost=move_cost if stability > 0 else None)
        deferred = (_defer(state, sg, router, today, profile, rt, seed, [c.id for c in crews])
                    if overflow == "defer" else [])
    finally:
        if own_router:
            router.close()

    report("lower bound", 0, 1)
    from crewcut.solve.postman.bounds import fleet_lower_bound

    served = np.flatnonzero(state.owner >= 0)
    lb = float(fleet_lower_bound(today, profile, depots, k, served.tolist() if deferred else None))
    report("lower bound", 1, 1)
    terr = territories_of(state.owner, k)
    plans = [CrewPlan(id=c.id, depot_node=c.depot, shift_limit_min=c.shift_limit_min, territory=terr[i].tolist(),
                      routes=[state.routes[i]]) for i, c in enumerate(crews)]
    summary = fleet_summary(plans, lb, bal)
    summary["method"] = ("rebalanced from a parent plan: released streets grown into neighbouring territories, "
                         "boundary balancing with a stability charge; heuristic")
    if deferred:
        summary["deferred_segments"] = len(deferred)
        summary["deferred_min"] = float(sum(d["work_min"] for d in deferred))
    new_settings = {k_: v for k_, v in settings.items() if k_ != "profile"}
    new_settings.update({
        "seed": int(seed),
        "crews": [{"id": c.id, "depot_node": int(c.depot), "shift_limit_min": float(c.shift_limit_min)}
                  for c in crews],
        "rebalance": {"stability": float(stability), "overflow": overflow, "tolerance": float(tolerance),
                      "time_limit_s": None if time_limit_s is None else float(time_limit_s),
                         "max_iterations": int(max_iterations)},
        "route_time_limit_s": float(route_time_limit_s)})
    history = _history(plan, parent, crews, absent, add_crews, shift_limits, closed, added, today, stability,
                       overflow)
    source = str(plan["network"].get("source", "")) if source is None else source
    new_plan = build_plan(today, profile, plans, source=source, settings=new_settings, summary=summary,
                          history=history)
    if overflow == "defer":
        new_plan["deferred"] = deferred
    rep = change_report(plan, new_plan)
    if overflow == "overtime":
        rep["overtime"] = [{"crew": o["crew"], "overtime_min": o["over_min"]} for o in summary["over_limit"]]
    return new_plan, rep


def _keeps_route(old_crew: dict, terr: np.ndarray, depot: int, today: Network) -> bool:
    """The parent's route still fits: same depot, same territory, no street on it closed today."""
    if int(old_crew["depot_node"]) != depot or len(old_crew.get("routes", [])) != 1:
        return False
    if sorted(int(s) for s in old_crew["territory"]) != terr.tolist():
        return False
    used = np.array([int(t["segment"]) for t in old_crew["routes"][0]["traversals"]], np.int64)
    return not bool(today.seg_closed[used].any()) if used.size else True


def _defer(state: FleetState, sg: StreetGraph, router: Router, today: Network, profile: Profile, rt: np.ndarray,
           seed: int, ids: list[str]) -> list[dict]:
    """Take the lowest-priority segments off each crew over its limit until its shift fits; the defer list."""
    prio = np.array([profile.priority_for(c) for c in today.seg_class], np.int64)
    out: list[dict] = []
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
                out.append({"segment": int(s), "source_id": today.seg_source[s], "name": today.seg_name[s],
                            "class": today.seg_class[s], "priority": int(prio[s]), "crew": ids[c],
                            "work_min": float(sg.work[s]), "length_m": float(today.seg_length[s])})
            state.routes[c] = router.route_many([RouteJob.of(state.depots[c], state.territory(c), seed)])[0]
            state.version[c] += 1
    out.sort(key=lambda d: (d["priority"], d["segment"]))
    return out


def _history(plan, parent, crews, absent, add_crews, shift_limits, closed, added, today, stability, overflow) -> dict:
    if parent is None:
        parent = {"sha256": hashlib.sha256(dumps(plan).encode("utf-8")).hexdigest(), "path": None}
    changes: list[dict] = []
    for a in sorted(set(str(x) for x in absent)):
        changes.append({"kind": "absent", "crew": a})
    by_id = {c.id: c for c in crews}
    for cid, lon, lat in add_crews:
        changes.append({"kind": "extra_crew", "crew": str(cid).strip(), "lon": float(lon), "lat": float(lat),
                        "depot_node": int(by_id[str(cid).strip()].depot)})
    old_limits = {str(c["id"]): float(c["shift_limit_min"]) for c in plan["crews"]}
    for cid in sorted(shift_limits or {}):
        changes.append({"kind": "shift_limit", "crew": cid, "from_min": old_limits.get(cid),
                        "to_min": float(shift_limits[cid])})
    if closed.size:
        changes.append({"kind": "closed", "segments": closed.tolist(),
                        "features": sorted({today.seg_source[int(s)] for s in closed})})
    if added.size:
        changes.append({"kind": "added_streets", "segments": added.tolist(),
                        "features": sorted({today.seg_source[int(s)] for s in added})})
    prev = plan.get("history") or {}
    return {"parent": parent["sha256"], "parent_path": parent.get("path"),
            "parent_fingerprint": plan["network"]["fingerprint"],
            "generation": int(prev.get("generation", 0)) + 1,
            "lineage": list(prev.get("lineage", [])) + [parent["sha256"]],
            "changes": changes, "stability": float(stability), "overflow": overflow}
