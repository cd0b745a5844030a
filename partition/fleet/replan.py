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

import dataclasses
import hashlib
import heapq
import math
import numbers
import re
from typing import Callable, Iterable, Sequence

import numpy as np

from crewcut.solve.costs import deadhead_minutes, service_minutes
from crewcut.solve.errors import InputError
from crewcut.solve.network.model import SERVICE_LABELS, Network, RawLine
from crewcut.solve.profile import Profile
from crewcut.solve.result import Route

from crewcut.fleet.balancer import FleetState, balance
from crewcut.plans.planfile import CrewPlan, build_plan, dumps, route_from_section
from crewcut.fleet.planner import fleet_summary
from crewcut.fleet.executor import LocalRouter, RouteJob, Router, check_workers
from crewcut.fleet.streets import StreetGraph, build_street_graph, depot_travel, round_trips
from crewcut.fleet.territories import DEADHEAD_ALLOWANCE, _attach_leftovers, _describe, pieces, territories_of
from crewcut.plans.verify import profile_of_plan

ProgressFn = Callable[[str, float, float], None]
OVERFLOW_MODES = (None, "defer", "overtime")
_MIN_TOL = 1e-4  # minutes: the plan file rounds segment minutes to 5 decimals
# The transfer step aims a little inside the balancer's tolerance (estimates are not routes); tuned on
# tests/bench_rebalance.py.
BAND = 0.9


# ============================================================================ the network of the day
def resolve_closures(plan: dict, items: Iterable) -> np.ndarray:
    """Segment ids to close from segment ids (ints or whole-number strings) or feature ids (strings).

    A whole number is a segment id of the plan (as in the plan file and route
    sheets); any other text is a feature id from the street data (every segment
    cut from that feature closes); ``feature=ID`` forces a feature id that is a
    whole number.
    """
    segs = plan["network"]["segments"]
    m = len(segs)
    by_source: dict[str, list[int]] | None = None
    out: list[int] = []
    for item in items:
        if isinstance(item, bool):
            raise InputError(f"closed segment {item!r} is not a segment id")
        if isinstance(item, numbers.Integral):
            sid: int | None = int(item)
            key = None
        elif isinstance(item, str):
            text = item.strip()
            if text.startswith("feature="):
                sid, key = None, text[len("feature="):]
            elif re.fullmatch(r"\d+", text):
                sid, key = int(text), None
            else:
                sid, key = None, text
        else:
            raise InputError(f"closed segment {item!r} is neither a segment id nor a feature id")
        if sid is not None:
            if not 0 <= sid < m:
                raise InputError(f"closed segment {sid} does not exist (the plan's network has segments 0 to {m - 1})",
                                 "give a segment id from the plan file or a route sheet, or the street's feature id")
            out.append(sid)
            continue
        if by_source is None:
            by_source = {}
            for rec in segs:
                by_source.setdefault(str(rec["source_id"]), []).append(int(rec["id"]))
        if not key or key not in by_source:
            raise InputError(f"closed street '{key}' does not exist: no segment of the plan's network comes "
                             f"from a feature with that id",
                             "give the feature id used in the street data, or a segment id (a whole number)")
        out.extend(by_source[key])
    ids = np.unique(np.asarray(out, np.int64))
    already = [int(s) for s in ids if segs[int(s)]["closed"]]
    if already:
        raise InputError(f"segment(s) already closed in the plan's network: "
                         f"{', '.join(_name(segs, s) for s in already[:8])}",
                         "close only streets that were open when the plan was made")
    return ids


def _name(segs: list[dict], s: int) -> str:
    return f"{s} ('{segs[s]['source_id']}')"


def _seg_arrays(net: Network, keep: np.ndarray | slice, closed: np.ndarray | None = None) -> Network:
    """A network with a subset of the segments (all nodes kept); used for fingerprints."""
    idx = np.arange(net.n_segments)[keep]
    return dataclasses.replace(
        net, seg_u=net.seg_u[idx], seg_v=net.seg_v[idx], seg_length=net.seg_length[idx],
        seg_oneway=net.seg_oneway[idx], seg_service=net.seg_service[idx],
        seg_class=[net.seg_class[i] for i in idx], seg_name=[net.seg_name[i] for i in idx],
        seg_speed_kmh=net.seg_speed_kmh[idx], seg_closed=net.seg_closed[idx] if closed is None else closed,
        seg_coords=[net.seg_coords[i] for i in idx], seg_source=[net.seg_source[i] for i in idx], findings=())


