"""Rural postman connection: join the pieces of the required streets and the depot.

Problem
-------
When only some streets need service, the required passes plus the depot may fall
into several pieces (weakly connected components). A closed walk must link them
by deadheading, on any usable segment, inside the territory or not. Finding the
cheapest links together with the cheapest balancing is NP-hard.

Method
------
Frederickson's heuristic (1979): join the pieces by a minimum spanning tree
over shortest paths between pieces, add those paths' segments as extra items
that must be driven once, then make the result Eulerian as usual. The spanning
tree is computed the sparse way (Mehlhorn 1988): one multi-source Dijkstra from
every node of every piece (scipy's ``dijkstra(..., min_only=True)``) gives each
node its nearest piece; every segment whose ends lie in two different regions
is a candidate link of cost ``dist(a) + cost(a, b) + dist(b)``; a minimum
spanning tree over the cheapest candidate per pair of pieces chooses the links.
Distances use each segment's cheapest legal direction: connectivity only needs
the pieces to be joined, the balancing step afterwards restores direction.

Before that, :func:`check_reachable` makes sure that a closed walk exists at
all: every required node must lie in the depot's strongly connected component
of the legal driving directions (one-way traps, closed bridges); otherwise it
raises :class:`~crewcut.solve.errors.InputError` naming the segments involved.

References
----------
G. N. Frederickson, "Approximation algorithms for some postman problems",
Journal of the ACM 26 (1979) 538-554.
K. Mehlhorn, "A faster approximation algorithm for the Steiner problem in
graphs", Information Processing Letters 27 (1988) 125-128.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components, dijkstra, minimum_spanning_tree

from crewcut.solve.errors import InputError
from crewcut.solve.postman.tjoin import merge_parallel


@dataclass(frozen=True)
class Connection:
    """Connector items found by :func:`connect_pieces`.

    ``arc``: one deadhead arc index per connector segment (the direction the
    path took when legal, else the legal one); ``two_way``: whether the segment
    may be driven either way (then the balancing may flip it).
    """

    arc: np.ndarray  # int64
    two_way: np.ndarray  # bool
    n_pieces: int


def _name(seg: int, seg_source) -> str:
    if seg_source is not None and 0 <= seg < len(seg_source) and seg_source[seg]:
        return f"segment {seg} ('{seg_source[seg]}')"
    return f"segment {seg}"


def check_reachable(items_tail, items_head, items_seg, arcs_tail, arcs_head, depot: int,
                    n_nodes: int, seg_source=None) -> None:
    """Raise InputError unless every item can be reached from and return to ``depot``."""
    items_tail = np.asarray(items_tail, np.int64)
    items_head = np.asarray(items_head, np.int64)
    if items_tail.size == 0:
        return
    if not 0 <= depot < n_nodes:
        raise InputError(f"depot node {depot} is not in the network (0..{n_nodes - 1})",
                         "snap the depot to the network with crewcut.solve.network.depot.snap_depot")
    g = sp.csr_matrix((np.ones(len(arcs_tail), np.int8), (arcs_tail, arcs_head)), shape=(n_nodes, n_nodes))
    _, label = connected_components(g, directed=True, connection="strong")
    home = label[depot]
    bad = (label[items_tail] != home) | (label[items_head] != home)
    if not bad.any():
        return
    segs = np.unique(np.asarray(items_seg, np.int64)[bad])
    shown = ", ".join(_name(int(s), seg_source) for s in segs[:8])
    more = f" and {segs.size - 8} more" if segs.size > 8 else ""
    raise InputError(
        f"{segs.size} required segment(s) cannot be reached from the depot (node {depot}) "
        f"and driven back to it: {shown}{more}",
        "check one-way directions and closed segments near them (a one-way trap or a closed "
        "bridge), or leave these segments out of the territory")


def connect_pieces(items_tail, items_head, depot: int, arcs_tail, arcs_head, arcs_seg, arcs_cost,
                   n_nodes: int) -> Connection:
    """Connector arcs joining all pieces of the items plus the depot (Frederickson 1979)."""
    items_tail = np.asarray(items_tail, np.int64)
    items_head = np.asarray(items_head, np.int64)
    arcs_tail = np.asarray(arcs_tail, np.int64)
    arcs_head = np.asarray(arcs_head, np.int64)
    arcs_cost = np.asarray(arcs_cost, np.float64)
    none = Connection(np.zeros(0, np.int64), np.zeros(0, bool), 1)
    if items_tail.size == 0:
        return none
    # Pieces: components of the item graph, plus the depot.
    g = sp.csr_matrix((np.ones(items_tail.size, np.int8), (items_tail, items_head)), shape=(n_nodes, n_nodes))
    _, comp = connected_components(g, directed=True, connection="weak")
    required = np.zeros(n_nodes, bool)
    required[items_tail] = True
    required[items_head] = True
    required[depot] = True
    req_nodes = np.flatnonzero(required)
    pieces, piece_of_req = np.unique(comp[req_nodes], return_inverse=True)
    if pieces.size <= 1:
        return none
    piece = np.full(n_nodes, -1, np.int64)
    piece[req_nodes] = piece_of_req
    # Undirected street graph, each node pair at its cheapest legal direction.
    keep = merge_parallel(arcs_tail, arcs_head, arcs_cost)
    a, b = np.minimum(arcs_tail[keep], arcs_head[keep]), np.maximum(arcs_tail[keep], arcs_head[keep])
    w = arcs_cost[keep]
    ug = sp.csr_matrix((w, (a, b)), shape=(n_nodes, n_nodes))  # explicit zeros stay edges
    dist, pred, src = dijkstra(ug, directed=False, indices=req_nodes, min_only=True, return_predecessors=True)
    region = np.where(src >= 0, piece[np.maximum(src, 0)], -1)
    ra, rb = region[a], region[b]
    cand = np.flatnonzero((ra >= 0) & (rb >= 0) & (ra != rb))
    if cand.size == 0:
        raise InputError("the required segments fall into pieces that no usable street joins",
                         "open a closed segment between them or serve each piece from its own depot")
    length = dist[a[cand]] + w[cand] + dist[b[cand]]
    pa = np.minimum(ra[cand], rb[cand])
    pb = np.maximum(ra[cand], rb[cand])
    order = np.lexsort((cand, length, pb, pa))
    cand, length, pa, pb = cand[order], length[order], pa[order], pb[order]
    first = np.ones(cand.size, bool)
    first[1:] = (pa[1:] != pa[:-1]) | (pb[1:] != pb[:-1])
    cand, length, pa, pb = cand[first], length[first], pa[first], pb[first]
    k = pieces.size
    # MST over pieces; +1e-9 keeps zero-length links as edges, tie-breaks stay deterministic.
    mst = minimum_spanning_tree(sp.csr_matrix((length + 1e-9, (pa, pb)), shape=(k, k))).tocoo()
    if mst.nnz < k - 1:
        raise InputError("the required segments fall into pieces that no usable street joins",
                         "open a closed segment between them or serve each piece from its own depot")
    lookup = {(int(x), int(y)): int(c) for x, y, c in zip(pa, pb, cand)}
    # Arc index per directed node pair (cheapest), to turn path steps into arcs.
    step_arc: dict[tuple[int, int], int] = {}
    order = np.lexsort((np.arange(arcs_tail.size), arcs_cost))
    for i in order[::-1].tolist():
        step_arc[(int(arcs_tail[i]), int(arcs_head[i]))] = i
    two_way_seg = np.zeros(int(arcs_seg.max()) + 1 if arcs_seg.size else 0, np.int64)
    np.add.at(two_way_seg, arcs_seg, 1)
    chosen: list[int] = []
    for x, y in sorted(zip(np.minimum(mst.row, mst.col).tolist(), np.maximum(mst.row, mst.col).tolist())):
        e = lookup[(x, y)]
        u, v = int(a[e]), int(b[e])
        path = _walk_back(u, pred)[::-1] + _walk_back(v, pred)  # source(u) .. u, v .. source(v)
        for s, t in zip(path[:-1], path[1:]):
            arc = step_arc.get((s, t))
            if arc is None:
                arc = step_arc[(t, s)]  # one-way street walked against it: keep the legal arc
            chosen.append(arc)
    arcs_idx = np.asarray(chosen, np.int64)
    two_way = two_way_seg[arcs_seg[arcs_idx]] >= 2
    return Connection(arcs_idx, two_way, int(k))


def _walk_back(node: int, pred: np.ndarray) -> list[int]:
    out = [node]
    while pred[node] >= 0:
        node = int(pred[node])
        out.append(node)
    return out
