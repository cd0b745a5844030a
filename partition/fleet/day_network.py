"""The network of the day for a replan: closures resolved, the network file matched to the plan, streets added.

The rule for which network files are accepted is in :mod:`crewcut.fleet.replan`
("Which networks are accepted"); this module applies it and names the segments
that differ when it does not hold.
"""
from __future__ import annotations

import dataclasses
import numbers
import re
from typing import Iterable, Sequence

import numpy as np

from crewcut.solve.costs import deadhead_minutes, service_minutes
from crewcut.solve.errors import InputError
from crewcut.solve.network.curbs import CURB_SUFFIX
from crewcut.solve.network.model import SERVICE_LABELS, Network, RawLine
from crewcut.solve.network.scope import segments_inside, without_service
from crewcut.solve.profile import Profile

from crewcut.fleet.territories import describe_segment
from crewcut.plans.model import Plan, SegmentRecord

_MIN_TOL = 1e-4  # minutes: the plan file rounds segment minutes to 5 decimals


def _pieces(records) -> list[list[int]]:
    """Segment ids grouped into the connected pieces they form (union-find on their end nodes)."""
    parent: dict[int, int] = {}

    def find(x: int) -> int:
        while parent.setdefault(x, x) != x:
            parent[x] = parent[parent[x]]
            x = parent[x]
        return x

    for rec in records:
        parent[find(rec.from_node)] = find(rec.to_node)
    groups: dict[int, list[int]] = {}
    for rec in records:
        groups.setdefault(find(rec.from_node), []).append(rec.id)
    return sorted(groups.values())


def resolve_closures(plan: Plan, items: Iterable) -> np.ndarray:
    """Segment ids to close from segment ids (ints or whole-number strings) or feature ids (strings).

    A whole number is a segment id of the plan (as in the plan file and route
    sheets); any other text is a feature id from the street data (every segment
    cut from that feature closes; the id of a street split into its two posted curbs,
    ``ID:left`` and ``ID:right``, closes both); ``feature=ID`` forces a feature id that
    is a whole number.
    """
    segs = plan.network.segments
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
                by_source.setdefault(rec.source_id, []).append(rec.id)
        if key and key not in by_source:  # a street split into its two posted curbs: close both
            curbs = [rec_id for side in CURB_SUFFIX.values() for rec_id in by_source.get(key + side, [])]
            if curbs:
                by_source[key] = curbs
        if not key or key not in by_source:
            raise InputError(f"closed street '{key}' does not exist: no segment of the plan's network comes "
                             f"from a feature with that id",
                             "give the feature id used in the street data, or a segment id (a whole number)")
        pieces = _pieces([segs[i] for i in by_source[key]])
        if len(pieces) > 1:  # one feature's segments always join up: several features share this id
            listed = "; ".join(f"segments {', '.join(map(str, p))}" + (f" ({segs[p[0]].name})" if segs[p[0]].name
                                                                       else "") for p in pieces[:5])
            raise InputError(f"closed street '{key}' is ambiguous: {len(pieces)} separate streets carry that "
                             f"feature id ({listed})", "close by segment id (a whole number) instead",
                             param="closed")
        out.extend(by_source[key])
    ids = np.unique(np.asarray(out, np.int64))
    already = [int(s) for s in ids if segs[int(s)].closed]
    if already:
        raise InputError(f"segment(s) already closed in the plan's network: "
                         f"{', '.join(_name(segs, s) for s in already[:8])}",
                         "close only streets that were open when the plan was made")
    return ids


def _name(segs: tuple[SegmentRecord, ...], s: int) -> str:
    return f"{s} ('{segs[s].source_id}')"


def _seg_arrays(net: Network, keep: np.ndarray | slice, closed: np.ndarray | None = None) -> Network:
    """A network with a subset of the segments (all nodes kept); used for fingerprints."""
    idx = np.arange(net.n_segments)[keep]
    return dataclasses.replace(
        net, seg_u=net.seg_u[idx], seg_v=net.seg_v[idx], seg_length=net.seg_length[idx],
        seg_oneway=net.seg_oneway[idx], seg_service=net.seg_service[idx],
        seg_class=[net.seg_class[i] for i in idx], seg_name=[net.seg_name[i] for i in idx],
        seg_speed_kmh=net.seg_speed_kmh[idx], seg_closed=net.seg_closed[idx] if closed is None else closed,
        seg_coords=[net.seg_coords[i] for i in idx], seg_source=[net.seg_source[i] for i in idx], findings=(),
        seg_posting=_kept_postings([net.posting(i) for i in idx.tolist()]))


def _differences(plan: Plan, net: Network, closed: np.ndarray, limit: int = 6) -> list[str]:
    """Human-readable differences between the plan's segments and the network's first ones."""
    segs = plan.network.segments
    named = set(closed.tolist())
    out = []
    for rec in segs[:net.n_segments]:
        s = rec.id
        why = []
        if (rec.from_node, rec.to_node) != (int(net.seg_u[s]), int(net.seg_v[s])):
            why.append("different ends")
        if abs(float(rec.length_m) - float(net.seg_length[s])) > 0.0015:
            why.append(f"length {net.seg_length[s]:.3f} m instead of {float(rec.length_m):.3f} m")
        if rec.oneway != bool(net.seg_oneway[s]):
            why.append("one-way differs")
        if rec.closed != bool(net.seg_closed[s]) and s not in named:
            why.append("closed in the file but not named with `closed`" if net.seg_closed[s] else
                       "open in the file but closed in the plan")
        if rec.service != SERVICE_LABELS[int(net.seg_service[s])]:
            why.append(f"service {SERVICE_LABELS[int(net.seg_service[s])]} instead of {rec.service}")
        if rec.source_id != net.seg_source[s]:
            why.append(f"feature '{net.seg_source[s]}' instead of '{rec.source_id}'")
        if why:
            out.append(f"segment {s} ('{rec.source_id}'): {', '.join(why)}")
            if len(out) >= limit:
                out.append("...")
                break
    return out