def _differences(plan: dict, net: Network, closed: np.ndarray, limit: int = 6) -> list[str]:
    """Human-readable differences between the plan's segments and the network's first ones."""
    segs = plan["network"]["segments"]
    named = set(closed.tolist())
    out = []
    for rec in segs[:net.n_segments]:
        s = int(rec["id"])
        why = []
        if (int(rec["from"]), int(rec["to"])) != (int(net.seg_u[s]), int(net.seg_v[s])):
            why.append("different ends")
        if abs(float(rec["length_m"]) - float(net.seg_length[s])) > 0.0015:
            why.append(f"length {net.seg_length[s]:.3f} m instead of {float(rec['length_m']):.3f} m")
        if bool(rec["oneway"]) != bool(net.seg_oneway[s]):
            why.append("one-way differs")
        if bool(rec["closed"]) != bool(net.seg_closed[s]) and s not in named:
            why.append("closed in the file but not named with --close" if net.seg_closed[s] else
                       "open in the file but closed in the plan")
        if rec["service"] != SERVICE_LABELS[int(net.seg_service[s])]:
            why.append(f"service {SERVICE_LABELS[int(net.seg_service[s])]} instead of {rec['service']}")
        if str(rec["source_id"]) != net.seg_source[s]:
            why.append(f"feature '{net.seg_source[s]}' instead of '{rec['source_id']}'")
        if why:
            out.append(f"segment {s} ('{rec['source_id']}'): {', '.join(why)}")
            if len(out) >= limit:
                out.append("...")
                break
    return out


def match_network(plan: dict, net: Network, profile: Profile, closed: np.ndarray,
                  opened_sources: Sequence[str] | None = None, *, name: str = "the network") -> bool:
    """Check ``net`` against the plan (see the module notes); True when it already holds the added streets.

    Raises :class:`InputError` naming the differences otherwise.
    """
    nw = plan["network"]
    segs, m, n = nw["segments"], len(nw["segments"]), len(nw["nodes"])
    hint = ("give the network file the plan was made on (or that file with exactly the --close streets marked "
            "closed), and new streets with --open FILE")
    if net.n_segments < m or net.n_nodes < n or (m and int(max(net.seg_u[:m].max(), net.seg_v[:m].max())) >= n):
        raise InputError(f"{name} is not the network the plan was made on: it has {net.n_segments} segments and "
                         f"{net.n_nodes} nodes, "
                         f"the plan's network {m} and {n}", hint)
    reopened = net.seg_closed[:m].copy()
    reopened[closed] = False
    prefix = _seg_arrays(net, slice(0, m), reopened)
    if prefix.fingerprint != nw["fingerprint"]:
        diff = _differences(plan, net, closed)
        detail = "; ".join(diff) if diff else "the segment records in the plan file do not add up to its fingerprint"
        raise InputError(f"{name} is not the network the plan was made on (fingerprint differs): {detail}", hint)
    smin = service_minutes(prefix, profile)
    dmin = deadhead_minutes(prefix, profile)
    rec_s = np.array([float(r["service_min"]) for r in segs])
    rec_d = np.array([float(r["deadhead_min"]) for r in segs])
    bad = np.flatnonzero((np.abs(smin - rec_s) > _MIN_TOL) | (np.abs(dmin - rec_d) > _MIN_TOL))
    if bad.size:
        raise InputError(f"{name}: the minutes of {bad.size} segment(s) differ from the plan's (speed limits or the "
                         f"profile changed): {_describe(net, bad)}",
                         "give the network and --config the plan was made with")
    extra = net.seg_source[m:]
    if not extra:
        return False
    if opened_sources is None:
        raise InputError(f"{name} has {len(extra)} street segment(s) the plan does not know "
                         f"({', '.join(repr(s) for s in extra[:6])}{' ...' if len(extra) > 6 else ''})",
                         "if they are new streets, give them with --open FILE as well; otherwise give the plan's "
                         "network")
    if sorted(extra) != sorted(opened_sources):
        raise InputError(f"{name} has streets after the plan's that are not exactly the --open streets",
                         "give the plan's network with --network and the new streets with --open FILE")
    return True


