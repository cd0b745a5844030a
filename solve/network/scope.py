"""What a run serves: the service area, and the streets no closed route can serve.

Problem
-------
Every real extract is cut somewhere, and every city's data has a few traps: a
one-way street cut at the border can be entered but never left, a piece of
street is joined to the rest only by a street the vehicle may not use. A crew's
route is a closed walk from its depot, so a street that lies on no closed walk
from any depot cannot be served by any plan. And a planner extracts a wider
buffer of streets for driving than the district the crews serve.

Rules
-----
*Service area* (optional): a street needs service only when the middle of its
length lies inside the area or on its edge; the others keep their service kind
in the data but need none in this run (they may be driven on, never served).
The middle point decides a street that crosses the edge, so two districts that
share an edge serve each street on it once between them (except a street whose
middle lies exactly on the shared edge, which both would serve).

*Unservable streets*: a street that needs service is servable when every
direction it must be served in is a traversal on some closed walk from a depot:
reachable from the depot and able to return to it, over legal directions and,
where the network holds turn bans, legal turns (at the depot itself the
vehicle may turn any way: it turns in the yard). A street that is not servable
gets one reason, the first that holds of:

``outside_depot_reach``
    no street joins it to any depot's streets (another piece of the network);
``cannot_be_reached``
    joined, but no legal way leads from a depot to it;
``cannot_be_left``
    reachable, but no legal way leads from it back to a depot (a one-way trap);

and a street closed in the data that would need service has reason ``closed``.
Under the policy ``"refuse"`` a run with unservable streets stops with them
named (closed streets never stop a run); under ``"leave_out"`` they need no
service in this run and are listed, each with its reason.

Method
------
Breadth-first searches on the graph whose states are the legal directed
traversals (``Network.arcs``) and whose moves are the allowed turns, plus one
yard state joined to every traversal leaving or reaching a depot; without turn
bans the same answer comes from the nodes alone (a traversal ``u -> v`` lies on
a closed walk through the depot exactly when ``u`` is reachable from it and the
depot from ``v``), which is what runs then. Linear in the traversals and turns.
"""
from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import breadth_first_order, connected_components

from crewcut.solve.costs import required_passes
from crewcut.solve.errors import InputError
from crewcut.solve.network.model import SERVICE_NONE, Network
from crewcut.solve.profile import UNSERVABLE_POLICIES, Profile

REASONS = {
    "closed": "closed in the data",
    "outside_depot_reach": "not joined to any depot's streets",
    "cannot_be_reached": "no legal way leads to it from a depot",
    "cannot_be_left": "no legal way leads from it back to a depot (a one-way trap)",
}


@dataclass(frozen=True)
class LeftOutStreet:
    """A segment that needs service but is served by no crew, and why (a key of :data:`REASONS`)."""

    segment: int
    source_id: str
    name: str
    length_m: float
    reason: str


@dataclass(frozen=True)
class ServiceScope:
    """What a run serves: the network to plan on and what it leaves unserved.

    ``network``: the input network with the service of every street outside the
    area and of every left-out street set to none (closed streets stay as they are:
    closed streets need no pass). ``outside_area``: segment ids outside the area
    that needed service. ``left_out``: the listed streets, in segment order.
    """

    network: Network
    left_out: tuple[LeftOutStreet, ...]
    outside_area: np.ndarray
    unservable: str
    area: object = None  # the ServiceArea applied, or None

    @property
    def left_out_km(self) -> float:
        return sum(s.length_m for s in self.left_out) / 1000.0


def check_unservable(value) -> str:
    """``value`` if it is one of :data:`UNSERVABLE_POLICIES`; InputError naming `unservable` otherwise."""
    if value not in UNSERVABLE_POLICIES:
        raise InputError(f"`unservable` is {value!r}",
                         f"give one of: {', '.join(UNSERVABLE_POLICIES)} (what to do with streets no closed "
                         "route from a depot can serve)", param="unservable")
    return value


def segments_inside(net: Network, area) -> np.ndarray:
    """Per segment: does the middle of its length lie inside ``area`` or on its edge?

    ``area`` is a :class:`crewcut.solve.readers.area.ServiceArea`. Midpoints and the
    area are taken in the network's local metric projection (vectorised shapely).
    """
    import shapely

    from crewcut.solve.network.geodesy import project

    if not net.has_geometry:
        raise InputError("a service area was given but the network has no coordinates",
                         "give the streets with coordinates (GeoJSON, OpenStreetMap), or leave out the area",
                         param="area")
    if net.n_segments == 0:
        return np.zeros(0, bool)
    sizes = np.fromiter((len(c) for c in net.seg_coords), np.int64, count=net.n_segments)
    pts = np.concatenate(net.seg_coords)
    x, y = project(pts[:, 0], pts[:, 1], net.origin)
    lines = shapely.linestrings(np.stack([x, y], axis=1), indices=np.repeat(np.arange(net.n_segments), sizes))
    mids = shapely.line_interpolate_point(lines, 0.5, normalized=True)
    shape = shapely.transform(area.shape(), lambda c: np.stack(project(c[:, 0], c[:, 1], net.origin), axis=1))
    shapely.prepare(shape)
    return np.asarray(shapely.covers(shape, mids), bool)


