"""Planning a sweeping cycle: territories for the crews, then one route per crew and working day.

Problem
-------
Serve every required pass of a street network once per cycle of working days
with k crews: each crew has a connected territory; each working day it drives
one closed route from its depot within its shift limit, starting at the
cycle's shift start; streets posted for a fixed day are served that day, inside
their window; a crew's days are contiguous and even. Minimise the longest day.
A heuristic with a proven lower bound, never a claim of optimality.

Method
------
Where no street is posted:

1. Territories (:func:`crewcut.fleet.planner.lay_out_territories`) for crews whose
   limit is a whole cycle's (shift limit x working days); a street posted for a
   day a crew does not work is not eligible for that crew. Routed and balanced as
   a fresh plan (:func:`crewcut.fleet.assemble.route_and_balance`): one route of a
   whole territory stands for the crew's cycle.
2. Each territory split into days (:func:`crewcut.cycle.days.split_days`), routed
   with clock times and posted windows, balanced between days.
Where streets are posted, a posted district is swept by as many crews as its day
and window need, so each crew-day is laid out on its own instead
(:mod:`crewcut.cycle.byday`); crews keep nearby regions from day to day.

Lower bound: :func:`crewcut.solve.postman.bounds.fleet_lower_bound` for as many
   crews as there are crew-days, each at its crew's depot: no day can be shorter
   than the work spread over all of them, nor than the longest round trip.
"""
from __future__ import annotations

from dataclasses import replace

import numpy as np

from crewcut.solve.calendar.clock import window_misses
from crewcut.solve.calendar.cycle import Cycle
from crewcut.solve.calendar.postings import clock
from crewcut.solve.calendar.dayroute import posted_windows
from crewcut.solve.costs import required_passes, service_minutes
from crewcut.solve.errors import InputError
from crewcut.solve.network.model import Network
from crewcut.solve.profile import Crew, Profile
from crewcut.solve.readers.area import ServiceArea

from crewcut.cycle.byday import plan_by_day
from crewcut.cycle.days import split_days
from crewcut.fleet.assemble import crews_needed, route_and_balance, summary_figures
from crewcut.solve.trips.checks import check_trips
from crewcut.fleet.executor import LocalRouter, check_workers
from crewcut.fleet.planner import crews_reach, lay_out_territories, plan_checks
from crewcut.fleet.progress import ProgressFn, with_log
from crewcut.fleet.territories import territories_of
from crewcut.plans.model import BalanceLimits, CrewPlan, FleetSummary, OverLimit, Plan, RunOptions, recorded_crew
from crewcut.plans.planfile import build_plan

CYCLE_METHOD = ("cluster first (k-means seeds, connected growth) for a cycle's work, route second, boundary "
                "balancing; then each territory split into days the same way; heuristic")


def pinned_days(net: Network, profile: Profile, cycle: Cycle) -> np.ndarray:
    """(m,) index into ``cycle.days`` of each segment's posted day, -1 where none is posted or no service is needed.

    Raises :class:`InputError` for a posted day not in the cycle, or a window too short for one pass.
    """
    m = net.n_segments
    out = np.full(m, -1, np.int64)
    if not net.seg_posting:
        return out
    need = required_passes(net, profile).total > 0
    smin = service_minutes(net, profile)
    for s in np.flatnonzero(need).tolist():
        p = net.posting(s)
        if p is None:
            continue
        where = f"segment {s} ('{net.seg_source[s]}', {net.seg_name[s] or 'unnamed'})"
        out[s] = cycle.index(cycle.day_of(p, where))
        if p.has_window and smin[s] > p.close_min - p.open_min + 1e-9:
            raise InputError(f"{where}: posted window {p.window_text()} lasts {p.close_min - p.open_min} min, "
                             f"but one pass of the street takes {smin[s]:.1f} min",
                             "widen the posted window, or split the street where its posted section ends")
    return out