def append_streets(base: Network, add: Network, tol_m: float) -> Network:
    """``base`` with the segments of ``add`` appended (ids ``base.n_segments`` and up).

    An end of an added street joins a node of ``base`` lying within ``tol_m``
    (or, without geometry, a node with the same label); other ends become new
    nodes. An added street ending on the middle of an existing segment is
    refused: splitting that segment would change the ids the plan uses.
    """
    if add.n_segments == 0:
        raise InputError("the added streets (--open) hold no street segment", "give a file with the new streets")
    if base.has_geometry != add.has_geometry:
        raise InputError("the added streets (--open) and the network must both have coordinates, or both not",
                         "give the new streets in the same kind of file as the network")
    clash = sorted(set(add.seg_source) & set(base.seg_source))
    if clash:
        raise InputError(f"added street(s) {', '.join(repr(c) for c in clash[:6])} already exist in the network",
                         "give new streets new feature ids; to reopen a closed street, re-plan")
    n0 = base.n_nodes
    if base.has_geometry:
        from scipy.spatial import cKDTree

        from crewcut.solve.network.geodesy import project

        ax, ay = project(add.node_lon, add.node_lat, base.origin)
        d, near = cKDTree(np.stack([base.node_x, base.node_y], axis=1)).query(np.stack([ax, ay], axis=1))
        joined = d <= max(tol_m, 0.01)
        _no_mid_touch(base, add, ax, ay, joined, max(tol_m, 0.01))
    else:
        ax = ay = np.full(add.n_nodes, np.nan)
        label = {lab: i for i, lab in enumerate(base.node_label) if lab}
        near = np.array([label.get(lab, -1) for lab in add.node_label], np.int64)
        joined = near >= 0
    new_id = np.where(joined, near, -1).astype(np.int64)
    fresh = np.flatnonzero(~joined)
    new_id[fresh] = n0 + np.arange(fresh.size)
    cat = np.concatenate
    return dataclasses.replace(
        base,
        node_lon=cat([base.node_lon, add.node_lon[fresh]]), node_lat=cat([base.node_lat, add.node_lat[fresh]]),
        node_x=cat([base.node_x, ax[fresh]]), node_y=cat([base.node_y, ay[fresh]]),
        node_label=base.node_label + [add.node_label[i] for i in fresh],
        seg_source=base.seg_source + list(add.seg_source),
        seg_u=cat([base.seg_u, new_id[add.seg_u]]), seg_v=cat([base.seg_v, new_id[add.seg_v]]),
        seg_length=cat([base.seg_length, add.seg_length]), seg_oneway=cat([base.seg_oneway, add.seg_oneway]),
        seg_service=cat([base.seg_service, add.seg_service]), seg_class=base.seg_class + list(add.seg_class),
        seg_name=base.seg_name + list(add.seg_name), seg_speed_kmh=cat([base.seg_speed_kmh, add.seg_speed_kmh]),
        seg_closed=cat([base.seg_closed, add.seg_closed]), seg_coords=base.seg_coords + list(add.seg_coords),
        findings=base.findings)


def _no_mid_touch(base: Network, add: Network, ax, ay, joined: np.ndarray, tol: float) -> None:
    loose = np.flatnonzero(~joined)
    if loose.size == 0:
        return
    import shapely

    from crewcut.solve.network.geodesy import project

    sizes = np.array([len(c) for c in base.seg_coords])
    allc = np.concatenate(base.seg_coords)
    x, y = project(allc[:, 0], allc[:, 1], base.origin)
    lines = shapely.linestrings(np.stack([x, y], axis=1), indices=np.repeat(np.arange(base.n_segments), sizes))
    pts = shapely.points(ax[loose], ay[loose])
    hit_pt, hit_seg = shapely.STRtree(lines).query(pts, predicate="dwithin", distance=tol)
    if hit_pt.size:
        i, s = int(loose[hit_pt[0]]), int(hit_seg[0])
        feat = next(add.seg_source[j] for j in range(add.n_segments) if i in (add.seg_u[j], add.seg_v[j]))
        raise InputError(f"added street '{feat}' ends on the middle of segment {s} ('{base.seg_source[s]}'), "
                         f"not at an intersection",
                         "end the new street at an existing intersection or street end (splitting a segment "
                         "would change the plan's segment ids), or re-plan with the new streets in the network")


def network_of_the_day(plan: dict, net: Network, profile: Profile, closed: np.ndarray,
                       opened: Network | Sequence[RawLine] | None, *, name: str = "the network") -> tuple[Network, np.ndarray]:
    """The network the new plan is made on, and the ids of the added segments."""
    if opened is not None and not isinstance(opened, Network):
        from crewcut.solve.network.repair import build_network

        lines = list(opened)
        opened = build_network(lines, profile, has_geometry=all(ln.coords is not None for ln in lines))
    holds_added = match_network(plan, net, profile, closed, None if opened is None else list(opened.seg_source),
                                name=name)
    m = len(plan["network"]["segments"])
    shut = net.seg_closed.copy()
    shut[closed] = True
    today = dataclasses.replace(net, seg_closed=shut)
    if opened is not None and not holds_added:
        today = append_streets(today, opened, profile.snap_tolerance_m)
    return today, np.arange(m, today.n_segments)


# ============================================================================ crews of the day
@dataclasses.dataclass(frozen=True)
class DayCrew:
    id: str
    depot: int
    shift_limit_min: float
    old: int  # index in the parent plan, -1 for an extra crew


def _check_params(stability, overflow, tolerance, seed, time_limit_s) -> None:
    if isinstance(stability, bool) or not isinstance(stability, numbers.Real) or not math.isfinite(stability) \
            or stability < 0:
        raise InputError(f"--stability is {stability!r}", "give minutes per segment, 0 or more (0: no stability)")
    if overflow not in OVERFLOW_MODES:
        raise InputError(f"overflow mode {overflow!r} is not known", "use 'defer', 'overtime' or nothing")
    if not (isinstance(tolerance, numbers.Real) and 0 <= tolerance < 1):
        raise InputError(f"balance tolerance {tolerance!r} is outside [0, 1)", "e.g. 0.03 for 3 %")
    if isinstance(seed, bool) or not isinstance(seed, numbers.Integral) or seed < 0:
        raise InputError(f"--seed is {seed!r}", "give a whole number of 0 or more")
    if time_limit_s is not None and (isinstance(time_limit_s, bool) or not isinstance(time_limit_s, numbers.Real)
                                     or not math.isfinite(time_limit_s) or time_limit_s < 0):
        raise InputError(f"--time-limit is {time_limit_s!r}", "give the seconds the balancer may use, 0 or more")