def _bfs(n: int, tail: np.ndarray, head: np.ndarray, source: int) -> np.ndarray:
    g = coo_matrix((np.ones(tail.size, np.int8), (tail, head)), shape=(n, n)).tocsr()
    mask = np.zeros(n, bool)
    mask[breadth_first_order(g, source, directed=True, return_predecessors=False)] = True
    return mask


def _turn_moves(net: Network, tail, head, seg, fwd) -> tuple[np.ndarray, np.ndarray]:
    """(from arc, to arc) for every allowed turn: arrive along one traversal, leave along the next."""
    a = tail.size
    order = np.argsort(tail, kind="stable")
    ptr = np.zeros(net.n_nodes + 1, np.int64)
    np.add.at(ptr, tail + 1, 1)
    ptr = np.cumsum(ptr)
    outdeg = ptr[head + 1] - ptr[head]
    src = np.repeat(np.arange(a), outdeg)
    first = np.repeat(np.cumsum(outdeg) - outdeg, outdeg)
    dst = order[ptr[head[src]] + np.arange(src.size) - first]
    bans = net.turn_bans
    if bans.size:
        arc_of = np.full((net.n_segments, 2), -1, np.int64)
        arc_of[seg, fwd.astype(np.int64)] = np.arange(a)
        b_from = arc_of[bans[:, 0], bans[:, 1]]
        b_to = arc_of[bans[:, 2], bans[:, 3]]
        ok = (b_from >= 0) & (b_to >= 0)
        keep = ~np.isin(src * a + dst, b_from[ok] * a + b_to[ok])
        src, dst = src[keep], dst[keep]
    return src, dst


