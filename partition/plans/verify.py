"""Checking a plan file against a street network, independently of the planner.

Nothing here calls the planner or the route engine: the checks read the plan
(:class:`crewcut.plans.model.Plan`) and the network model and test the invariants
directly. Records that are not shaped as crewcut writes them never get here: the
plan file's reader refuses them (:func:`crewcut.plans.planfile.read_plan`).

1. The network is the one the plan was made on (fingerprint, then every segment's
   ends, length, direction and closure).
2. Territories: disjoint, made of existing segments that need service, together
   covering every segment that needs service.
3. Every route is a closed walk from its crew's depot: the first traversal leaves
   the depot, the last one arrives there, consecutive traversals share a node.
4. Every traversal drives an existing, open segment between its own ends, in a
   legal direction (one-way streets only forwards, unless the profile ignores them).
5. Coverage: across all crews every required pass is served exactly once (forward
   passes forwards, backward passes backwards, either-way passes in any direction),
   and only by the crew whose territory holds the segment.
6. Totals: traversal metres equal segment lengths, minutes equal the segment's
   service or deadhead minutes, route totals equal the sums of their traversals,
   the summary's longest and mean shift match (that each crew's recorded shift
   equals the sum of its routes is checked when the file is read).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from crewcut.solve.costs import deadhead_minutes, required_passes, service_minutes
from crewcut.solve.network.model import Network
from crewcut.solve.profile import Profile

from crewcut.plans.model import Plan, route_id

# Files round metres to 3 decimals, minutes to 4-5: sums of thousands of rounded
# numbers drift by at most a few thousandths.
_TOL_M = 0.01
_TOL_MIN = 1e-3


@dataclass(frozen=True)
class Violation:
    where: str
    message: str

    def __str__(self) -> str:
        return f"{self.where}: {self.message}"


def check_plan(plan: Plan, net: Network, profile: Profile, *, first_only: bool = True) -> list[Violation]:
    """All violations found (just the first one with ``first_only``); empty when the plan is valid.

    Records shaped or linked other than crewcut writes them are refused earlier,
    when the file is read (:func:`crewcut.plans.planfile.read_plan`).
    """
    out: list[Violation] = []
    for v in _checks(plan, net, profile):
        out.append(v)
        if first_only:
            break
    return out


def _is_id(x, n: int) -> bool:
    """A segment or node id: a whole number (not true/false) in [0, n)."""
    return isinstance(x, (int, np.integer)) and not isinstance(x, bool) and 0 <= x < n


def _total_tol(n: int, unit: float) -> float:
    return unit + n * 5e-5


def _checks(plan: Plan, net: Network, profile: Profile):
    nw = plan.network
    if nw.fingerprint != net.fingerprint:
        yield Violation("network", "the plan was made on a different network (fingerprint differs)")
        return
    segs = nw.segments
    if len(segs) != net.n_segments or len(nw.nodes) != net.n_nodes:
        yield Violation("network", f"the plan lists {len(segs)} segments and {len(nw.nodes)} nodes, "
                        f"the network has {net.n_segments} and {net.n_nodes}")
        return
    for s, rec in enumerate(segs):
        if (rec.id != s or rec.from_node != int(net.seg_u[s]) or rec.to_node != int(net.seg_v[s])
                or rec.oneway != bool(net.seg_oneway[s]) or rec.closed != bool(net.seg_closed[s])
                or abs(float(rec.length_m) - float(net.seg_length[s])) > _TOL_M):
            yield Violation(f"segment {s}", "differs from the network (ends, length, one-way or closure)")
            return
    p = required_passes(net, profile)
    need = p.total > 0
    for s, rec in enumerate(segs):
        got = rec.passes
        if (got.forward, got.backward, got.either) != (int(p.forward[s]), int(p.backward[s]), int(p.either[s])):
            shown = {"forward": got.forward, "backward": got.backward, "either": got.either}
            yield Violation(f"segment {s}", f"the plan records passes {shown}, the network and profile need "
                            f"forward {p.forward[s]}, backward {p.backward[s]}, either {p.either[s]}")
            return
    smin = np.array([float(r.service_min) for r in segs])
    dmin = np.array([float(r.deadhead_min) for r in segs])
    # The recorded minutes must be what the profile gives for this network (the
    # fingerprint does not cover road classes or speeds).
    for name, got, want in (("service_min", smin, service_minutes(net, profile)),
                            ("deadhead_min", dmin, deadhead_minutes(net, profile))):
        off = np.flatnonzero(np.abs(got - want) > 1e-4 + 1e-6 * want)
        if off.size:
            s = int(off[0])
            yield Violation(f"segment {s}", f"the plan records {name} {got[s]:.5f}, the network and profile give "
                            f"{want[s]:.5f} (different speeds or road classes?)")
            return
    ignore_oneway = bool(plan.settings.profile.ignore_oneway)
    crews = plan.crews
    if not crews:
        yield Violation("crews", "the plan has no crew")
        return
    # A rebalanced plan may defer low-priority streets to another day: they need no
    # service today, and no crew may hold them.
    deferred = set()
    for d in plan.deferred or ():
        s = d.segment
        if not (_is_id(s, net.n_segments) and need[s]):
            yield Violation("deferred", f"the defer list names {s!r}, which is not a segment needing service")
            return
        deferred.add(s)
    owner = np.full(net.n_segments, -1, np.int64)
    ids = set()
    for ci, crew in enumerate(crews):
        cid = crew.id
        if cid in ids:
            yield Violation(f"crew '{cid}'", "crew id used twice")
            return
        ids.add(cid)
        for s in crew.territory:
            if not _is_id(s, net.n_segments):
                yield Violation(f"crew '{cid}'", f"territory names segment {s!r}, which does not exist")
                return
            if not need[s]:
                yield Violation(f"crew '{cid}'", f"territory holds segment {s}, which needs no service")
                return
            if s in deferred:
                yield Violation(f"segment {s}", f"deferred to another day but in the territory of '{cid}'")
                return
            if owner[s] >= 0:
                yield Violation(f"segment {s}", f"in the territories of both '{crews[owner[s]].id}' and '{cid}'")
                return
            owner[s] = ci
    if deferred:
        need = need.copy()
        need[sorted(deferred)] = False
    missing = np.flatnonzero(need & (owner < 0))
    if missing.size:
        yield Violation(f"segment {int(missing[0])}", f"needs service but is in no territory "
                        f"({missing.size} such segment(s))")
        return
    served_f = np.zeros(net.n_segments, np.int64)
    served_b = np.zeros(net.n_segments, np.int64)
    shifts = []
    for ci, crew in enumerate(crews):
        cid = crew.id
        depot = crew.depot_node
        if not _is_id(depot, net.n_nodes):
            yield Violation(f"crew '{cid}'", f"depot node {depot!r} does not exist")
            return
        shift = 0.0
        for ri, route in enumerate(crew.routes):
            where = f"crew '{cid}' {route_id(ri)}"
            trs = route.traversals
            m_s = m_d = min_s = min_d = turn = 0.0
            for i, t in enumerate(trs):
                s, a, b = t.segment, t.from_node, t.to_node
                w = f"{where} step {i + 1}"
                if not _is_id(s, net.n_segments):
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
                if not forward and net.seg_oneway[s] and not ignore_oneway:
                    yield Violation(w, f"drives one-way segment {s} against its direction")
                    return
                if i == 0 and a != depot:
                    yield Violation(w, f"the route starts at node {a}, not at the depot {depot}")
                    return
                if i > 0 and trs[i - 1].to_node != a:
                    yield Violation(w, f"starts at node {a} but the previous step ended at {trs[i - 1].to_node}")
                    return
                if abs(float(t.metres) - float(net.seg_length[s])) > _TOL_M:
                    yield Violation(w, f"metres {t.metres} differ from segment {s}'s length "
                                    f"{net.seg_length[s]:.3f}")
                    return
                mode = "service" if t.service else "deadhead"
                if t.service:
                    if owner[s] != ci:
                        other = crews[owner[s]].id if owner[s] >= 0 else "no crew"
                        yield Violation(w, f"serves segment {s}, which belongs to {other}")
                        return
                    (served_f if forward else served_b)[s] += 1
                    want = smin[s]
                    m_s += float(t.metres)
                    min_s += float(t.minutes)
                else:
                    want = dmin[s]
                    m_d += float(t.metres)
                    min_d += float(t.minutes)
                if abs(float(t.minutes) - want) > _TOL_MIN:
                    yield Violation(w, f"minutes {t.minutes} differ from segment {s}'s {mode} time {want:.4f}")
                    return
                turn += float(t.turn_minutes)
            if trs and trs[-1].to_node != depot:
                yield Violation(f"{where} last step", f"ends at node {trs[-1].to_node}, not at the depot {depot}")
                return
            tot = route.totals
            n = len(trs)
            pairs = (("service_km", m_s / 1000, _TOL_M), ("deadhead_km", m_d / 1000, _TOL_M),
                     ("service_min", min_s, _TOL_MIN), ("deadhead_min", min_d, _TOL_MIN),
                     ("turn_min", turn, _TOL_MIN), ("total_min", min_s + min_d + turn, _TOL_MIN))
            for key, got, unit in pairs:
                value = float(getattr(tot, key))
                if abs(value - got) > _total_tol(n, unit) or not np.isfinite(value):
                    yield Violation(where, f"totals.{key} is {getattr(tot, key)} but its traversals add up to {got:.4f}")
                    return
            shift += float(tot.total_min)
        shifts.append(shift)
    fw, bw, ei = p.forward.copy(), p.backward.copy(), p.either.copy()
    if deferred:
        for arr in (fw, bw, ei):
            arr[sorted(deferred)] = 0
    bad = np.flatnonzero((served_f < fw) | (served_b < bw) | (served_f + served_b != fw + bw + ei))
    if bad.size:
        s = int(bad[0])
        yield Violation(f"segment {s} ('{net.seg_source[s]}')",
                        f"served {served_f[s]} time(s) forward and {served_b[s]} backward; it needs "
                        f"{fw[s]} forward, {bw[s]} backward and {ei[s]} either way, each exactly once")
        return
    summ = plan.summary
    longest = getattr(summ, "longest_min", None)
    mean = getattr(summ, "mean_min", None)
    if longest is not None and abs(float(longest) - max(shifts)) > 0.01:
        yield Violation("summary", f"longest_min {longest} but the longest crew shift is {max(shifts):.4f}")
        return
    if mean is not None and abs(float(mean) - float(np.mean(shifts))) > 0.01:
        yield Violation("summary", f"mean_min {mean} but the mean crew shift is {np.mean(shifts):.4f}")
        return


def profile_of_plan(plan: Plan, base: Profile | None = None) -> Profile:
    """The profile a plan was made with: its recorded fields on ``base`` (default: the built-in defaults).

    ``base`` gives what a plan does not record (the config's crews, source file and
    OpenStreetMap road list).
    """
    import dataclasses

    base = base or Profile()
    return dataclasses.replace(base, **plan.settings.profile.to_dict())


@dataclass(frozen=True)
class Overview:
    """A plan at a glance: crews, traversals, segments in territories, the longest shift."""

    crews: int
    traversals: int
    segments: int
    longest_min: float


def plan_overview(plan: Plan) -> Overview:
    shifts = [c.shift_min for c in plan.crews]
    return Overview(crews=len(plan.crews), traversals=sum(len(r.traversals) for c in plan.crews for r in c.routes),
                    segments=sum(len(c.territory) for c in plan.crews),
                    longest_min=max(shifts) if shifts else 0.0)
