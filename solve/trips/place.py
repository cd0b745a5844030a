"""Facilities placed on the network, and the least-minute deadhead paths to and from them."""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import sparse
from scipy.sparse.csgraph import dijkstra

from crewcut.solve.errors import InputError
from crewcut.solve.network.depot import check_depot_node, snap_depot
from crewcut.solve.network.model import Network
from crewcut.solve.postman.tasks import build_deadhead
from crewcut.solve.profile import Profile
from crewcut.solve.result import Traversal
from crewcut.solve.trips.config import Facility


@dataclass(frozen=True)
class PlacedFacility:
    facility: Facility
    node: int


def place_facilities(net: Network, profile: Profile) -> tuple[PlacedFacility, ...]:
    """Every configured facility on its node: lon/lat snapped as depots are, or its node checked."""
    out = []
    for f in profile.facilities:
        who = f"facility '{f.id}'"
        if f.lonlat is not None:
            node = snap_depot(net, f.lonlat[0], f.lonlat[1], profile.depot_snap_max_m, who=who)
        else:
            node = check_depot_node(net, f.node, who=who, usable=True)
        out.append(PlacedFacility(f, int(node)))
    return tuple(out)


class TripPaths:
    """Least-minute deadhead paths from every node to every facility and back, over the legal
    directions a depot's closed walks use (:func:`crewcut.solve.postman.tasks.build_deadhead`)."""

    def __init__(self, net: Network, profile: Profile, depot: int, facilities: tuple[PlacedFacility, ...]) -> None:
        arcs = build_deadhead(net, profile, depot)
        n = net.n_nodes
        order = np.lexsort((arcs.seg, arcs.minutes))  # cheapest arc first; lowest segment on ties
        key = arcs.tail[order] * n + arcs.head[order]
        _, first = np.unique(key, return_index=True)
        pick = order[first]
        self.arcs = arcs
        self.best = {(int(t), int(h)): int(a) for t, h, a in
                     zip(arcs.tail[pick].tolist(), arcs.head[pick].tolist(), pick.tolist())}
        g = sparse.csr_matrix((arcs.minutes[pick] + 1e-9, (arcs.tail[pick], arcs.head[pick])), shape=(n, n))
        nodes = np.array([p.node for p in facilities], np.int64)
        if nodes.size:
            self.d_from, self.p_from = dijkstra(g, directed=True, indices=nodes, return_predecessors=True)
            self.d_to, self.p_to = dijkstra(g.T.tocsr(), directed=True, indices=nodes, return_predecessors=True)
        else:
            self.d_from = self.d_to = self.p_from = self.p_to = np.zeros((0, n))
        self.nodes = nodes
        self.hops_from = np.array([_hops(d, p) for d, p in zip(self.d_from, self.p_from)]).reshape(len(nodes), n)
        self.hops_to = np.array([_hops(d, p) for d, p in zip(self.d_to, self.p_to)]).reshape(len(nodes), n)

    def _arc(self, u: int, v: int) -> Traversal:
        i = self.best[(u, v)]
        a = self.arcs
        return Traversal(int(a.seg[i]), u, v, False, float(a.metres[i]), float(a.minutes[i]))

    def to_facility(self, f: int, x: int) -> list[Traversal]:
        """The path from node ``x`` to facility ``f`` (reverse tree: pred points towards the facility)."""
        out, v = [], int(x)
        while v != self.nodes[f]:
            w = int(self.p_to[f, v])
            out.append(self._arc(v, w))
            v = w
        return out

    def from_facility(self, f: int, y: int) -> list[Traversal]:
        nodes, v = [int(y)], int(y)
        while v != self.nodes[f]:
            v = int(self.p_from[f, v])
            nodes.append(v)
        nodes.reverse()
        return [self._arc(u, w) for u, w in zip(nodes[:-1], nodes[1:])]


def _hops(dist: np.ndarray, pred: np.ndarray) -> np.ndarray:
    """Edges on each tree path (nodes taken in order of distance, so a predecessor comes first)."""
    hops = np.zeros(dist.size, np.int64)
    for v in np.argsort(dist, kind="stable").tolist():
        p = int(pred[v])
        if p >= 0 and np.isfinite(dist[v]):
            hops[v] = hops[p] + 1
    return hops


def check_reachable(net: Network, profile: Profile, depot: int, placed: tuple[PlacedFacility, ...],
                    who: str) -> None:
    """Each capacity has a facility that resets it which ``depot`` can reach and come back from."""
    if not placed:
        return
    paths = TripPaths(net, profile, depot, placed)
    ok = np.isfinite(paths.d_from[:, depot]) & np.isfinite(paths.d_to[:, depot])
    for c in profile.capacities:
        fs = [i for i, p in enumerate(placed) if c.name in p.facility.resets]
        if not any(ok[i] for i in fs):
            names = ", ".join(f"'{placed[i].facility.id}' (node {placed[i].node})" for i in fs)
            raise InputError(f"facilities: no facility that resets capacity '{c.name}' can be reached from {who} "
                             f"and left again by legal driving directions: {names}",
                             "move the facility's location onto a street the crews drive both to and from, "
                             "or add one that they can reach")