def servable_arcs(net: Network, profile: Profile, yards: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """For every row of ``net.arcs(profile.ignore_oneway)``: (reachable from a yard, can return to it).

    ``yards``: node ids of depots; with several, a traversal counts when some depot
    reaches it and some depot is reached from it (one piece of the network holds
    one depot's closed walks; see :func:`unservable_streets` for pieces).
    """
    tail, head, seg, fwd = net.arcs(profile.ignore_oneway)
    n = net.n_nodes
    if not net.turn_bans.size:
        t = np.concatenate([tail, np.full(yards.size, n), yards])
        h = np.concatenate([head, yards, np.full(yards.size, n)])
        from_yard = _bfs(n + 1, t, h, n)
        to_yard = _bfs(n + 1, h, t, n)
        return from_yard[tail], to_yard[head]
    a = tail.size
    src, dst = _turn_moves(net, tail, head, seg, fwd)
    is_yard = np.zeros(n, bool)
    is_yard[yards] = True
    leave = np.flatnonzero(is_yard[tail])
    arrive = np.flatnonzero(is_yard[head])
    t = np.concatenate([src, np.full(leave.size, a), arrive])
    h = np.concatenate([dst, leave, np.full(arrive.size, a)])
    return _bfs(a + 1, t, h, a)[:a], _bfs(a + 1, h, t, a)[:a]


def unservable_streets(net: Network, profile: Profile, depots=None) -> tuple[LeftOutStreet, ...]:
    """Streets that need service but lie on no closed walk from a depot, and closed ones (module notes).

    ``depots``: node ids. None judges each connected piece of the network from its
    longest strongly connected part, as if a depot stood there (what ``check`` does
    before depots are known); no street is then ``outside_depot_reach``.
    """
    m, n = net.n_segments, net.n_nodes
    passes = required_passes(net, profile)
    need = passes.total > 0
    open_ = np.flatnonzero(~net.seg_closed)
    und = coo_matrix((np.ones(open_.size), (net.seg_u[open_], net.seg_v[open_])), shape=(n, n))
    _, weak = connected_components(und, directed=False)
    if depots is None:
        yards = _piece_yards(net, profile, weak)
        joined = np.ones(m, bool)
    else:
        yards = np.unique(np.asarray(list(depots), np.int64))
        joined = np.isin(weak[net.seg_u], weak[yards])
    tail, head, seg, fwd = net.arcs(profile.ignore_oneway)
    reach, back = servable_arcs(net, profile, yards)
    ok_arc = reach & back
    ok_dir = np.zeros((m, 2), bool)  # [segment, forward?]
    ok_dir[seg, fwd.astype(np.int64)] = ok_arc
    reached = np.zeros(m, bool)
    np.logical_or.at(reached, seg, reach)
    servable = ((passes.forward == 0) | ok_dir[:, 1]) & ((passes.backward == 0) | ok_dir[:, 0]) \
        & ((passes.either == 0) | ok_dir[:, 0] | ok_dir[:, 1])
    out = []
    closed_need = net.seg_closed & (net.seg_service != SERVICE_NONE)
    for s in np.flatnonzero((need & ~servable) | closed_need).tolist():
        if closed_need[s]:
            why = "closed"
        elif not joined[s]:
            why = "outside_depot_reach"
        elif not reached[s]:
            why = "cannot_be_reached"
        else:
            why = "cannot_be_left"
        out.append(LeftOutStreet(s, net.seg_source[s], net.seg_name[s], float(net.seg_length[s]), why))
    return tuple(out)


def _piece_yards(net: Network, profile: Profile, weak: np.ndarray) -> np.ndarray:
    """One node per connected piece: the lowest node of its longest strongly connected part."""
    tail, head, seg, _ = net.arcs(profile.ignore_oneway)
    n = net.n_nodes
    if tail.size == 0:
        return np.zeros(0, np.int64)
    g = coo_matrix((np.ones(tail.size), (tail, head)), shape=(n, n))
    _, strong = connected_components(g, directed=True, connection="strong")
    inside = strong[tail] == strong[head]
    size = np.bincount(strong[tail[inside]], weights=net.seg_length[seg[inside]], minlength=strong.max() + 1)
    best: dict[int, tuple[float, int]] = {}
    for x in np.unique(np.concatenate([tail, head])).tolist():  # nodes in id order: ties go to the lowest
        key = (-float(size[strong[x]]), x)
        piece = int(weak[x])
        if piece not in best or key < best[piece]:
            best[piece] = key
    return np.array(sorted(v[1] for v in best.values()), np.int64)


def without_service(net: Network, segments: np.ndarray) -> Network:
    """``net`` with the service of ``segments`` set to none (they may still be driven)."""
    svc = net.seg_service.copy()
    svc[np.asarray(segments, np.int64)] = SERVICE_NONE
    return dataclasses.replace(net, seg_service=svc)


def describe_left_out(items, limit: int = 6) -> str:
    """'N streets (x km): 'name' (way/1, cannot_be_left), ...' for a message."""
    items = list(items)
    km = sum(s.length_m for s in items) / 1000.0
    shown = ", ".join(f"'{s.name or s.source_id}' ({s.source_id}, {s.reason})" for s in items[:limit])
    more = f" and {len(items) - limit} more" if len(items) > limit else ""
    return f"{len(items)} street segment(s) ({km:.2f} km): {shown}{more}"


def scope_network(net: Network, profile: Profile, depots, *, area=None,
                  unservable: str = "leave_out") -> ServiceScope:
    """Apply the service area and the unservable-street policy (module notes) for crews at ``depots``.

    Raises :class:`InputError` when the area holds no street that needs service, or
    under ``unservable="refuse"`` when some street no closed route can serve needs
    service (naming them; the message says how many kilometres leaving them out would take).
    """
    check_unservable(unservable)
    outside = np.zeros(0, np.int64)
    if area is not None:
        need = required_passes(net, profile).total > 0
        inside = segments_inside(net, area)
        if not (need & inside).any():
            raise InputError(f"the service area {area.source or ''} holds no street that needs service".replace("  ", " "),
                             "check that the area and the streets are the same place (both WGS84 lon/lat) and "
                             "that the profile serves the streets inside", param="area")
        outside = np.flatnonzero(need & ~inside)
        net = without_service(net, outside)
    found = unservable_streets(net, profile, depots)
    trapped = [s for s in found if s.reason != "closed"]
    if trapped and unservable == "refuse":
        raise InputError(
            f"streets that need service lie on no closed route from a depot: {describe_left_out(trapped)}; "
            "the streets are plannable once these are left out",
            "give `unservable` leave_out to plan without them (each is listed with its reason), fix the "
            "one-way directions or add the missing streets, or place a depot where it can reach them",
            param="unservable")
    if trapped:
        net = without_service(net, np.array([s.segment for s in trapped], np.int64))
        if not (required_passes(net, profile).total > 0).any():
            raise InputError(f"no closed route from a depot can serve any street that needs service: "
                             f"{describe_left_out(trapped)}",
                             "place the depot on the streets to be served (check its position), or fix the "
                             "one-way directions around it", param="depot_lonlat")
    return ServiceScope(net, found, outside, unservable, area)


def run_scope(net: Network, profile: Profile, depots, area=None, unservable: str | None = None) -> ServiceScope:
    """:func:`scope_network` with the profile's defaults: its ``service_area`` file and ``unservable`` policy."""
    if area is None and profile.service_area is not None:
        from crewcut.solve.readers.area import read_area

        area = read_area(profile.service_area)
    return scope_network(net, profile, depots, area=area,
                         unservable=profile.unservable if unservable is None else unservable)
