"""One crew's route on one cycle day, serving posted passes inside their windows.

Problem
-------
Serve every required pass of a day's segments on a closed route from the depot,
starting at the shift's clock time, so that every pass of a posted segment is
driven inside its window (waiting is allowed and counted), with as few minutes
as possible. This is arc routing with time windows, NP-hard (it contains the
postman problem's rural case); the result is a heuristic route with the plain
route's lower bound, which stays a valid bound because dropping the windows
only relaxes the problem.

Method
------
1. The plain route (:func:`crewcut.solve.route.plan_route`) with waits inserted
   (:func:`crewcut.solve.calendar.clock.with_waits`) is the first candidate.
2. Window blocks: the posted segments grouped by window, in order of opening
   (then closing) time; the unposted ones form a free block, tried at every
   position in the order. Each block is a closed route from an anchor node (its
   node nearest the previous anchor), joined by least-minute deadhead paths
   (scipy's Dijkstra on the legal driving directions); turns are classified
   again along the whole walk. A joined walk that would make a turn the network
   forbids (:mod:`crewcut.solve.circuits.bans`) is dropped; the plain route never does.
3. The candidate that meets every window with the fewest total minutes wins;
   if none meets them all, the one with the least lateness, and the route's
   ``stats["window_misses"]`` counts the passes outside their windows.
"""
from __future__ import annotations

from dataclasses import replace

import numpy as np
from scipy import sparse
from scipy.sparse.csgraph import dijkstra

from crewcut.solve.calendar.clock import window_misses, with_waits
from crewcut.solve.circuits.bans import BanTable
from crewcut.solve.circuits.turns import TurnModel, turns_along_walk
from crewcut.solve.network.model import Network
from crewcut.solve.postman.tasks import build_deadhead
from crewcut.solve.profile import Profile
from crewcut.solve.result import Route, RouteTotals, Traversal
from crewcut.solve.route import plan_route


def posted_windows(net: Network, segments) -> dict[int, tuple[int, int]]:
    """Segment -> (open, close) clock minutes for the segments whose posting has a window."""
    out = {}
    for s in segments:
        p = net.posting(int(s))
        if p is not None and p.has_window:
            out[int(s)] = (int(p.open_min), int(p.close_min))
    return out


def plan_day_route(net: Network, profile: Profile, depot: int, segments, start_min: float, *,
                   turn_aware: bool = True, time_limit_s: float = 10.0, seed: int = 0) -> Route:
    """A closed route from ``depot`` starting at clock ``start_min`` (module docstring).

    Parameters are those of :func:`crewcut.solve.route.plan_route`, plus ``start_min``
    (minutes after midnight). The route's ``start_min`` is set; its ``day`` is left None
    (the caller knows the day).
    """
    segs = sorted(int(s) for s in segments)
    base = plan_route(net, profile, depot, segs, turn_aware=turn_aware, time_limit_s=time_limit_s, seed=seed)
    windows = posted_windows(net, segs)
    if not windows:
        return replace(base, start_min=float(start_min))
    cands: list[tuple[list[Traversal], str, bool]] = [(list(base.traversals), base.method, base.exact)]
    timed0, late0 = with_waits(list(base.traversals), start_min, windows)
    if late0 <= 1e-6 and sum(t.wait_minutes for t in timed0) < 1.0:
        # the plain route meets every window without waiting: nothing the blocks could improve on
        return _finish(base, timed0, base.method, base.exact, start_min, windows, 0, 1)
    blocks: dict[tuple[int, int], list[int]] = {}
    free = []
    for s in segs:
        if s in windows:
            blocks.setdefault(windows[s], []).append(s)
        else:
            free.append(s)
    order = [blocks[w] for w in sorted(blocks)]
    if len(order) > 1 or free:
        paths = _paths(net, profile, depot)
        turns = TurnModel.from_network(net, profile)
        subs: dict[int, Route] = {}
        positions = range(len(order) + 1) if free else [len(order)]
        for pos in positions:
            groups = order[:pos] + ([free] if free else []) + order[pos:]
            walk = _chain(net, profile, depot, groups, paths, subs, turn_aware, time_limit_s, seed)
            if not _forbidden(net, walk, depot):  # the joins take no turn a restriction forbids
                cands.append((turns_along_walk(net, turns, walk), "window blocks joined by least-minute paths; heuristic",
                              False))
    best = None
    for i, (trav, method, exact) in enumerate(cands):
        timed, late = with_waits(trav, start_min, windows)
        total = sum(t.wait_minutes + t.turn_minutes + t.minutes for t in timed)
        key = (late > 1e-6, late, total, i)
        if best is None or key < best[0]:
            best = (key, timed, method, exact)
    _, timed, method, exact = best
    return _finish(base, timed, method, exact, start_min, windows, len(order), len(cands))