def _day_crews(plan: dict, today: Network, profile: Profile, absent, add_crews, shift_limits) -> list[DayCrew]:
    old = plan["crews"]
    ids = [str(c["id"]) for c in old]
    known = set(ids)
    absent = [str(a) for a in absent]
    for a in absent:
        if a not in known:
            raise InputError(f"unknown crew id '{a}' (--absent)", f"crews in the plan: {', '.join(ids)}")
    gone = set(absent)
    extra = []
    for item in add_crews:
        try:
            cid, lon, lat = item
            cid, lon, lat = str(cid).strip(), float(lon), float(lat)
        except (TypeError, ValueError):
            raise InputError(f"extra crew {item!r} is not (id, lon, lat)", "write it as ID@LON,LAT") from None
        if not cid:
            raise InputError("an extra crew has an empty id", "write it as ID@LON,LAT, e.g. relief@-30.5,45.2")
        if cid in known or cid in {e[0] for e in extra}:
            raise InputError(f"extra crew id '{cid}' is already used", "give the extra crew a new id")
        extra.append((cid, lon, lat))
    limits = dict(shift_limits or {})
    all_ids = [i for i in ids if i not in gone] + [e[0] for e in extra]
    for cid, value in limits.items():
        if cid not in all_ids:
            raise InputError(f"unknown crew id '{cid}' (--shift-limit)" + (" : that crew is absent" if cid in gone else ""),
                             f"crews at work: {', '.join(all_ids) or 'none'}")
        if isinstance(value, bool) or not isinstance(value, numbers.Real) or not math.isfinite(value) or value <= 0:
            raise InputError(f"shift limit of crew '{cid}' is {value!r} minutes",
                             "give minutes above 0, e.g. 480 for 8 hours")
    if not all_ids:
        raise InputError(f"every crew of the plan is absent ({', '.join(ids)}) and no extra crew is given",
                         "leave at least one crew at work, or add one with --add-crew ID@LON,LAT")
    from crewcut.solve.network.depot import snap_depot

    crews = [DayCrew(str(c["id"]), int(c["depot_node"]), float(limits.get(str(c["id"]), c["shift_limit_min"])), i)
             for i, c in enumerate(old) if str(c["id"]) not in gone]
    for cid, lon, lat in extra:
        node = snap_depot(today, lon, lat, profile.depot_snap_max_m, who=f"depot of extra crew '{cid}'")
        crews.append(DayCrew(cid, node, float(limits.get(cid, profile.shift_limit_min)), -1))
    return crews


def _check_depots(today: Network, crews: list[DayCrew], closed: np.ndarray, eligible: np.ndarray,
                  sg: StreetGraph) -> None:
    shut = ", ".join(f"{int(s)} ('{today.seg_source[int(s)]}')" for s in closed[:8]) or "none"
    for i, c in enumerate(crews):
        at = (today.seg_u == c.depot) | (today.seg_v == c.depot)
        if not (at & ~today.seg_closed).any():
            raise InputError(f"the closures cut the depot of crew '{c.id}' (node {c.depot}) off the network: every "
                             f"street at it is closed (closed today: {shut})",
                             f"keep a street at the depot open, or mark crew '{c.id}' absent")
        if not eligible[i].any():
            raise InputError(f"the closures cut the depot of crew '{c.id}' (node {c.depot}) off the network: from it "
                             f"no street that needs service can be reached and left again (closed today: {shut})",
                             f"keep a way out of the depot open, or mark crew '{c.id}' absent")
    cut = np.flatnonzero(sg.required & ~eligible.any(axis=0))
    if cut.size:
        raise InputError(f"{cut.size} segment(s) that need service are cut off from every depot: "
                         f"{_describe(today, cut)} (closed today: {shut})",
                         "keep a street open that joins them to the rest of the network, or add a crew whose "
                         "depot can reach them")


# ============================================================================ territories of the day
def _centres(sg: StreetGraph, owner: np.ndarray, k: int) -> np.ndarray:
    out = np.zeros((k, 2))
    for c, segs in enumerate(territories_of(owner, k)):
        if segs.size:
            w = sg.work[segs] + 1e-9
            out[c] = np.average(sg.mid_x[segs], weights=w), np.average(sg.mid_y[segs], weights=w)
    return out


def _release_pieces(sg: StreetGraph, owner: np.ndarray, k: int) -> int:
    """Pieces cut off a territory (all but the one with most work) go back to the pool; returns how many."""
    released = 0
    for c, segs in enumerate(territories_of(owner, k)):
        if segs.size < 2:
            continue
        parts = pieces(sg, segs)
        if len(parts) > 1:
            keep = int(np.argmax([float(sg.work[p].sum()) for p in parts]))
            for i, p in enumerate(parts):
                if i != keep:
                    owner[p] = -1
                    released += 1
    return released


