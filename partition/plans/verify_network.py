"""Verify, part 1: the plan's copy of the network against the network file and the profile.

The network file is the truth. Every record the plan keeps of it is compared
with what the file gives (read with the profile): the fingerprint, every
segment's ends, length, one-way flag and closure, every node's position (to the
plan's 7-decimal rounding) and label, every segment's feature id, name, road
class, service kind, posted sweeping time and drawn line, and the required passes and service and
deadhead minutes the profile gives each segment.
"""
from __future__ import annotations

import numpy as np

from crewcut.solve.costs import deadhead_minutes, required_passes, service_minutes
from crewcut.solve.network.model import SERVICE_LABELS, Network
from crewcut.solve.profile import Profile

from crewcut.plans.model import Plan, PostedRecord
from crewcut.plans.violation import TOL_DEG, TOL_M, Violation


def check_network(plan: Plan, net: Network, profile: Profile):
    """Yield the network's violations (the caller stops at the first it wants)."""
    nw = plan.network
    if nw.fingerprint != net.fingerprint:
        yield Violation("network", "the plan was made on a different network (fingerprint differs)", "network")
        return
    segs = nw.segments
    if len(segs) != net.n_segments or len(nw.nodes) != net.n_nodes:
        yield Violation("network", f"the plan lists {len(segs)} segments and {len(nw.nodes)} nodes, "
                        f"the network has {net.n_segments} and {net.n_nodes}", "network")
        return
    for s, rec in enumerate(segs):
        if (rec.id != s or rec.from_node != int(net.seg_u[s]) or rec.to_node != int(net.seg_v[s])
                or rec.oneway != bool(net.seg_oneway[s]) or rec.closed != bool(net.seg_closed[s])
                or abs(float(rec.length_m) - float(net.seg_length[s])) > TOL_M):
            yield Violation(f"segment {s}", "differs from the network (ends, length, one-way or closure)", "network")
            return
    yield from _nodes(plan, net)
    yield from _segments(plan, net)
    yield from _passes_and_minutes(plan, net, profile)


def _nodes(plan: Plan, net: Network):
    nw = plan.network
    if bool(nw.has_geometry) != bool(net.has_geometry):
        yield Violation("network", f"the plan says has_geometry {nw.has_geometry}, the network file "
                        f"{'has' if net.has_geometry else 'has no'} coordinates", "coordinates")
        return
    for i, n in enumerate(nw.nodes):
        if n.label != net.node_label[i]:
            yield Violation(f"node {i}", f"labelled {n.label!r}, the network labels it {net.node_label[i]!r}", "name")
            return
    if not net.has_geometry:
        return
    lon = np.array([float(n.lon) for n in nw.nodes])
    lat = np.array([float(n.lat) for n in nw.nodes])
    off = np.flatnonzero((np.abs(lon - net.node_lon) > TOL_DEG) | (np.abs(lat - net.node_lat) > TOL_DEG))
    if off.size:
        i = int(off[0])
        yield Violation(f"node {i}", f"recorded at lon {lon[i]:.7f}, lat {lat[i]:.7f}; the network has it at "
                        f"lon {net.node_lon[i]:.7f}, lat {net.node_lat[i]:.7f} ({off.size} node(s) moved)",
                        "coordinates")


def _segments(plan: Plan, net: Network):
    for s, rec in enumerate(plan.network.segments):
        for key, got, want in (("feature id", rec.source_id, net.seg_source[s]), ("name", rec.name, net.seg_name[s]),
                               ("road class", rec.road_class, net.seg_class[s]),
                               ("service", rec.service, SERVICE_LABELS[int(net.seg_service[s])]),
                               ("posted time", _shown(rec.posted), _shown(PostedRecord.of(net.posting(s))))):
            if got != want:
                yield Violation(f"segment {s}", f"{key} {got!r} in the plan, {want!r} in the network", "name")
                return
        want_line = net.seg_coords[s]
        if (rec.coords is None) != (want_line is None):
            yield Violation(f"segment {s}", "has a drawn line in only one of the plan and the network", "drawn line")
            return
        if want_line is None:
            continue
        got = np.asarray(rec.coords, float)
        want_line = np.asarray(want_line, float)
        if got.shape != want_line.shape or bool(np.any(np.abs(got - want_line) > TOL_DEG)):
            yield Violation(f"segment {s} ('{net.seg_source[s]}')",
                            f"its drawn line in the plan ({len(got)} points) is not the network's "
                            f"({len(want_line)} points)", "drawn line")
            return


def _shown(p: PostedRecord | None) -> str:
    return "none" if p is None else f"{p.day} {p.window}".strip()


def _passes_and_minutes(plan: Plan, net: Network, profile: Profile):
    segs = plan.network.segments
    p = required_passes(net, profile)
    for s, rec in enumerate(segs):
        got = rec.passes
        if (got.forward, got.backward, got.either) != (int(p.forward[s]), int(p.backward[s]), int(p.either[s])):
            shown = {"forward": got.forward, "backward": got.backward, "either": got.either}
            yield Violation(f"segment {s}", f"the plan records passes {shown}, the network and profile need "
                            f"forward {p.forward[s]}, backward {p.backward[s]}, either {p.either[s]}", "passes")
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
                            f"{want[s]:.5f} (different speeds or road classes?)", "minutes")
            return
