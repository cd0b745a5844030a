"""Verify, part 5: a cycle plan's days, clock times and posted windows, and its per-day figures.

* A plan without a cycle has no route with a day; a cycle plan's every route has
  one: a day of the recorded cycle that its crew works, at most one route per
  crew and day, starting at the cycle's shift start.
* Every pass of a posted segment (the posting re-read from the network file) is
  served on the cycle day its posting names
  (:meth:`crewcut.solve.calendar.cycle.Cycle.day_of`) and, when it has a window,
  inside it by the clock rule of :mod:`crewcut.solve.calendar.clock`.
* Figures: the day routes' count, longest, mean and shortest day, the days over
  the limit (``over_limit`` lists exactly those, with their day), the day balance
  and the window misses, recomputed; the lower bound is recomputed for one crew
  per crew and working day (:func:`crewcut.solve.postman.bounds.fleet_lower_bound`).
"""
from __future__ import annotations

import numpy as np

from crewcut.solve.calendar.clock import window_misses
from crewcut.solve.calendar.dayroute import posted_windows
from crewcut.solve.errors import InputError
from crewcut.solve.network.model import Network
from crewcut.solve.profile import Profile

from crewcut.plans.model import FleetSummary, Plan
from crewcut.plans.violation import TOL_MIN, Violation

_TOL = 0.01


def _days_off(plan: Plan) -> dict[str, tuple[str, ...]]:
    """Each crew's days off, as the run options record them."""
    return {c.id: tuple(c.days_off) for c in plan.settings.options.crews or ()}


def check_cycle(plan: Plan, net: Network, profile: Profile):
    """Yield the violations of the days, clock starts and posted windows (module notes)."""
    cyc = plan.settings.options.cycle
    if cyc is None:
        for c in plan.crews:
            for i, r in enumerate(c.routes):
                if r.day is not None:
                    yield Violation(f"crew '{c.id}' route-{i + 1}", f"has day {r.day!r} but the plan records no "
                                    "cycle", "day")
                    return
        return
    day_of: dict[int, str] = {}
    for s in range(net.n_segments):
        p = net.posting(s)
        if p is not None:
            try:
                day_of[s] = cyc.day_of(p, f"segment {s}")
            except InputError as exc:
                yield Violation(f"segment {s} ('{net.seg_source[s]}')", exc.message, "day")
                return
    off = _days_off(plan)
    for c in plan.crews:
        seen: set[str] = set()
        for i, r in enumerate(c.routes):
            where = f"crew '{c.id}' route-{i + 1}"
            if r.day not in cyc.days:
                yield Violation(where, f"day {r.day!r} is not a day of the cycle ({', '.join(cyc.days)})", "day")
                return
            if r.day in off.get(c.id, ()):
                yield Violation(where, f"is driven on {r.day}, a day off of the crew", "day")
                return
            if r.day in seen:
                yield Violation(where, f"is the crew's second route on {r.day}", "day")
                return
            seen.add(r.day)
            if r.start_min is None or abs(float(r.start_min) - cyc.shift_start_min) > TOL_MIN:
                yield Violation(where, f"starts at {r.start_min!r} min, not at the cycle's shift start "
                                f"({cyc.shift_start_min} min after midnight)", "clock")
                return
            for j, x in enumerate(r.traversals):
                if x.service and x.segment in day_of and day_of[x.segment] != r.day:
                    yield Violation(f"{where} step {j + 1}", f"serves segment {x.segment} on {r.day}; its posting "
                                    f"names {day_of[x.segment]}", "window")
                    return
            segs = {x.segment for x in r.traversals if x.service}
            wins = posted_windows(net, segs)
            bad = window_misses(r.traversals, r.start_min, wins)
            if bad:
                j = bad[0]
                s = r.traversals[j].segment
                lo, hi = wins[s]
                yield Violation(f"{where} step {j + 1}", f"serves segment {s} outside its posted window "
                                f"({lo}-{hi} min after midnight; {len(bad)} such pass(es))", "window")
                return


def cycle_figures(plan: Plan, net: Network, profile: Profile, summ: FleetSummary):
    """Yield the violations of a cycle plan's summary figures and lower bound (module notes)."""
    cyc = plan.settings.options.cycle
    routes = [(c, r) for c in plan.crews for r in c.routes]
    t = np.array([r.totals.total_min for _, r in routes]) if routes else np.zeros(1)
    balance = 1.0
    for c in plan.crews:
        d = np.array([r.totals.total_min for r in c.routes])
        if d.size and d.mean() > 0:
            balance = max(balance, float(d.max() / d.mean()))
    misses = sum(len(window_misses(r.traversals, r.start_min or 0.0,
                                   posted_windows(net, {x.segment for x in r.traversals if x.service})))
                 for _, r in routes)
    want = {"crew_days": len(routes), "longest_min": float(t.max()), "mean_min": float(t.mean()),
            "shortest_min": float(t.min()), "total_shift_min": float(t.sum()), "day_balance": balance,
            "window_misses": misses}
    for key, value in want.items():
        got = getattr(summ, key)
        if got is None or abs(float(got) - value) > _TOL + 1e-6 * abs(value):
            yield Violation("summary", f"{key} {got} but the day routes give {value:.4f}", "summary")
            return
    dl = plan.deferred or ()
    if (summ.deferred_segments or 0) != len(dl) or abs((summ.deferred_min or 0.0) - sum(x.work_min for x in dl)) > _TOL:
        yield Violation("summary", f"deferred_segments {summ.deferred_segments}, deferred_min {summ.deferred_min}, "
                        f"but the defer list holds {len(dl)} street(s)", "summary")
        return
    over = {(c.id, r.day) for c, r in routes if r.totals.total_min > c.shift_limit_min + TOL_MIN}
    listed = {(o.crew, o.day) for o in summ.over_limit}
    if over != listed:
        miss = sorted(over - listed) or sorted(listed - over)
        yield Violation("summary.over_limit", f"lists {len(listed)} day(s) over the limit; the routes make "
                        f"{len(over)} (first difference: crew '{miss[0][0]}' on {miss[0][1]})", "over limit")
        return
    from crewcut.solve.postman.bounds import fleet_lower_bound

    off = _days_off(plan)
    absent = {(ch.crew, ch.day) for ch in plan.history.changes if ch.kind == "absent" and ch.day is not None}
    depots = [c.depot_node for c in plan.crews for d in cyc.days
              if d not in off.get(c.id, ()) and (c.id, d) not in absent]
    served = None
    if plan.deferred:
        gone = {d.segment for d in plan.deferred}
        served = [s for s in range(net.n_segments) if s not in gone]
    try:
        lb = float(fleet_lower_bound(net, profile, depots, len(depots), served))
    except InputError as exc:
        yield Violation("summary", f"the lower bound cannot be recomputed: {exc.message}", "lower bound")
        return
    if float(summ.lower_bound_min) > lb + 1e-3 + 1e-6 * lb:
        yield Violation("summary", f"lower_bound_min {summ.lower_bound_min} exceeds the bound recomputed for "
                        f"{len(depots)} crew-days, {lb:.4f} minutes", "lower bound")
        return
    gap = float(summ.longest_min) / float(summ.lower_bound_min) - 1.0 if summ.lower_bound_min > 0 else 0.0
    if abs(float(summ.gap) - gap) > 1e-4:
        yield Violation("summary", f"gap {summ.gap} but the longest day over the lower bound gives {gap:.5f}",
                        "lower bound")
