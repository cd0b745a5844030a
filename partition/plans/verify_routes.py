"""Verify, part 3: territories, routes, traversals, turns and coverage, from the network and the profile.

* Territories: disjoint, made of existing segments that need service (and are
  not deferred), together covering every segment that needs service.
* Every route is a closed walk from its crew's depot: the first traversal leaves
  the depot, the last one arrives there, consecutive traversals share a node.
* Every traversal drives an existing, open segment between its own ends, in a
  legal direction (one-way streets only forwards, unless the profile ignores
  them), with the segment's length and its service or deadhead minutes.
* Every turn is re-derived: the first traversal of a route has no incoming turn
  (``start``, 0 minutes); every other one's kind comes from the headings of the
  arriving and departing traversals, classified by the route engine's turn model
  (:class:`crewcut.solve.circuits.turns.TurnModel`), and its minutes are that
  kind's penalty in the profile.
* No turn is forbidden: where the network file holds turn restrictions
  (OpenStreetMap ``type=restriction``, read again from the file), no step may
  leave along a traversal that a restriction forbids after the step before it,
  except at the crew's own depot (the crew turns in its yard there, the rule
  :mod:`crewcut.solve.network.scope` plans with). A violation names the crew,
  the step and the restriction (kind ``"forbidden turn"``).
* Route totals (kilometres, minutes, U-turns, turns across traffic) equal the
  sums over their traversals.
* Coverage: across all crews every required pass is served exactly once
  (forward passes forwards, backward passes backwards, either-way passes in any
  direction), and only by the crew whose territory holds the segment.
"""
from __future__ import annotations

import numpy as np

from crewcut.solve.circuits.bans import BanTable
from crewcut.solve.circuits.turns import START, TurnModel
from crewcut.solve.costs import required_passes
from crewcut.solve.network.model import Network
from crewcut.solve.profile import Profile
from crewcut.solve.result import TURNS

from crewcut.plans.model import Plan, route_id
from crewcut.plans.violation import TOL_M, TOL_MIN, TOL_TURN_MIN, Violation, is_id, total_tol


def check_routes(plan: Plan, net: Network, profile: Profile, deferred: set[int]):
    """Yield the violations of the territories, the routes and the coverage."""
    p = required_passes(net, profile)
    need = p.total > 0
    crews = plan.crews
    owner = np.full(net.n_segments, -1, np.int64)
    for ci, crew in enumerate(crews):
        cid = crew.id
        for s in crew.territory:
            if not is_id(s, net.n_segments):
                yield Violation(f"crew '{cid}'", f"territory names segment {s!r}, which does not exist", "territory")
                return
            if not need[s]:
                yield Violation(f"crew '{cid}'", f"territory holds segment {s}, which needs no service", "territory")
                return
            if s in deferred:
                yield Violation(f"segment {s}", f"deferred to another day but in the territory of '{cid}'",
                                "deferred")
                return
            if owner[s] >= 0:
                yield Violation(f"segment {s}", f"in the territories of both '{crews[owner[s]].id}' and '{cid}'",
                                "territory")
                return
            owner[s] = ci
    if deferred:
        need = need.copy()
        need[sorted(deferred)] = False
    missing = np.flatnonzero(need & (owner < 0))
    if missing.size:
        yield Violation(f"segment {int(missing[0])}", f"needs service but is in no territory "
                        f"({missing.size} such segment(s))", "territory")
        return
    served = np.zeros((2, net.n_segments), np.int64)
    model = TurnModel.from_network(net, profile)
    bans = BanTable.of(net)
    for ci, crew in enumerate(crews):
        for ri, route in enumerate(crew.routes):
            found = next(_route(plan, net, profile, model, ci, ri, owner, served, bans), None)
            if found is not None:
                yield found
                return
    fw, bw, ei = p.forward.copy(), p.backward.copy(), p.either.copy()
    if deferred:
        for arr in (fw, bw, ei):
            arr[sorted(deferred)] = 0
    sf, sb = served
    bad = np.flatnonzero((sf < fw) | (sb < bw) | (sf + sb != fw + bw + ei))
    if bad.size:
        s = int(bad[0])
        yield Violation(f"segment {s} ('{net.seg_source[s]}')",
                        f"served {sf[s]} time(s) forward and {sb[s]} backward; it needs "
                        f"{fw[s]} forward, {bw[s]} backward and {ei[s]} either way, each exactly once", "coverage")


