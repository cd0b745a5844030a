"""The tail a fresh plan and a replan share: route and balance, the lower bound, the summary, the plan.

:func:`route_and_balance` routes the territories (those whose route cannot be
kept) and evens out the shifts with :func:`crewcut.fleet.balancer.balance`;
:func:`finish_plan` computes the min-max lower bound for the crews at work
(:func:`crewcut.solve.postman.bounds.fleet_lower_bound`, after Ahr and Reinelt
2006), the summary (:func:`fleet_summary`) and assembles the
:class:`crewcut.plans.model.Plan` (:func:`crewcut.plans.planfile.build_plan`).
"""
from __future__ import annotations

from typing import Mapping

import numpy as np

from crewcut.solve.network.model import Network
from crewcut.solve.profile import Crew, Profile
from crewcut.solve.result import Route

from crewcut.fleet.balancer import BalanceReport, FleetState, balance
from crewcut.fleet.executor import RouteJob, Router
from crewcut.fleet.progress import ProgressFn
from crewcut.fleet.streets import StreetGraph
from crewcut.fleet.territories import territories_of
from crewcut.plans.model import (BalanceOutcome, CrewPlan, DeferredSegment, FleetSummary, History, OverLimit, Plan,
                                 RunOptions)
from crewcut.plans.planfile import build_plan

FRESH_METHOD = "cluster first (k-means seeds, connected growth), route second, boundary balancing; heuristic"


def _quiet(*_a) -> None:
    return None


def route_and_balance(router: Router, sg: StreetGraph, eligible: np.ndarray, crews: list[Crew], owner: np.ndarray,
                      *, seed: int, tolerance: float, max_iterations: int, time_limit_s: float | None,
                      progress: ProgressFn | None = None, border=None, move_cost=None,
                      kept: Mapping[int, Route] | None = None) -> tuple[FleetState, BalanceReport]:
    """Route every territory of ``owner`` (but those in ``kept``: crew index -> its route), then balance.

    Parameters
    ----------
    router: routes territories (:class:`crewcut.fleet.executor.Router`).
    sg, eligible: the street graph and which crew may serve which segment.
    crews: the crews at work, with their depot nodes and shift limits.
    owner: crew index per segment (-1: none); balanced in place.
    seed, tolerance, max_iterations, time_limit_s, border, move_cost: as for :func:`crewcut.fleet.balancer.balance`.
    """
    report = progress or _quiet
    k = len(crews)
    depots = [int(c.depot_node) for c in crews]
    kept = dict(kept or {})
    terr = territories_of(owner, k)
    which = [i for i in range(k) if i not in kept]
    report("routing territories", 0, len(which))
    routed = router.route_many([RouteJob.of(depots[i], terr[i], seed) for i in which])
    report("routing territories", len(which), len(which))
    routes: list[Route] = [kept[i] if i in kept else None for i in range(k)]  # type: ignore[misc]
    for i, r in zip(which, routed):
        routes[i] = r
    limits = np.array([c.shift_limit_min for c in crews], float)
    state = FleetState(owner=owner, routes=list(routes), depots=depots, limits=limits)
    bal = balance(state, sg, router, eligible, seed=seed, tolerance=tolerance, max_iterations=max_iterations,
                  time_limit_s=time_limit_s, progress=progress, border=border, move_cost=move_cost)
    return state, bal


def finish_plan(net: Network, profile: Profile, crews: list[Crew], state: FleetState, bal: BalanceReport | None, *,
                options: RunOptions, source: str, method: str = FRESH_METHOD, history: History | None = None,
                deferred: list[DeferredSegment] | None = None, progress: ProgressFn | None = None,
                left_out=None) -> Plan:
    """The lower bound for the crews at work, the summary and the plan.

    With a defer list, the bound covers only the segments still served
    (``state.owner >= 0``) and the summary counts the deferred ones.
    """
    report = progress or _quiet
    k = len(crews)
    depots = [int(c.depot_node) for c in crews]
    report("lower bound", 0, 1)
    from crewcut.solve.postman.bounds import fleet_lower_bound

    served = np.flatnonzero(state.owner >= 0).tolist() if deferred else None
    lb = float(fleet_lower_bound(net, profile, depots, k, served))
    report("lower bound", 1, 1)
    terr = territories_of(state.owner, k)
    plans = [CrewPlan(crew=c, territory=tuple(terr[i].tolist()), routes=(state.routes[i],))
             for i, c in enumerate(crews)]
    summary = fleet_summary(plans, lb, bal, method=method, deferred=deferred)
    return build_plan(net, profile, plans, source=source, options=options, summary=summary, history=history,
                      deferred=deferred, left_out=left_out)


def fleet_summary(plans: list[CrewPlan], lower_bound_min: float, bal: BalanceReport | None = None, *,
                  method: str = FRESH_METHOD, deferred: list[DeferredSegment] | None = None) -> FleetSummary:
    """Longest, mean, lower bound and gap, crews over their limit, and an estimate of the crews needed."""
    shifts = np.array([p.shift_min for p in plans])
    limits = np.array([p.shift_limit_min for p in plans])
    over = tuple(OverLimit(p.id, p.shift_min, p.shift_limit_min, p.shift_min - p.shift_limit_min)
                 for p in plans if p.shift_min > p.shift_limit_min + 1e-9)
    outcome = None
    if bal is not None:  # wall time is not part of the plan: same input, same bytes
        b = bal.to_dict()
        b.pop("seconds", None)
        outcome = BalanceOutcome(**b)
    return FleetSummary(
        **summary_figures(plans, shifts, lower_bound_min),
        over_limit=over, crews_needed_estimate=crews_needed(float(shifts.sum()), lower_bound_min, limits),
        method=method, balance=outcome,
        deferred_segments=len(deferred) if deferred else None,
        deferred_min=float(sum(d.work_min for d in deferred)) if deferred else None)


def summary_figures(plans: list[CrewPlan], shifts: np.ndarray, lower_bound_min: float) -> dict:
    """The figures every fleet summary gives, from the shifts compared (crews' or days') and all routes."""
    dead_km = sum(r.totals.deadhead_km for p in plans for r in p.routes)
    serv_km = sum(r.totals.service_km for p in plans for r in p.routes)
    longest, mean = float(shifts.max()), float(shifts.mean())
    return dict(
        crews=len(plans), longest_min=longest, mean_min=mean, shortest_min=float(shifts.min()),
        longest_over_mean=longest / mean if mean > 0 else 1.0, lower_bound_min=lower_bound_min,
        gap=longest / lower_bound_min - 1.0 if lower_bound_min > 0 else 0.0, total_shift_min=float(shifts.sum()),
        service_min=sum(r.totals.service_min for p in plans for r in p.routes),
        deadhead_min=sum(r.totals.deadhead_min for p in plans for r in p.routes),
        deadhead_pct=100.0 * dead_km / (dead_km + serv_km) if dead_km + serv_km > 0 else 0.0)


def crews_needed(total_min: float, lower_bound_min: float, limits: np.ndarray) -> int:
    """Smallest crew count whose limits could hold the work (an estimate, not a plan).

    Adds crews in decreasing order of shift limit (more crews than planned take the
    smallest limit) until their limits add up to the plan's total shift minutes.
    """
    lim = np.sort(np.asarray(limits, float))[::-1]
    acc, j = 0.0, 0
    while acc + 1e-9 < total_min:
        acc += lim[j] if j < lim.size else lim[-1]
        j += 1
        if j > 100000:
            break
    return max(1, j)