def _grow_extra(sg: StreetGraph, owner: np.ndarray, c: int, rt_c: np.ndarray, eligible_c: np.ndarray,
                target: float, est: np.ndarray) -> None:
    """Give crew ``c`` a territory: from the street nearest its depot, nearest streets first, up to ``target``."""
    cand = np.flatnonzero(sg.required & eligible_c)
    seed = int(cand[np.lexsort((cand, rt_c[cand]))[0]])
    heap = [(float(rt_c[seed]), seed)]
    seen = {seed}
    load = 0.0
    while heap and load < target:
        _, s = heapq.heappop(heap)
        owner[s] = c
        load += float(est[s])
        for t in sg.neighbours(s).tolist():
            if t not in seen and eligible_c[t] and owner[t] != c:
                seen.add(t)
                heapq.heappush(heap, (float(rt_c[t]), t))


def _pool_quotas(sg: StreetGraph, owner: np.ndarray, limits: np.ndarray, rate: np.ndarray, band: float,
                 stability: float) -> np.ndarray | None:
    """How much of the pool (service minutes) each neighbouring territory should take.

    The same minimum-cost flow as :func:`_transfers`, with the pool as one more
    node: it sends its work to the territories it borders at no cost (those
    segments change hands whatever happens), and work handed on between crews
    costs as there. So a neighbour with room beyond it takes more, and one
    hemmed in by full territories takes less, and less work has to be handed
    on afterwards. ``None`` when there is no pool or no neighbour.
    """
    from ortools.graph.python import min_cost_flow

    from crewcut.fleet.balancer import _crew_pairs

    k = limits.size
    pool = sg.required & (owner < 0)
    if not pool.any() or k < 1:
        return None
    row_of = np.repeat(np.arange(sg.nb_ptr.size - 1), np.diff(sg.nb_ptr))
    nb = sg.nb_idx
    touch = pool[row_of] & (owner[nb] >= 0)
    near = sorted(set(owner[nb[touch]].tolist()))
    if not near:
        return None
    scale = 10.0  # tenths of a minute
    held = owner >= 0
    work = np.bincount(owner[held], weights=sg.work[held], minlength=k)
    pool_work = float(sg.work[pool].sum())
    total_work = float(work.sum()) + pool_work
    # the cap on each crew's estimated minutes, in its service minutes
    cap = (1.0 + band) * limits * float((work * rate).sum() + pool_work * rate.mean()) / float(limits.sum()) / rate
    excess = np.floor(np.maximum(0.0, work - cap) * scale).astype(np.int64)
    room = np.floor(np.maximum(0.0, cap - work) * scale).astype(np.int64)
    supply = int(np.floor(pool_work * scale))
    total = supply + int(excess.sum())
    per_seg = total_work / max(1, int(np.count_nonzero(sg.required)))
    hop = max(1, int(round(1000 * stability / per_seg)))
    f = min_cost_flow.SimpleMinCostFlow()
    src, dst, pnode = k, k + 1, k + 2
    f.add_arc_with_capacity_and_unit_cost(src, dst, total, 1000 + 1000 * hop)  # left over: worse than any route
    f.add_arc_with_capacity_and_unit_cost(src, pnode, supply, 0)
    taken = {}
    for c in near:
        taken[c] = f.add_arc_with_capacity_and_unit_cost(pnode, c, supply, 0)
    _crew_arcs(f, src, dst, excess, room, _crew_pairs(owner, row_of, nb), total, hop, set())
    f.set_node_supply(src, total)
    f.set_node_supply(dst, -total)
    if f.solve_max_flow_with_min_cost() != f.OPTIMAL:
        return None
    quota = np.zeros(k)
    for c, a in taken.items():
        quota[c] = f.flow(a) / scale
    return quota


def _crew_arcs(f, src: int, dst: int, excess: np.ndarray, room: np.ndarray, pairs: dict[int, set[int]],
               total: int, hop: int, blocked: set[tuple[int, int]]) -> list[tuple[int, int, int]]:
    """Arcs of the hand-on flow: excess in, room out, ``hop`` per unit across each open border.

    Returns ``(crew, neighbour, arc)`` for every border arc.
    """
    arcs = []
    for c in range(excess.size):
        if excess[c]:
            f.add_arc_with_capacity_and_unit_cost(src, c, int(excess[c]), 0)
        if room[c]:
            f.add_arc_with_capacity_and_unit_cost(c, dst, int(room[c]), 0)
        for n in sorted(pairs.get(c, ())):
            if (c, n) not in blocked:
                arcs.append((c, n, f.add_arc_with_capacity_and_unit_cost(c, n, total, hop)))
    return arcs


def _grow_pool(sg: StreetGraph, owner: np.ndarray, eligible: np.ndarray, load: np.ndarray, limits: np.ndarray,
               est: np.ndarray, quota: np.ndarray | None = None) -> None:
    """Hand the pool (required, owner -1) to neighbouring territories, least loaded crew first.

    ``quota``: service minutes of the pool each crew should take at most
    (:func:`_pool_quotas`); once every crew has its share, whatever is left
    of the pool is handed out without them.
    """
    if quota is not None:
        _grow_pool_once(sg, owner, eligible, load, limits, est, quota.copy())
    _grow_pool_once(sg, owner, eligible, load, limits, est, None)