def _route(plan: Plan, net: Network, profile: Profile, model: TurnModel, ci: int, ri: int, owner, served,
           bans: BanTable | None = None):
    crews = plan.crews
    crew = crews[ci]
    depot = crew.depot_node
    route = crew.routes[ri]
    where = f"crew '{crew.id}' {route_id(ri)}"
    segs = plan.network.segments
    trs = route.traversals
    m_s = m_d = min_s = min_d = turn = 0.0
    fwd = np.zeros(len(trs), bool)
    for i, t in enumerate(trs):
        s, a, b = t.segment, t.from_node, t.to_node
        w = f"{where} step {i + 1}"
        if not is_id(s, net.n_segments):
            yield Violation(w, f"segment {s!r} does not exist")
            return
        if net.seg_closed[s]:
            yield Violation(w, f"drives segment {s}, which is closed")
            return
        u, v = int(net.seg_u[s]), int(net.seg_v[s])
        if (a, b) == (u, v):
            forward = True
        elif (a, b) == (v, u):
            forward = False
        else:
            yield Violation(w, f"goes {a} -> {b} along segment {s}, whose ends are {u} and {v}")
            return
        fwd[i] = forward
        if not forward and net.seg_oneway[s] and not profile.ignore_oneway:
            yield Violation(w, f"drives one-way segment {s} ('{net.seg_name[s]}') against its direction")
            return
        if i == 0 and a != depot:
            yield Violation(w, f"the route starts at node {a}, not at the depot {depot}")
            return
        if i > 0 and trs[i - 1].to_node != a:
            yield Violation(w, f"starts at node {a} but the previous step ended at {trs[i - 1].to_node}")
            return
        if abs(float(t.metres) - float(net.seg_length[s])) > TOL_M:
            yield Violation(w, f"metres {t.metres} differ from segment {s}'s length {net.seg_length[s]:.3f}",
                            "minutes")
            return
        mode = "service" if t.service else "deadhead"
        if t.service:
            if owner[s] != ci:
                other = crews[owner[s]].id if owner[s] >= 0 else "no crew"
                yield Violation(w, f"serves segment {s}, which belongs to {other}", "territory")
                return
            served[0 if forward else 1, s] += 1
            want = float(segs[s].service_min)
            m_s += float(t.metres)
            min_s += float(t.minutes)
        else:
            want = float(segs[s].deadhead_min)
            m_d += float(t.metres)
            min_d += float(t.minutes)
        if abs(float(t.minutes) - want) > TOL_MIN:
            yield Violation(w, f"minutes {t.minutes} differ from segment {s}'s {mode} time {want:.4f}", "minutes")
            return
        turn += float(t.turn_minutes)
    if trs and trs[-1].to_node != depot:
        yield Violation(f"{where} last step", f"ends at node {trs[-1].to_node}, not at the depot {depot}")
        return
    seg = np.array([t.segment for t in trs], np.int64)
    if bans is not None and seg.size > 1:
        bad = np.flatnonzero(bans.banned(seg[:-1], fwd[:-1], seg[1:], fwd[1:]))
        for i in (bad + 1).tolist():
            t0, t = trs[i - 1], trs[i]
            if t.from_node == depot:
                continue  # the crew turns in its yard
            rule = bans.source_of(int(seg[i - 1]), int(fwd[i - 1]), int(seg[i]), int(fwd[i])) or "a restriction"
            a, b = (f"{s} ('{net.seg_name[s] or net.seg_source[s]}')" for s in (t0.segment, t.segment))
            yield Violation(f"{where} step {i + 1}", f"turns from segment {a} into segment {b} at node "
                            f"{t.from_node}, which {rule} forbids", "forbidden turn")
            return
    code = np.full(seg.size, START, np.int64)
    if seg.size > 1:
        code[1:] = model.classify(seg[:-1], fwd[:-1], seg[1:], fwd[1:])
    minutes = model.seconds(code) / 60.0
    for i, t in enumerate(trs):
        kind = TURNS[int(code[i])]
        if t.turn != kind:
            why = ("the first traversal of a route has no incoming turn" if i == 0 else
                   f"the headings of segments {trs[i - 1].segment} and {t.segment} at node {t.from_node} give "
                   f"'{kind}'")
            yield Violation(f"{where} step {i + 1}", f"turn '{t.turn}', but {why}", "turn")
            return
        if abs(float(t.turn_minutes) - float(minutes[i])) > TOL_TURN_MIN:
            yield Violation(f"{where} step {i + 1}", f"turn_minutes {t.turn_minutes} for a '{kind}' turn; the "
                            f"profile charges {minutes[i]:.5f}", "turn")
            return
    tot = route.totals
    n = len(trs)
    wait = sum(float(t.wait_minutes) for t in trs)
    visit = sum(float(v.wait_min) + float(v.minutes) for v in route.visits)  # trips: facility stops
    pairs = (("service_km", m_s / 1000, TOL_M), ("deadhead_km", m_d / 1000, TOL_M),
             ("service_min", min_s, TOL_MIN), ("deadhead_min", min_d, TOL_MIN),
             ("turn_min", turn, TOL_MIN), ("wait_min", wait, TOL_MIN), ("visit_min", visit, TOL_MIN),
             ("total_min", min_s + min_d + turn + wait + visit, TOL_MIN))
    for key, got, unit in pairs:
        value = float(getattr(tot, key))
        if abs(value - got) > total_tol(n, unit) or not np.isfinite(value):
            yield Violation(where, f"totals.{key} is {getattr(tot, key)} but its traversals add up to {got:.4f}",
                            "totals")
            return
    for key, kind in (("u_turns", "u_turn"), ("across_turns", "across_traffic")):
        got = sum(t.turn == kind for t in trs)
        if getattr(tot, key) != got:
            yield Violation(where, f"totals.{key} is {getattr(tot, key)} but its traversals make {got}", "totals")
            return
    lb = route.lower_bound_min
    if isinstance(lb, bool) or not isinstance(lb, (int, float)) or not np.isfinite(lb) or lb < 0:
        yield Violation(where, f"lower_bound_min {lb!r} is not a number of minutes 0 or more", "lower bound")
        return
    if float(lb) > float(tot.total_min) + total_tol(n, TOL_MIN):
        yield Violation(where, f"lower_bound_min {route.lower_bound_min} exceeds the route's own total "
                        f"{tot.total_min}", "lower bound")