def plan_cycle(net: Network, profile: Profile, crews: list[Crew], cycle: Cycle, *, seed: int = 0,
               workers: int | None = None, time_limit_s: float | None = None, tolerance: float = 0.003,
               max_iterations: int = 500, day_tolerance: float = 0.03, route_time_limit_s: float = 10.0,
               progress: ProgressFn | None = None, source: str = "", area: ServiceArea | None = None,
               unservable: str | None = None) -> Plan:
    """Plan territories and one route per crew and working day of ``cycle``; returns the plan.

    Parameters are those of :func:`crewcut.fleet.planner.plan_fleet`, plus ``cycle`` (the working
    days and the shift start) and ``day_tolerance`` (the day balancer stops when a crew's longest day
    over its mean day is at most 1 + this). Crews' ``days_off`` name cycle days they do not work.
    """
    plan_checks(crews, seed, time_limit_s, tolerance, max_iterations)
    check_trips(net, profile, [int(c.depot_node) for c in crews], [float(c.shift_limit_min) for c in crews],
                cycle.shift_start_min)
    if not 0 <= day_tolerance < 1:
        raise InputError(f"`day_tolerance` is {day_tolerance!r}", "give a share in [0, 1), e.g. 0.03",
                         param="day_tolerance")
    check_workers(workers)
    report = with_log(progress)
    working = _working_days(crews, cycle)
    pinned = pinned_days(net, profile, cycle)
    _check_day_capacity(net, profile, crews, cycle, working, pinned)
    k, m = len(crews), net.n_segments
    allowed = np.ones((k, m), bool)
    for i, days in enumerate(working):
        off = [cycle.index(d) for d in cycle.days if d not in days]
        allowed[i, np.isin(pinned, off)] = False
    if (pinned >= 0).any():
        plans, scope, net = _by_day(net, profile, crews, cycle, working, pinned, allowed, seed=seed, workers=workers,
                                    time_limit_s=time_limit_s, tolerance=tolerance, day_tolerance=day_tolerance,
                                    max_iterations=max_iterations,
                                    route_time_limit_s=route_time_limit_s, report=report, area=area,
                                    unservable=unservable)
    else:
        plans, scope, net = _territories_first(net, profile, crews, cycle, working, pinned, allowed, seed=seed,
                                               workers=workers, time_limit_s=time_limit_s, tolerance=tolerance,
                                               max_iterations=max_iterations, day_tolerance=day_tolerance,
                                               route_time_limit_s=route_time_limit_s, report=report, area=area,
                                               unservable=unservable)
    report("lower bound", 0, 1)
    from crewcut.solve.postman.bounds import fleet_lower_bound

    day_depots = [int(c.depot_node) for i, c in enumerate(crews) for _ in working[i]]
    lb = float(fleet_lower_bound(net, profile, day_depots, len(day_depots)))
    report("lower bound", 1, 1)
    summary = cycle_summary(net, plans, working, lb)
    options = RunOptions(seed=int(seed), crews=tuple(recorded_crew(c) for c in crews),
                         balance=BalanceLimits(float(tolerance), int(max_iterations),
                                               None if time_limit_s is None else float(time_limit_s)),
                         route_time_limit_s=float(route_time_limit_s), unservable=scope.unservable,
                         area=scope.area, cycle=cycle)
    return build_plan(net, profile, plans, source=source, options=options, summary=summary,
                      left_out=scope.left_out)


def _territories_first(net, profile, crews, cycle, working, pinned, allowed, *, seed, workers, time_limit_s,
                       tolerance, max_iterations, day_tolerance, route_time_limit_s, report, area, unservable):
    """Method steps 1 and 2: territories for a cycle's work, then each split into days."""
    k, m = len(crews), net.n_segments
    weekly = [replace(c, shift_limit_min=c.shift_limit_min * len(working[i])) for i, c in enumerate(crews)]
    lay = lay_out_territories(net, profile, weekly, seed=seed, progress=report, area=area, unservable=unservable,
                              allowed=allowed)
    net = lay.net
    with LocalRouter(net, profile, workers=workers, time_limit_s=route_time_limit_s) as router:
        state, _bal = route_and_balance(router, lay.sg, lay.eligible, weekly, lay.owner, seed=seed,
                                        tolerance=tolerance, max_iterations=max_iterations,
                                        time_limit_s=time_limit_s, progress=report, border=lay.border)
    terr = territories_of(state.owner, k)
    plans = []
    with LocalRouter(net, profile, workers=workers, time_limit_s=route_time_limit_s,
                     start_min=cycle.shift_start_min) as router:
        for i, c in enumerate(crews):
            report("days", i, k)
            local = np.full(m, -1, np.int64)
            for j, d in enumerate(working[i]):
                local[pinned == cycle.index(d)] = j
            week = split_days(net, lay.sg, router, depot=int(c.depot_node), limit_min=c.shift_limit_min,
                              days=working[i], territory=terr[i], pinned=local, seed=seed,
                              tolerance=day_tolerance, max_iterations=max_iterations, time_limit_s=time_limit_s,
                              crew_id=c.id)
            routes = tuple(r for r in week.routes if r.traversals)
            plans.append(CrewPlan(crew=c, territory=tuple(terr[i].tolist()), routes=routes))
        report("days", k, k)
    return plans, lay.scope, net