def match_network(plan: Plan, net: Network, profile: Profile, closed: np.ndarray,
                  opened_sources: Sequence[str] | None = None, *, name: str = "the network") -> bool:
    """Check ``net`` against the plan (see the module notes); True when it already holds the added streets.

    Raises :class:`InputError` naming the differences otherwise.
    """
    nw = plan.network
    segs, m, n = nw.segments, len(nw.segments), len(nw.nodes)
    hint = ("give the network file the plan was made on (or that file with exactly the `closed` streets marked "
            "closed), and new streets as `opened`")
    if net.n_segments < m or net.n_nodes < n or (m and int(max(net.seg_u[:m].max(), net.seg_v[:m].max())) >= n):
        raise InputError(f"{name} is not the network the plan was made on: it has {net.n_segments} segments and "
                         f"{net.n_nodes} nodes, "
                         f"the plan's network {m} and {n}", hint)
    reopened = net.seg_closed[:m].copy()
    reopened[closed] = False
    prefix = _seg_arrays(net, slice(0, m), reopened)
    if prefix.fingerprint != nw.fingerprint:
        diff = _differences(plan, net, closed)
        detail = "; ".join(diff) if diff else "the segment records in the plan file do not add up to its fingerprint"
        raise InputError(f"{name} is not the network the plan was made on (fingerprint differs): {detail}", hint)
    smin = service_minutes(prefix, profile)
    dmin = deadhead_minutes(prefix, profile)
    rec_s = np.array([float(r.service_min) for r in segs])
    rec_d = np.array([float(r.deadhead_min) for r in segs])
    bad = np.flatnonzero((np.abs(smin - rec_s) > _MIN_TOL) | (np.abs(dmin - rec_d) > _MIN_TOL))
    if bad.size:
        raise InputError(f"{name}: the minutes of {bad.size} segment(s) differ from the plan's (speed limits or the "
                         f"profile changed): {describe_segment(net, bad)}",
                         "give the network and `profile` the plan was made with")
    extra = net.seg_source[m:]
    if not extra:
        return False
    if opened_sources is None:
        raise InputError(f"{name} has {len(extra)} street segment(s) the plan does not know "
                         f"({', '.join(repr(s) for s in extra[:6])}{' ...' if len(extra) > 6 else ''})",
                         "if they are new streets, give them as `opened` as well; otherwise give the plan's "
                         "network")
    if sorted(extra) != sorted(opened_sources):
        raise InputError(f"{name} has streets after the plan's that are not exactly the `opened` streets",
                         "give the plan's network as `net` and the new streets as `opened`", param="opened")
    return True


def append_streets(base: Network, add: Network, tol_m: float) -> Network:
    """``base`` with the segments of ``add`` appended (ids ``base.n_segments`` and up).

    An end of an added street joins a node of ``base`` lying within ``tol_m``
    (or, without geometry, a node with the same label); other ends become new
    nodes. An added street ending on the middle of an existing segment is
    refused: splitting that segment would change the ids the plan uses.
    """
    if add.n_segments == 0:
        raise InputError("the added streets (`opened`) hold no street segment", "give a file with the new streets",
                         param="opened")
    if base.has_geometry != add.has_geometry:
        raise InputError("the added streets (`opened`) and the network must both have coordinates, or both not",
                         "give the new streets in the same kind of file as the network", param="opened")
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
        findings=base.findings,
        seg_posting=_kept_postings([base.posting(i) for i in range(base.n_segments)]
                                   + [add.posting(i) for i in range(add.n_segments)]))


def _kept_postings(postings: list) -> tuple:
    """``Network.seg_posting`` for these segments: empty when none is posted (the fingerprint's rule)."""
    return tuple(postings) if any(p is not None for p in postings) else ()


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


def scope_of_parent(plan: Plan, net: Network, profile: Profile) -> Network:
    """``net`` as the parent plan served it: its recorded service area and its left-out streets need no service.

    The left-out list is taken as the parent records it (``verify`` re-derives it);
    the day's changes cannot bring a left-out street back (re-plan for that).
    """
    area = plan.settings.options.area
    if area is not None and net.n_segments >= len(plan.network.segments):
        from crewcut.solve.costs import required_passes

        need = required_passes(net, profile).total > 0
        net = without_service(net, np.flatnonzero(need & ~segments_inside(net, area)))
    left = [s.segment for s in plan.left_out or () if s.reason != "closed" and s.segment < net.n_segments]
    return without_service(net, np.array(left, np.int64)) if left else net


def network_of_the_day(plan: Plan, net: Network, profile: Profile, closed: np.ndarray,
                       opened: Network | Sequence[RawLine] | None, *, name: str = "the network") -> tuple[Network, np.ndarray]:
    """The network the new plan is made on, and the ids of the added segments."""
    if opened is not None and not isinstance(opened, Network):
        from crewcut.solve.network.repair import build_network

        lines = list(opened)
        opened = build_network(lines, profile, has_geometry=all(ln.coords is not None for ln in lines))
    holds_added = match_network(plan, net, profile, closed, None if opened is None else list(opened.seg_source),
                                name=name)
    m = len(plan.network.segments)
    shut = net.seg_closed.copy()
    shut[closed] = True
    today = dataclasses.replace(net, seg_closed=shut)
    if opened is not None and not holds_added:
        today = append_streets(today, opened, profile.snap_tolerance_m)
    return today, np.arange(m, today.n_segments)