def _finish(base: Route, timed, method: str, exact: bool, start_min: float, windows, blocks: int,
            candidates: int) -> Route:
    stats = dict(base.stats)
    stats.update(window_blocks=blocks, window_misses=len(window_misses(timed, start_min, windows)),
                 candidates=candidates)
    return Route(depot=base.depot, traversals=tuple(timed), totals=RouteTotals.of(timed), method=method,
                 exact=exact, lower_bound_min=base.lower_bound_min, stats=stats, start_min=float(start_min))


_PATHS: dict = {}


def _paths(net: Network, profile: Profile, depot: int) -> "_Paths":
    """The path table of a depot, kept for the last few (network, profile, depot) asked for in this process."""
    key = (id(net), id(profile), int(depot))
    hit = _PATHS.get(key)
    if hit is None or hit.net is not net:
        if len(_PATHS) >= 8:
            _PATHS.pop(next(iter(_PATHS)))
        hit = _PATHS[key] = _Paths(net, profile, depot)
    return hit


class _Paths:
    """Least-minute deadhead paths between nodes over the legal directions a depot's closed walks use."""

    def __init__(self, net: Network, profile: Profile, depot: int) -> None:
        arcs = build_deadhead(net, profile, depot)
        self.arcs = arcs
        n = net.n_nodes
        order = np.lexsort((arcs.seg, arcs.minutes))  # cheapest arc first; lowest segment on ties
        key = arcs.tail[order] * n + arcs.head[order]
        _, first = np.unique(key, return_index=True)  # the cheapest arc of every (tail, head) pair
        pick = order[first]
        self.best = {(int(t), int(h)): int(a) for t, h, a in zip(arcs.tail[pick].tolist(), arcs.head[pick].tolist(),
                                                                 pick.tolist())}
        self.g = sparse.csr_matrix((arcs.minutes[pick] + 1e-9, (arcs.tail[pick], arcs.head[pick])), shape=(n, n))
        self.net = net

    def walk(self, a: int, b: int) -> list[Traversal]:
        if a == b:
            return []
        _, pred = dijkstra(self.g, directed=True, indices=a, return_predecessors=True)
        nodes = [b]
        while nodes[-1] != a:
            p = int(pred[nodes[-1]])
            if p < 0:
                raise ValueError(f"node {b} cannot be reached from node {a}")
            nodes.append(p)
        nodes.reverse()
        out = []
        for u, v in zip(nodes[:-1], nodes[1:]):
            i = self.best[(u, v)]
            out.append(Traversal(int(self.arcs.seg[i]), u, v, False, float(self.arcs.metres[i]),
                                 float(self.arcs.minutes[i])))
        return out


def _anchor(net: Network, segs: list[int], near: int) -> int:
    ends = np.unique(np.concatenate([net.seg_u[segs], net.seg_v[segs]]))
    d = np.hypot(net.node_x[ends] - net.node_x[near], net.node_y[ends] - net.node_y[near])
    return int(ends[np.lexsort((ends, d))[0]])


def _chain(net, profile, depot, groups, paths: _Paths, subs: dict, turn_aware, time_limit_s, seed) -> list[Traversal]:
    walk: list[Traversal] = []
    cur = depot
    for g in groups:
        key = id(g)
        anchor = _anchor(net, g, cur)
        if (key, anchor) not in subs:
            subs[(key, anchor)] = plan_route(net, profile, anchor, g, turn_aware=turn_aware,
                                             time_limit_s=time_limit_s, seed=seed, lower_bound=False)
        walk += paths.walk(cur, anchor)
        walk += list(subs[(key, anchor)].traversals)
        cur = anchor
    walk += paths.walk(cur, depot)
    return walk


def _forbidden(net: Network, walk: list[Traversal], depot: int) -> bool:
    """Does the walk make a turn the network forbids (other than in the depot's yard)?"""
    bans = BanTable.of(net)
    if bans is None or len(walk) < 2:
        return False
    seg = np.array([t.segment for t in walk], np.int64)
    fwd = np.array([t.from_node for t in walk], np.int64) == net.seg_u[seg]
    at = np.array([t.to_node for t in walk[:-1]], np.int64)
    hit = bans.banned(seg[:-1], fwd[:-1], seg[1:], fwd[1:]) & (at != depot)
    return bool(hit.any())