def _by_day(net, profile, crews, cycle, working, pinned, allowed, *, seed, workers, time_limit_s, tolerance,
            day_tolerance, max_iterations, route_time_limit_s, report, area, unservable):
    """Where streets are posted: a region per crew-day (:mod:`crewcut.cycle.byday`)."""
    reach = crews_reach(net, profile, crews, area=area, unservable=unservable, allowed=allowed)
    net = reach.net
    report("territories", 0, 1)
    with LocalRouter(net, profile, workers=workers, time_limit_s=route_time_limit_s,
                     start_min=cycle.shift_start_min) as router:
        out = plan_by_day(net, reach.sg, router, crews, working, cycle.days, pinned, reach.eligible,
                          start_min=cycle.shift_start_min, seed=seed,
                          tolerance=max(tolerance, day_tolerance), max_iterations=max_iterations, time_limit_s=time_limit_s,
                          progress=report)
    report("territories", 1, 1)
    plans = []
    for i, c in enumerate(crews):
        idx = [t for t, (ci, _d) in enumerate(out.slots) if ci == i]
        routes = tuple(out.routes[t] for t in idx if out.routes[t].traversals)
        terr = np.flatnonzero(np.isin(out.owner, idx))
        plans.append(CrewPlan(crew=c, territory=tuple(terr.tolist()), routes=routes))
    return plans, reach.scope, net


def _working_days(crews: list[Crew], cycle: Cycle) -> list[tuple[str, ...]]:
    out = []
    for c in crews:
        bad = [d for d in c.days_off if d not in cycle.days]
        if bad:
            raise InputError(f"crew '{c.id}': days off {', '.join(bad)} are not in the cycle ({', '.join(cycle.days)})",
                             "name days of the cycle")
        days = tuple(d for d in cycle.days if d not in c.days_off)
        if not days:
            raise InputError(f"crew '{c.id}' has every day of the cycle off", "give the crew at least one working day")
        out.append(days)
    return out


def _check_day_capacity(net, profile, crews, cycle, working, pinned) -> None:
    """Posted work on a day must fit in the shifts of the crews working that day (service time alone)."""
    passes = required_passes(net, profile).total
    work = service_minutes(net, profile) * passes
    for j, d in enumerate(cycle.days):
        on = pinned == j
        if not on.any():
            continue
        crews_on = [c for c, days in zip(crews, working) if d in days]
        cap = sum(c.shift_limit_min for c in crews_on)
        need = float(work[on].sum())
        if need > cap + 1e-9:
            who = "no crew works that day" if cap == 0 else f"the crews working that day have {cap:,.0f} min"
            raise InputError(f"{int(on.sum())} street(s) posted for {d} need {need:,.1f} min of service; {who}",
                             f"post some of them for another day, or add crews (or working days) on {d}")
        by_window: dict[tuple[int, int], list[int]] = {}
        for s in np.flatnonzero(on).tolist():
            p = net.posting(s)
            if p.has_window:
                by_window.setdefault((p.open_min, p.close_min), []).append(s)
        for (lo, hi), segs in sorted(by_window.items()):
            need = float(work[segs].sum())
            room = sum(min(hi - lo, c.shift_limit_min) for c in crews_on)
            if need > room + 1e-9:
                raise InputError(
                    f"{len(segs)} street(s) posted for {d} {clock(lo)}-{clock(hi)} need {need:,.1f} min of service "
                    f"inside that window; the {len(crews_on)} crew(s) working {d} have {room:,.0f} min in it "
                    f"(first: segment {segs[0]}, '{net.seg_source[segs[0]]}')",
                    "widen the window, post some of the streets for another window or day, or add crews that day")


def cycle_summary(net: Network, plans: list[CrewPlan], working: list[tuple[str, ...]], lb: float) -> FleetSummary:
    """Per-day figures of a cycle plan: longest, mean and shortest day, days over the limit, day balance."""
    days = [r.totals.total_min for p in plans for r in p.routes]
    shifts = np.array(days) if days else np.zeros(1)
    over = tuple(OverLimit(p.id, r.totals.total_min, p.shift_limit_min, r.totals.total_min - p.shift_limit_min,
                           day=r.day)
                 for p in plans for r in p.routes if r.totals.total_min > p.shift_limit_min + 1e-9)
    balance = 1.0
    misses = 0
    for p in plans:
        t = np.array([r.totals.total_min for r in p.routes])
        if t.size and t.mean() > 0:
            balance = max(balance, float(t.max() / t.mean()))
        for r in p.routes:
            segs = {x.segment for x in r.traversals if x.service}
            misses += len(window_misses(r.traversals, r.start_min or 0.0, posted_windows(net, segs)))
    capacity = np.array([p.shift_limit_min * len(w) for p, w in zip(plans, working)])
    return FleetSummary(
        **summary_figures(plans, shifts, lb),
        over_limit=over, crews_needed_estimate=crews_needed(float(shifts.sum()), 0.0, capacity),
        method=CYCLE_METHOD, crew_days=len(days), day_balance=balance, window_misses=misses)
