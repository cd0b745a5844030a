"""Rebalancing one day of a cycle plan: a crew absent on Tuesday changes Tuesday only.

Problem
-------
A cycle plan holds one route per crew and working day. When the day's changes
come (a crew absent, a street closed, a relief crew), only that day's routes may
change: every other day keeps its routes, its streets and its signs. The day's
streets of an absent crew go to the neighbouring crews working that day, or, with
``overflow="defer"``, to the defer list; a street is never moved to another day.

Method
------
The day is cut out as a fleet plan of its own: the network with service only on
that day's streets (everything else may still be driven on), the crews working
that day, each holding its route of the day. :func:`crewcut.fleet.replan.replan`
rebalances it (release, hand-over flow, stability-charged balancing, defer), its
router giving every route the cycle's clock start and posted windows
(:func:`crewcut.solve.calendar.dayroute.plan_day_route`). The new day's routes then
take the old ones' place in the cycle plan; the summary is the cycle's per-day
summary again, with the defer list counted.
"""
from __future__ import annotations

import dataclasses

import numpy as np

from crewcut.solve.errors import InputError
from crewcut.solve.network.model import SERVICE_NONE, Network
from crewcut.solve.profile import Profile
from crewcut.solve.result import RouteTotals

from crewcut.cycle.planner import cycle_summary
from crewcut.fleet.changes import Changes
from crewcut.fleet.executor import LocalRouter
from crewcut.fleet.replan import replan
from crewcut.plans.model import CrewPlan, History, Plan, RunOptions
from crewcut.plans.planfile import build_plan, plan_digest
from crewcut.plans.verify import profile_of_plan


def replan_day(plan: Plan, net: Network, changes: Changes, day: str, *, profile: Profile | None = None,
               stability: float = 0.5, overflow: str | None = None, seed: int = 0, workers: int | None = None,
               time_limit_s: float | None = None, max_iterations: int = 500, progress=None,
               parent: dict | None = None, source: str | None = None,
               network_name: str = "the network") -> Plan:
    """A new cycle plan in which only ``day``'s routes changed (module docstring).

    Parameters are those of :func:`crewcut.fleet.replan.replan`, plus ``day`` (a day of the
    plan's cycle). Closing or adding streets, extra crews and shift limits apply to that day.
    """
    cyc = plan.settings.options.cycle
    if cyc is None:
        raise InputError("`day` is given but the plan has no cycle", "leave out the day for a plan of one shift "
                         "per crew", param="day")
    if day not in cyc.days:
        raise InputError(f"`day` is {day!r}, not a day of the plan's cycle ({', '.join(cyc.days)})",
                         "give one of the cycle's days", param="day")
    if changes.opened is not None:
        raise InputError("streets cannot be added to one day of a cycle", "add them to the street file and plan "
                         "the cycle again")
    profile = profile or profile_of_plan(plan)
    day_plan, day_net = _day_plan(plan, net, profile, day)
    router = LocalRouter(day_net, profile, workers=workers,
                         time_limit_s=plan.settings.options.route_time_limit_s or 10.0,
                         start_min=cyc.shift_start_min)
    try:
        new_day = replan(day_plan, day_net, changes, profile=profile, stability=stability, overflow=overflow,
                         seed=seed, workers=workers, time_limit_s=time_limit_s, max_iterations=max_iterations,
                         progress=progress, router=router, parent=parent or {"sha256": plan_digest(plan)},
                         source=source or plan.network.source, network_name=network_name)
    finally:
        router.close()
    return _merge(plan, net, profile, day, new_day)


def _day_plan(plan: Plan, net: Network, profile: Profile, day: str) -> tuple[Plan, Network]:
    """The day as a fleet plan of its own, on the network with service on that day's streets only."""
    served = np.zeros(net.n_segments, bool)
    crews = []
    for c in plan.crews:
        r = next((x for x in c.routes if x.day == day), None)
        if r is None:
            continue
        segs = sorted({x.segment for x in r.traversals if x.service})
        served[segs] = True
        crews.append(CrewPlan(crew=c.crew, territory=tuple(segs), routes=(dataclasses.replace(r, day=None),)))
    if not crews:
        raise InputError(f"no crew has a route on {day}", "give a day with routes", param="day")
    svc = net.seg_service.copy()
    svc[~served] = SERVICE_NONE
    day_net = dataclasses.replace(net, seg_service=svc)
    options = dataclasses.replace(plan.settings.options, cycle=None, balance=None,
                                  crews=tuple(c.crew for c in crews))
    return build_plan(day_net, profile, crews, source=plan.network.source, options=options,
                      left_out=plan.left_out), day_net


def _merge(plan: Plan, net: Network, profile: Profile, day: str, new_day: Plan) -> Plan:
    cyc = plan.settings.options.cycle
    by_id = {c.id: c for c in new_day.crews}
    crews = []
    for c in plan.crews:
        others = [r for r in c.routes if r.day != day]
        got = by_id.get(c.id)
        if got is not None and got.routes and got.routes[0].traversals:
            r = got.routes[0]  # the day plan's file form has no clock: put the day's back
            others.append(dataclasses.replace(r, day=day, start_min=float(cyc.shift_start_min),
                                              totals=RouteTotals.of(r.traversals)))
        others.sort(key=lambda r: cyc.days.index(r.day))
        terr = sorted({x.segment for r in others for x in r.traversals if x.service})
        crews.append(CrewPlan(crew=c.crew, territory=tuple(terr), routes=tuple(others)))
    off = {c.id: set(c.days_off) for c in plan.settings.options.crews or ()}
    working = [tuple(d for d in cyc.days if d not in off.get(c.id, ())) for c in plan.crews]
    absent = {ch.crew for ch in new_day.history.changes if ch.kind == "absent"}
    lb_slots = [(c, d) for c, w in zip(plan.crews, working) for d in w
                if not (d == day and c.id in absent)]
    from crewcut.solve.postman.bounds import fleet_lower_bound

    deferred = new_day.deferred
    served = None
    if deferred:
        gone = {d.segment for d in deferred}
        served = [s for s in range(net.n_segments) if s not in gone]
    lb = float(fleet_lower_bound(net, profile, [c.depot_node for c, _ in lb_slots], len(lb_slots), served))
    summary = cycle_summary(net, crews, working, lb)
    if deferred:
        summary = dataclasses.replace(summary, deferred_segments=len(deferred),
                                      deferred_min=float(sum(d.work_min for d in deferred)))
    h = new_day.history
    history = History(parent=h.parent, changes=tuple(dataclasses.replace(ch, day=day) for ch in h.changes),
                      parent_path=h.parent_path, parent_fingerprint=plan.network.fingerprint,
                      generation=h.generation, lineage=h.lineage, stability=h.stability, overflow=h.overflow)
    options: RunOptions = dataclasses.replace(plan.settings.options, seed=new_day.settings.options.seed,
                                              rebalance=new_day.settings.options.rebalance)
    return build_plan(net, profile, crews, source=new_day.network.source, options=options, summary=summary,
                      history=history, deferred=list(deferred) if deferred is not None else None,
                      left_out=plan.left_out)
