"""What the territory layer needs to know about the streets, computed once per plan.

* which segments need service, and the estimated work of each (service minutes of
  all its passes);
* which required segments are neighbours (they share a node), plus *links* between
  groups of required streets that only drive-through streets join, so that a
  territory may span such a gap; the links are a minimum spanning tree over
  shortest drive-through paths, found with the Voronoi-region construction of
  Mehlhorn (1988), "A faster approximation algorithm for the Steiner problem in
  graphs", Information Processing Letters 27, 125-128;
* travel minutes from and to every depot over the legal driving directions
  (Dijkstra, scipy.sparse.csgraph), which also tells which crews can reach which
  segments.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import sparse
from scipy.sparse import csgraph

from crewcut.solve.costs import Passes, deadhead_minutes, required_passes, service_minutes
from crewcut.solve.network.model import Network
from crewcut.solve.profile import Profile

_EPS = 1e-9  # keeps zero-length segments as edges in csgraph


@dataclass(frozen=True)
class StreetGraph:
    """Per-segment arrays (length m) and the neighbour relation of required segments."""

    passes: Passes
    required: np.ndarray  # bool (m,)
    work: np.ndarray  # service minutes of all passes of each segment
    service_min: np.ndarray  # one pass
    deadhead_min: np.ndarray
    mid_x: np.ndarray  # midpoint in local metres (node means when no geometry)
    mid_y: np.ndarray
    nb_ptr: np.ndarray  # CSR neighbour lists over segment ids (required segments only)
    nb_idx: np.ndarray
    seg_u: np.ndarray  # end nodes of every segment
    seg_v: np.ndarray
    at_ptr: np.ndarray  # CSR over node ids: the required segments at each node
    at_idx: np.ndarray

    def neighbours(self, s: int) -> np.ndarray:
        return self.nb_idx[self.nb_ptr[s]:self.nb_ptr[s + 1]]

    def at(self, x: int) -> np.ndarray:
        """Required segments with an end at node ``x``."""
        return self.at_idx[self.at_ptr[x]:self.at_ptr[x + 1]]


def build_street_graph(net: Network, profile: Profile) -> StreetGraph:
    passes = required_passes(net, profile)
    req = passes.total > 0
    smin = service_minutes(net, profile)
    dmin = deadhead_minutes(net, profile)
    work = smin * passes.total
    mx = (net.node_x[net.seg_u] + net.node_x[net.seg_v]) / 2.0
    my = (net.node_y[net.seg_u] + net.node_y[net.seg_v]) / 2.0
    m, n = net.n_segments, net.n_nodes
    rs = np.flatnonzero(req)
    # segment x node incidence of required segments; B B^T links segments sharing a node
    rows = np.concatenate([rs, rs])
    cols = np.concatenate([net.seg_u[rs], net.seg_v[rs]])
    b = sparse.csr_matrix((np.ones(rows.size), (rows, cols)), shape=(m, n))
    a = (b @ b.T).tocoo()
    keep = a.row != a.col
    pairs = [np.stack([a.row[keep], a.col[keep]], axis=1)]
    links = _component_links(net, dmin, req)
    if links.size:
        pairs.append(links)
        pairs.append(links[:, ::-1])
    p = np.unique(np.concatenate(pairs).astype(np.int64).reshape(-1, 2), axis=0)
    adj = sparse.csr_matrix((np.ones(p.shape[0], np.int8), (p[:, 0], p[:, 1])), shape=(m, m))
    adj.sort_indices()
    inc = b.T.tocsr()  # node x segment
    inc.sort_indices()
    return StreetGraph(passes, req, work, smin, dmin, mx, my,
                       adj.indptr.astype(np.int64), adj.indices.astype(np.int64),
                       net.seg_u.astype(np.int64), net.seg_v.astype(np.int64),
                       inc.indptr.astype(np.int64), inc.indices.astype(np.int64))


def _undirected_usable(net: Network, weight: np.ndarray) -> sparse.csr_matrix:
    use = np.flatnonzero(~net.seg_closed)
    return _min_csr(np.concatenate([net.seg_u[use], net.seg_v[use]]),
                    np.concatenate([net.seg_v[use], net.seg_u[use]]),
                    np.concatenate([weight[use], weight[use]]) + _EPS, net.n_nodes)


def _min_csr(rows, cols, w, n) -> sparse.csr_matrix:
    """A CSR matrix keeping the smallest weight of parallel edges (csr would sum them)."""
    order = np.lexsort((w, cols, rows))
    rows, cols, w = rows[order], cols[order], w[order]
    first = np.ones(rows.size, bool)
    first[1:] = (rows[1:] != rows[:-1]) | (cols[1:] != cols[:-1])
    return sparse.csr_matrix((w[first], (rows[first], cols[first])), shape=(n, n))


def _component_links(net: Network, dmin: np.ndarray, req: np.ndarray) -> np.ndarray:
    """Segment pairs that link groups of required streets joined only by drive-through streets.

    Groups are connected components of required segments (sharing nodes). One link
    per edge of Mehlhorn's spanning tree over the groups' Voronoi regions in the
    undirected usable graph; each link joins the two required segments nearest to
    the tree edge's ends. Groups that no usable street joins get no link.
    """
    n = net.n_nodes
    rs = np.flatnonzero(req)
    if rs.size == 0:
        return np.zeros((0, 2), np.int64)
    g_req = sparse.csr_matrix((np.ones(2 * rs.size), (np.concatenate([net.seg_u[rs], net.seg_v[rs]]),
                                                       np.concatenate([net.seg_v[rs], net.seg_u[rs]]))),
                              shape=(n, n))
    on_req = np.zeros(n, bool)
    on_req[net.seg_u[rs]] = True
    on_req[net.seg_v[rs]] = True
    _, comp = csgraph.connected_components(g_req, directed=False)
    groups = np.unique(comp[on_req])
    if groups.size <= 1:
        return np.zeros((0, 2), np.int64)
    g = _undirected_usable(net, dmin)
    sources = np.flatnonzero(on_req)
    dist, _, src = csgraph.dijkstra(g, directed=False, indices=sources, min_only=True, return_predecessors=True)
    use = np.flatnonzero(~net.seg_closed)
    a, b = net.seg_u[use], net.seg_v[use]
    ok = np.isfinite(dist[a]) & np.isfinite(dist[b])
    a, b, w = a[ok], b[ok], (dist[a] + dmin[use] + dist[b])[ok]
    sa, sb = src[a], src[b]
    ca, cb = comp[sa], comp[sb]
    cross = ca != cb
    if not cross.any():
        return np.zeros((0, 2), np.int64)
    sa, sb, ca, cb, w = sa[cross], sb[cross], ca[cross], cb[cross], w[cross]
    # cheapest candidate per group pair, then a spanning tree over the groups
    lo, hi = np.minimum(ca, cb), np.maximum(ca, cb)
    order = np.lexsort((sb, sa, w, hi, lo))
    lo, hi, w, sa, sb = lo[order], hi[order], w[order], sa[order], sb[order]
    first = np.ones(lo.size, bool)
    first[1:] = (lo[1:] != lo[:-1]) | (hi[1:] != hi[:-1])
    lo, hi, w, sa, sb = lo[first], hi[first], w[first], sa[first], sb[first]
    gidx = {int(c): i for i, c in enumerate(groups)}
    li = np.array([gidx[int(c)] for c in lo])
    hj = np.array([gidx[int(c)] for c in hi])
    t = csgraph.minimum_spanning_tree(sparse.csr_matrix((w + _EPS, (li, hj)), shape=(groups.size, groups.size)))
    t = t.tocoo()
    chosen = {(min(int(i), int(j)), max(int(i), int(j))) for i, j in zip(t.row, t.col)}
    # the required segment at each source node: the lowest id touching it
    seg_at = np.full(n, -1, np.int64)
    for ends in (net.seg_v[rs][::-1], net.seg_u[rs][::-1]):
        seg_at[ends] = rs[::-1]
    out = []
    for k in range(lo.size):
        if (int(li[k]), int(hj[k])) in chosen:
            out.append((int(seg_at[sa[k]]), int(seg_at[sb[k]])))
    return np.array(sorted(out), np.int64).reshape(-1, 2)


def driving_graph(net: Network, profile: Profile) -> sparse.csr_matrix:
    """Legal driving directions of usable segments, weighted by deadhead minutes."""
    tail, head, seg, _ = net.arcs(ignore_oneway=profile.ignore_oneway)
    return _min_csr(tail, head, deadhead_minutes(net, profile)[seg] + _EPS, net.n_nodes)


def depot_travel(net: Network, profile: Profile, depots: list[int]) -> tuple[np.ndarray, np.ndarray]:
    """Minutes from each depot to every node, and from every node back to each depot.

    Returns ``(out, back)``, each of shape (len(depots), n_nodes); ``inf`` where
    one-way streets or closures make the trip impossible.
    """
    g = driving_graph(net, profile)
    idx = np.asarray(depots, np.int64)
    out = csgraph.dijkstra(g, directed=True, indices=idx)
    back = csgraph.dijkstra(g.T.tocsr(), directed=True, indices=idx)
    return np.atleast_2d(out), np.atleast_2d(back)


def round_trips(net: Network, sg: StreetGraph, out: np.ndarray, back: np.ndarray) -> np.ndarray:
    """Minutes of the cheapest trip depot -> serve one pass of the segment -> depot.

    Shape (n_depots, m); ``inf`` for segments a depot cannot serve and come back
    from, and for segments that need no service. For segments with several
    passes the worst pass counts (each pass must be served by some trip).
    """
    u, v = net.seg_u, net.seg_v
    s = sg.service_min
    fwd = out[:, u] + s + back[:, v]  # drive u -> v
    bwd = out[:, v] + s + back[:, u]
    p = sg.passes
    rt = np.zeros_like(fwd)
    rt = np.where(p.forward > 0, np.maximum(rt, fwd), rt)
    rt = np.where(p.backward > 0, np.maximum(rt, bwd), rt)
    rt = np.where(p.either > 0, np.maximum(rt, np.minimum(fwd, bwd)), rt)
    rt[:, ~sg.required] = np.inf
    return rt
