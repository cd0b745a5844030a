"""Verify, part 4b: trips. Facility visits, clock times at facilities and loads, re-derived.

For a profile with capacities (``[capacity.NAME]``) every route's loads are derived
again from the network (lengths, road classes), the profile (amount per km of
service pass) and the route's steps: no capacity may ever exceed its limit, and a
capacity marked ``end_empty`` must be reset before the route returns to its depot.
Every visit must be at the node of a configured facility (placed from the config as
the planner places it), reset exactly what that facility resets, stay its minutes,
and happen inside its opening hours by the clock rule of
:mod:`crewcut.solve.trips.loads` (a route without ``start_min`` starts at the cycle's
shift start, else 06:00). A plan without capacities may have no visits.
"""
from __future__ import annotations

from crewcut.plans.model import Plan
from crewcut.plans.violation import TOL_MIN, Violation
from crewcut.solve.errors import InputError
from crewcut.solve.network.model import Network
from crewcut.solve.profile import Profile
from crewcut.solve.trips.loads import load_trace, visit_clock
from crewcut.solve.trips.place import place_facilities
from crewcut.solve.trips.route_trips import shift_start

LOAD_TOL = 1e-6  # relative slack on a limit: plan files round lengths to the millimetre


def check_trips(plan: Plan, net: Network, profile: Profile):
    """Yield the first violation of the trip rules, crew by crew and route by route."""
    has_visits = any(r.visits for c in plan.crews for r in c.routes)
    if not profile.capacities:
        if has_visits:
            yield Violation("plan", "routes stop at facilities but the profile has no capacities", "trips")
        return
    try:
        placed = {p.facility.id: p for p in place_facilities(net, profile)}
    except InputError as exc:
        yield Violation("settings", f"facilities cannot be placed on the network: {exc.message}", "trips")
        return
    for crew in plan.crews:
        for ri, route in enumerate(crew.routes):
            where = f"crew '{crew.id}' route {ri + 1}"
            v = next(_route(route, crew.depot_node, net, profile, placed, where), None)
            if v is not None:
                yield v
                return


def _route(route, depot: int, net: Network, profile: Profile, placed: dict, where: str):
    trs = route.traversals
    visits = route.visits
    prev = 0
    for j, v in enumerate(visits):
        at = f"{where} visit {j + 1}"
        if not prev <= v.after <= len(trs):
            yield Violation(at, f"after = {v.after} is out of order or past the route's {len(trs)} steps", "trips")
            return
        prev = v.after
        p = placed.get(v.facility)
        if p is None:
            yield Violation(at, f"facility '{v.facility}' is not a facility of the config", "trips")
            return
        node = depot if v.after == 0 else trs[v.after - 1].to_node
        if not (v.node == node == p.node):
            yield Violation(at, f"the route is at node {node} and the visit records node {v.node}, but facility "
                            f"'{v.facility}' is at node {p.node}", "trips")
            return
        if tuple(sorted(v.resets)) != tuple(p.facility.resets):
            yield Violation(at, f"resets {', '.join(v.resets)}, but facility '{v.facility}' resets "
                            f"{', '.join(p.facility.resets)}", "trips")
            return
        if abs(v.minutes - p.facility.minutes) > TOL_MIN:
            yield Violation(at, f"stays {v.minutes} minutes; facility '{v.facility}' takes {p.facility.minutes}",
                            "trips")
            return
    start = shift_start(profile, route.start_min)
    arrive, _ = visit_clock(trs, visits, start)
    for j, (v, a) in enumerate(zip(visits, arrive.tolist())):
        at = f"{where} visit {j + 1}"
        f = placed[v.facility].facility
        if abs(v.arrive_min - a) > TOL_MIN * max(1, len(trs)) ** 0.5 + TOL_MIN:
            yield Violation(at, f"arrive_min {v.arrive_min} but the route reaches it at {a:.4f}", "trips")
            return
        if a + v.wait_min < f.open_min - TOL_MIN or a + v.wait_min + v.minutes > f.close_min + TOL_MIN:
            yield Violation(at, f"facility '{f.id}' is open {f.hours}; the stay runs from {a + v.wait_min:.1f} "
                            f"to {a + v.wait_min + v.minutes:.1f} minutes after midnight", "trips")
            return
    trace = load_trace(net, profile.capacities, trs, visits)
    for c, cap in enumerate(profile.capacities):
        if trace.peak[c] > cap.limit * (1 + LOAD_TOL) + LOAD_TOL:
            i = int((trace.after[:, c] > cap.limit * (1 + LOAD_TOL) + LOAD_TOL).argmax())
            yield Violation(f"{where} step {i + 1}", f"capacity '{cap.name}' holds {trace.after[i, c]:.4g} "
                            f"{cap.unit}, over its limit {cap.limit:g}", "trips")
            return
        if cap.end_empty and trace.end[c] > LOAD_TOL * cap.limit + LOAD_TOL:
            yield Violation(where, f"returns to the depot with {trace.end[c]:.4g} {cap.unit} of capacity "
                            f"'{cap.name}' not reset (it must end empty)", "trips")
            return