def _grow_pool_once(sg: StreetGraph, owner: np.ndarray, eligible: np.ndarray, load: np.ndarray,
                    limits: np.ndarray, est: np.ndarray, quota: np.ndarray | None) -> None:
    k = limits.size
    centres = _centres(sg, owner, k)
    fronts: list[list] = [[] for _ in range(k)]

    def push(c: int, s: int) -> None:
        for t in sg.neighbours(s).tolist():
            if owner[t] < 0 and sg.required[t] and eligible[c, t]:
                d = float(np.hypot(sg.mid_x[t] - centres[c, 0], sg.mid_y[t] - centres[c, 1]))
                heapq.heappush(fronts[c], (d, t))

    pool = np.flatnonzero(sg.required & (owner < 0))
    if pool.size == 0:
        return
    border = set()
    for s in pool.tolist():
        for t in sg.neighbours(s).tolist():
            if owner[t] >= 0:
                border.add(int(t))
    for t in sorted(border):
        push(int(owner[t]), t)
    turn = [(load[c] / limits[c], c) for c in range(k) if fronts[c] and (quota is None or quota[c] > 0)]
    heapq.heapify(turn)
    while turn:
        _, c = heapq.heappop(turn)
        got = -1
        while fronts[c]:
            _, s = heapq.heappop(fronts[c])
            if owner[s] < 0:
                got = s
                break
        if got < 0:
            continue
        owner[got] = c
        load[c] += est[got]
        if quota is not None:
            quota[c] -= sg.work[got]
            if quota[c] <= 0:
                continue  # this crew has its share of the pool: it stops here
        push(c, got)
        heapq.heappush(turn, (load[c] / limits[c], c))


def _transfers(sg: StreetGraph, owner: np.ndarray, eligible: np.ndarray, limits: np.ndarray, rate: np.ndarray,
               band: float, stability: float, rounds: int = 4) -> int:
    """Move work between neighbouring territories so that no estimated share exceeds ``(1 + band)`` x the mean.

    Which crew hands how much to which neighbour is a minimum-cost flow on the
    graph of neighbouring territories (OR-tools' min-cost flow, maximum flow at
    least cost): crews above the band send their excess, crews below it take up
    to their room, and the work handed across borders, so the number of segments
    changing hands, is least. The stability weight prices it as the balancer
    does: a minute of work crossing a border moves 1/(minutes per segment)
    segments, each charged ``stability`` minutes, while a minute of excess left
    where it is costs one minute (a linear stand-in for the longest shift); when
    moving costs more than it saves, the excess stays. The
    flows are carried out along the borders with the balancer's batch growth,
    upstream crews first. A border where no batch can be cut (it would split off
    streets the neighbour cannot serve) is left out and the flow solved again,
    for a few rounds. Estimated load: service minutes times each crew's minutes
    per service minute. Returns the number of segments moved.
    """
    from ortools.graph.python import min_cost_flow

    from crewcut.fleet.balancer import _crew_pairs, _grow_batch

    k = limits.size
    if k < 2:
        return 0
    row_of = np.repeat(np.arange(sg.nb_ptr.size - 1), np.diff(sg.nb_ptr))
    state = FleetState(owner=owner, routes=[None] * k, depots=[0] * k, limits=limits)
    blocked: set[tuple[int, int]] = set()
    moved = 0
    scale = 10.0  # tenths of a minute
    for _round in range(rounds):
        load = np.bincount(owner[owner >= 0], weights=sg.work[owner >= 0], minlength=k) * rate
        cap = (1.0 + band) * limits * float(load.sum()) / float(limits.sum())
        excess = np.floor(np.maximum(0.0, load - cap) * scale).astype(np.int64)
        room = np.floor(np.maximum(0.0, cap - load) * scale).astype(np.int64)
        total = int(excess.sum())
        if total == 0:
            break
        pairs = _crew_pairs(owner, row_of, sg.nb_idx)
        f = min_cost_flow.SimpleMinCostFlow()
        src, dst = k, k + 1
        per_seg = float(load.sum()) / max(1, int(np.count_nonzero(owner >= 0)))  # estimated minutes per segment
        hop = max(1, int(round(1000 * stability / per_seg)))  # integer costs: 1000 = one minute of excess kept
        f.add_arc_with_capacity_and_unit_cost(src, dst, total, 1000)
        arcs = _crew_arcs(f, src, dst, excess, room, pairs, total, hop, blocked)
        f.set_node_supply(src, total)  # as much as fits goes from src to dst
        f.set_node_supply(dst, -total)
        if f.solve_max_flow_with_min_cost() != f.OPTIMAL:
            break
        pending = {(c, n): f.flow(a) / scale for c, n, a in arcs if f.flow(a) > 0}
        done = 0
        while pending:  # upstream first: a crew hands work on once what it receives has arrived
            inflow = {n for (_c, n) in pending}
            ready = sorted(e for e in pending if e[0] not in inflow) or sorted(pending)
            c, n = ready[0]
            batch = _grow_batch(state, sg, eligible, c, n, pending.pop((c, n)) / rate[c])
            if batch is None or batch.size == 0:
                blocked.add((c, n))
                continue
            owner[batch] = n
            moved += int(batch.size)
            done += 1
        if done == 0:
            break
    return moved


