"""Verify, part 4: the summary's figures, the crews over their limits and the lower bound, recomputed.

* Fleet plans: crews, longest, mean and shortest shift, their ratio, the total
  shift, service and deadhead minutes, the deadhead share, the defer list's
  count and minutes, and ``over_limit`` (exactly the crews whose shift exceeds
  their limit, with their figures) recomputed from the routes.
* One-crew plans: the total, the U-turns and turns across traffic from the route.
* Cycle plans: :mod:`crewcut.plans.verify_cycle` checks the per-day figures instead.
* The lower bound: recomputed from the network and the profile with
  :func:`crewcut.solve.postman.bounds.fleet_lower_bound` (the crews' depots, k
  crews, the segments still served); the recorded bound may not exceed it. A
  one-crew plan's bound may also use what the route engine's Eulerization proves
  (:func:`crewcut.solve.postman.bounds.route_lower_bound`); when the recorded
  bound exceeds the first figure it is recomputed that way before it is refused.
  The recorded gap must then be the recorded longest shift over the recorded
  bound, minus one.
"""
from __future__ import annotations

import dataclasses

import numpy as np

from crewcut.solve.errors import InputError
from crewcut.solve.network.model import Network
from crewcut.solve.profile import Profile

from crewcut.plans.model import FleetSummary, Plan, RouteSummary
from crewcut.plans.violation import TOL_MIN, Violation

_TOL_FIG = 0.01  # summary figures are sums over many rounded totals
_NUMBERS = {"crews", "longest_min", "mean_min", "shortest_min", "longest_over_mean", "lower_bound_min", "gap",
            "total_shift_min", "service_min", "deadhead_min", "deadhead_pct", "deferred_segments", "deferred_min",
            "total_min", "u_turns", "across_turns", "crew_days", "day_balance", "window_misses"}


_OPTIONAL = {"deferred_segments", "deferred_min", "crew_days", "day_balance", "window_misses"}


def _number(x) -> bool:
    return isinstance(x, (int, float)) and not isinstance(x, bool) and bool(np.isfinite(x))


def check_figures(plan: Plan, net: Network, profile: Profile):
    """Yield the summary's violations (module notes); nothing when the plan records no summary.

    Parameters
    ----------
    plan, net, profile : the plan, the network and the profile verify checks against.
    """
    summ = plan.summary
    if summ is None:
        return
    for f in dataclasses.fields(summ):
        v = getattr(summ, f.name)
        if f.name in _NUMBERS and not _number(v) and not (v is None and f.name in _OPTIONAL):
            yield Violation("summary", f"{f.name} is {v!r}, not a number", "summary")
            return
    for o in getattr(summ, "over_limit", ()):
        if not all(_number(getattr(o, k)) for k in ("shift_min", "limit_min", "over_min")):
            yield Violation("summary.over_limit", f"the entry of crew {o.crew!r} holds a value that is not a number",
                            "over limit")
            return
    if isinstance(summ, FleetSummary) and plan.settings.options.cycle is not None:
        from crewcut.plans.verify_cycle import cycle_figures

        yield from cycle_figures(plan, net, profile, summ)
        return
    if isinstance(summ, FleetSummary):
        yield from _fleet(plan, summ)
    elif isinstance(summ, RouteSummary):
        yield from _one_crew(plan, summ)
    else:
        return
    yield from _bound(plan, net, profile, summ)


def _near(a, b, tol: float = _TOL_FIG) -> bool:
    return a is not None and np.isfinite(float(a)) and abs(float(a) - float(b)) <= tol + 1e-6 * abs(float(b))