# ============================================================================ the whole run
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
    _check_params(stability, overflow, tolerance, seed, time_limit_s)
    check_workers(workers)
    report = progress or (lambda *a: None)
    profile = profile or profile_of_plan(plan)
    settings = plan.get("settings", {})
    if route_time_limit_s is None:
        route_time_limit_s = float(settings.get("route_time_limit_s", 10.0))
    closed = resolve_closures(plan, close)
    today, added = network_of_the_day(plan, net, profile, closed, opened, name=network_name)
    crews = _day_crews(plan, today, profile, absent, add_crews, shift_limits)
    k, m = len(crews), today.n_segments
    report("network", 0, 1)
    sg = build_street_graph(today, profile)
    depots = [c.depot for c in crews]
    uniq = sorted(set(depots))
    out, back = depot_travel(today, profile, uniq)
    rt = round_trips(today, sg, out, back)[np.array([uniq.index(d) for d in depots])]
    eligible = np.isfinite(rt)
    _check_depots(today, crews, closed, eligible, sg)
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
    _release_pieces(sg, owner, k)
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
        _grow_extra(sg, owner, i, rt[i], eligible[i], total_est * limits[i] / limits.sum(),
                    sg.work * est_rate[i])
    if empty:
        _release_pieces(sg, owner, k)
    load = np.array([float(sg.work[owner == i].sum()) * est_rate[i] for i in range(k)])
    quota = _pool_quotas(sg, owner, limits, est_rate, BAND * tolerance, stability)
    _grow_pool(sg, owner, eligible, load, limits, sg.work * (1.0 + DEADHEAD_ALLOWANCE), quota)
    report("handing on work", 0, 1)
    _transfers(sg, owner, eligible, limits, est_rate, BAND * tolerance, stability)
    report("handing on work", 1, 1)
    left = np.flatnonzero(sg.required & (owner < 0))
    if left.size:
        _attach_leftovers(sg, owner, eligible, left)
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


# ============================================================================ the change report
def change_report(parent: dict, child: dict) -> dict:
    """Per crew: segments gained and lost (count, km), old and new shift; overall: segments that changed hands.

    A segment *changed hands* when it needs service in the new plan, had a crew
    in the parent plan, and now has another crew (every segment of an absent
    crew counts). Closed segments leave their crew (``lost``), added ones join
    one (``gained``); neither counts as changing hands. ``routes_changed``: crews
    whose route differs from the parent's (route sheets are needed only for them).
    """
    length = {int(s["id"]): float(s["length_m"]) for s in child["network"]["segments"]}
    for s in parent["network"]["segments"]:
        length.setdefault(int(s["id"]), float(s["length_m"]))
    old_owner = {int(s): str(c["id"]) for c in parent["crews"] for s in c["territory"]}
    new_owner = {int(s): str(c["id"]) for c in child["crews"] for s in c["territory"]}
    deferred = {int(d["segment"]) for d in child.get("deferred", [])}
    old_by = {str(c["id"]): c for c in parent["crews"]}
    new_by = {str(c["id"]): c for c in child["crews"]}
    order = [str(c["id"]) for c in parent["crews"]] + [i for i in new_by if i not in old_by]
    km = lambda segs: sum(length[s] for s in segs) / 1000.0  # noqa: E731
    rows = []
    for cid in order:
        o, n = old_by.get(cid), new_by.get(cid)
        before = set(int(s) for s in o["territory"]) if o else set()
        after = set(int(s) for s in n["territory"]) if n else set()
        gained, lost = sorted(after - before), sorted(before - after)
        status = "absent" if n is None else ("extra" if o is None else "kept")
        same_route = (o is not None and n is not None and o["depot_node"] == n["depot_node"]
                      and [r["traversals"] for r in o["routes"]] == [r["traversals"] for r in n["routes"]])
        rows.append({"crew": cid, "status": status, "gained": len(gained), "gained_km": km(gained),
                     "lost": len(lost), "lost_km": km(lost),
                     "old_shift_min": float(o["shift_min"]) if o else 0.0,
                     "new_shift_min": float(n["shift_min"]) if n else 0.0,
                     "old_limit_min": float(o["shift_limit_min"]) if o else None,
                     "new_limit_min": float(n["shift_limit_min"]) if n else None,
                     "route_changed": n is not None and not same_route})
    changed = sorted(s for s, c in old_owner.items() if s in new_owner and new_owner[s] != c)
    absent_ids = {r["crew"] for r in rows if r["status"] == "absent"}
    absent_segs = sorted(s for s, c in old_owner.items() if c in absent_ids)
    need = len(new_owner) + len(deferred)
    closed = sorted(s for s in old_owner if s not in new_owner and s not in deferred)
    added = sorted(s for s in new_owner if s not in old_owner)
    return {
        "crews": rows,
        "changed_hands": len(changed),
        "changed_hands_km": km(changed),
        "changed_hands_share": len(changed) / need if need else 0.0,
        "segments_needing_service": need,
        "absent_segments": len(absent_segs),
        "changed_over_absent": len(changed) / len(absent_segs) if absent_segs else None,
        "left_service": len(closed),
        "new_segments": len(added),
        "deferred": sorted(deferred),
        "routes_changed": [r["crew"] for r in rows if r["route_changed"]],
        "old_longest_min": max((float(c["shift_min"]) for c in parent["crews"]), default=0.0),
        "new_longest_min": max((float(c["shift_min"]) for c in child["crews"]), default=0.0),
        "over_limit": list(child.get("summary", {}).get("over_limit", [])),
    }