def _fleet(plan: Plan, summ: FleetSummary):
    crews = plan.crews
    shifts = np.array([c.shift_min for c in crews])
    routes = [r for c in crews for r in c.routes]
    dead_km = sum(r.totals.deadhead_km for r in routes)
    serv_km = sum(r.totals.service_km for r in routes)
    mean = float(shifts.mean())
    want = {"crews": len(crews), "longest_min": float(shifts.max()), "mean_min": mean,
            "shortest_min": float(shifts.min()), "total_shift_min": float(shifts.sum()),
            "longest_over_mean": float(shifts.max()) / mean if mean > 0 else 1.0,
            "service_min": sum(r.totals.service_min for r in routes),
            "deadhead_min": sum(r.totals.deadhead_min for r in routes),
            "deadhead_pct": 100.0 * dead_km / (dead_km + serv_km) if dead_km + serv_km > 0 else 0.0}
    for key, value in want.items():
        got = getattr(summ, key)
        if not _near(got, value, 1e-4 if key == "longest_over_mean" else _TOL_FIG):
            yield Violation("summary", f"{key} {got} but the routes give {value:.4f}", "summary")
            return
    listed = {o.crew: o for o in summ.over_limit}
    for c in crews:
        over = c.shift_min - c.shift_limit_min
        o = listed.get(c.id)
        if o is None and over > TOL_MIN:
            yield Violation("summary.over_limit", f"lists {len(listed)} crew(s) but crew '{c.id}' works "
                            f"{c.shift_min:.1f} minutes against a limit of {c.shift_limit_min:g}", "over limit")
            return
        if o is not None and (over < -TOL_MIN or not _near(o.shift_min, c.shift_min)
                              or not _near(o.limit_min, c.shift_limit_min) or not _near(o.over_min, over)):
            yield Violation("summary.over_limit", f"crew '{c.id}' is listed {o.over_min} minutes over, but it works "
                            f"{c.shift_min:.1f} minutes against a limit of {c.shift_limit_min:g}", "over limit")
            return
    if len(listed) != len(summ.over_limit) or set(listed) - {c.id for c in crews}:
        yield Violation("summary.over_limit", "names a crew twice or a crew that is not in the plan", "over limit")
        return
    d = plan.deferred or ()
    if (summ.deferred_segments or 0) != len(d) or not _near(summ.deferred_min or 0.0, sum(x.work_min for x in d)):
        yield Violation("summary", f"deferred_segments {summ.deferred_segments}, deferred_min {summ.deferred_min}, "
                        f"but the defer list holds {len(d)} street(s)", "summary")


def _one_crew(plan: Plan, summ: RouteSummary):
    if len(plan.crews) != 1 or len(plan.crews[0].routes) != 1 or summ.crews != 1:
        yield Violation("summary", "a one-crew summary, but the plan does not hold one crew with one route", "summary")
        return
    tot = plan.crews[0].routes[0].totals
    for key, value in (("total_min", tot.total_min), ("u_turns", tot.u_turns), ("across_turns", tot.across_turns)):
        if not _near(getattr(summ, key), value, TOL_MIN):
            yield Violation("summary", f"{key} {getattr(summ, key)} but the route gives {value}", "summary")
            return


def _bound(plan: Plan, net: Network, profile: Profile, summ):
    from crewcut.solve.postman.bounds import fleet_lower_bound

    crews = plan.crews
    fleet = isinstance(summ, FleetSummary)
    longest = float(summ.longest_min) if fleet else float(summ.total_min)
    served = sorted(s for c in crews for s in c.territory) if plan.deferred else None
    if not fleet:
        served = list(crews[0].territory)
    recorded = float(summ.lower_bound_min)
    try:
        lb = float(fleet_lower_bound(net, profile, [c.depot_node for c in crews], len(crews), served))
        if not fleet and recorded > lb + _bound_tol(lb):
            lb = max(lb, _route_bound(plan, net, profile, served))
    except InputError as exc:
        yield Violation("summary", f"the lower bound cannot be recomputed: {exc.message}", "lower bound")
        return
    if not np.isfinite(recorded) or recorded < 0 or recorded > lb + _bound_tol(lb):
        yield Violation("summary", f"lower_bound_min {summ.lower_bound_min} exceeds the lower bound recomputed from "
                        f"the network and the profile, {lb:.4f} minutes", "lower bound")
        return
    gap = longest / recorded - 1.0 if recorded > 0 else 0.0
    if not _near(summ.gap, gap, 1e-4):
        yield Violation("summary", f"gap {summ.gap} but the longest shift {longest:.4f} over the lower bound "
                        f"{recorded:.4f} gives {gap:.5f}", "lower bound")


def _bound_tol(lb: float) -> float:
    return 1e-3 + 1e-6 * abs(lb)


def _route_bound(plan: Plan, net: Network, profile: Profile, served: list[int]) -> float:
    """The route engine's own bound for a one-crew plan: its Eulerization's proof plus forced turns."""
    from crewcut.solve.postman.bounds import route_lower_bound
    from crewcut.solve.route import augmented_traversals

    depot = plan.crews[0].depot_node
    trav = augmented_traversals(net, profile, depot, served, seed=int(plan.settings.options.seed or 0))
    if trav is None:
        return 0.0
    return float(route_lower_bound(net, profile, depot, trav.tasks, trav.arcs, trav.aug.lower_bound))