def change_table(rep: dict):
    """The change report as a rich Table (units in the headers, a totals row, the overall figures below)."""
    from rich.table import Table
    from rich.text import Text

    t = Table(title="Changes per crew", header_style="bold", caption_justify="left")
    cols = (("crew", "left"), ("status", "left"), ("gained (segments)", "right"), ("gained (km)", "right"),
            ("lost (segments)", "right"), ("lost (km)", "right"), ("old shift (h)", "right"),
            ("new shift (h)", "right"), ("change (h)", "right"), ("limit today (h)", "right"),
            ("route sheet", "left"))
    for name, just in cols:
        t.add_column(name, justify=just)
    rows = rep["crews"]
    for i, r in enumerate(rows):
        over = r["new_limit_min"] is not None and r["new_shift_min"] > r["new_limit_min"] + 1e-9
        t.add_row(*[Text(x) for x in (
            r["crew"], r["status"], str(r["gained"]), f"{r['gained_km']:.2f}", str(r["lost"]), f"{r['lost_km']:.2f}",
            f"{r['old_shift_min'] / 60:.2f}", f"{r['new_shift_min'] / 60:.2f}",
            f"{(r['new_shift_min'] - r['old_shift_min']) / 60:+.2f}",
            "" if r["new_limit_min"] is None else f"{r['new_limit_min'] / 60:.2f}" + (" !" if over else ""),
            "new" if r["route_changed"] else ("none" if r["status"] == "absent" else "unchanged"))],
            style="bold red" if over else None, end_section=i == len(rows) - 1)
    tot_old = sum(r["old_shift_min"] for r in rows)
    tot_new = sum(r["new_shift_min"] for r in rows)
    t.add_row(*[Text(x) for x in (
        "all crews", "", str(sum(r["gained"] for r in rows)), f"{sum(r['gained_km'] for r in rows):.2f}",
        str(sum(r["lost"] for r in rows)), f"{sum(r['lost_km'] for r in rows):.2f}", f"{tot_old / 60:.2f}",
        f"{tot_new / 60:.2f}", f"{(tot_new - tot_old) / 60:+.2f}",
        f"{sum(r['new_limit_min'] or 0 for r in rows) / 60:.2f}", f"{len(rep['routes_changed'])} new")],
        style="bold")
    t.caption = "\n".join(change_lines(rep))
    return t


def change_lines(rep: dict) -> list[str]:
    """The overall figures of a change report as plain lines."""
    lines = [f"segments that changed hands: {rep['changed_hands']:,} of {rep['segments_needing_service']:,} needing "
             f"service ({100 * rep['changed_hands_share']:.1f} %, {rep['changed_hands_km']:.2f} km)"]
    if rep["absent_segments"]:
        lines.append(f"absent crews' segments: {rep['absent_segments']:,}; changed hands / absent crews' segments "
                     f"{rep['changed_over_absent']:.2f}")
    if rep["left_service"]:
        lines.append(f"segments that left service (closed): {rep['left_service']:,}")
    if rep["new_segments"]:
        lines.append(f"new segments (added streets): {rep['new_segments']:,}")
    lines.append(f"longest shift {rep['old_longest_min'] / 60:.2f} h -> {rep['new_longest_min'] / 60:.2f} h")
    changed = rep["routes_changed"]
    lines.append("new route sheets needed for: " + (", ".join(changed) if changed else "no crew"))
    if rep["over_limit"]:
        lines.append("the crews at work cannot do all the work within their shift limits: "
                     + ", ".join(f"{o['crew']} over by {o['over_min']:.0f} min" for o in rep["over_limit"]))
    if "overtime" in rep:
        tot = sum(o["overtime_min"] for o in rep["overtime"])
        lines.append(f"overtime needed: {tot:.0f} min in all: " + ", ".join(
            f"{o['crew']} {o['overtime_min']:.0f} min" for o in rep["overtime"]) if rep["overtime"]
            else "no overtime needed: every shift fits its limit")
    if rep["deferred"]:
        lines.append(f"deferred so that every shift fits: {len(rep['deferred']):,} segment(s) (the defer list is in "
                     f"the plan file under \"deferred\")")
    return lines
