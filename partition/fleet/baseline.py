"""The route-first, cluster-second baseline for k crews sharing one depot.

Problem
-------
The min-max k-postman problem: k closed routes from one depot that together serve
every required pass, with the longest route as short as possible.

Method
------
Frederickson, Hecht and Kim (1978), "Approximation algorithms for some routing
problems", SIAM Journal on Computing 7(2), 178-193 (k-split of one tour): route
one crew over everything (one giant tour, here from :func:`crewcut.solve.route.plan_route`),
with length ``L``; let ``c_max`` be the largest half round trip from the depot to
a node of the tour; the j-th cut (j = 1..k-1) falls after the last traversal whose
cumulative cost from the depot is at most ``(j / k) (L - 2 c_max) + c_max``. Each
piece is closed by a shortest path from the depot to its first node and from its
last node back. (Recalled from memory: the paper states it for symmetric costs
with ``c_max`` the largest depot distance; with one-way streets we use the half
round trip.) Deadhead traversals at either end of a piece are dropped before
closing it, since the shortest paths replace them.

Every piece is charged exactly as the planner's routes are: service and deadhead
minutes of every traversal, and the turn penalty (:mod:`crewcut.solve.circuits.turns`) of every
turn along the closed walk, the closing paths and the joins included (the first
traversal out of the depot is a start and costs nothing, as in every route).

This is used as a reference by the benchmark and the tests, not by the planner.
"""
from __future__ import annotations

import numpy as np
from scipy.sparse import csgraph

from crewcut.solve.costs import deadhead_minutes
from crewcut.solve.network.model import Network
from crewcut.solve.profile import Profile
from crewcut.solve.result import TURNS, Route, RouteTotals, Traversal
from crewcut.solve.circuits.turns import START, TurnModel

from crewcut.fleet.streets import driving_graph


def route_first_split(net: Network, profile: Profile, depot: int, k: int, *, giant: Route | None = None,
                      seed: int = 0, time_limit_s: float = 10.0) -> list[Route]:
    """k closed routes from ``depot`` by splitting one giant tour (Frederickson, Hecht and Kim 1978)."""
    if k < 1:
        raise ValueError("k must be at least 1")
    if giant is None:
        from crewcut.solve.route import plan_route

        giant = plan_route(net, profile, depot, None, time_limit_s=time_limit_s, seed=seed)
    tr = list(giant.traversals)
    cost = np.array([t.minutes + t.turn_minutes for t in tr])
    cum = np.cumsum(cost)
    total = float(cum[-1]) if cum.size else 0.0
    g = driving_graph(net, profile)
    out = csgraph.dijkstra(g, directed=True, indices=[depot], return_predecessors=True)
    back = csgraph.dijkstra(g.T.tocsr(), directed=True, indices=[depot], return_predecessors=True)
    d_out, p_out = out[0][0], out[1][0]
    d_back, p_back = back[0][0], back[1][0]
    nodes = sorted({t.to_node for t in tr} | {t.from_node for t in tr})
    c_max = max((0.5 * (d_out[v] + d_back[v]) for v in nodes), default=0.0)
    cuts = [-1]
    for j in range(1, k):
        lim = j / k * (total - 2 * c_max) + c_max
        p = int(np.searchsorted(cum, lim + 1e-9, side="right")) - 1
        cuts.append(max(p, cuts[-1]))
    cuts.append(len(tr) - 1)
    arcs = _cheapest_arcs(net, profile)
    model = TurnModel.from_network(net, profile)
    routes = []
    for j in range(k):
        piece = tr[cuts[j] + 1: cuts[j + 1] + 1]
        while piece and not piece[0].service:
            piece = piece[1:]
        while piece and not piece[-1].service:
            piece = piece[:-1]
        if not piece:
            routes.append(Route(depot, (), RouteTotals.of(()), "route-first split (empty)", False, 0.0))
            continue
        head = _path(arcs, p_out, depot, piece[0].from_node, reverse=False)
        tail = _path(arcs, p_back, depot, piece[-1].to_node, reverse=True)
        walk = _with_turns(head + piece + tail, net, model)
        routes.append(Route(depot, walk, RouteTotals.of(walk), "route-first split (Frederickson, Hecht and Kim 1978)",
                            False, 0.0))
    return routes


def _with_turns(walk: list[Traversal], net: Network, model: TurnModel) -> tuple[Traversal, ...]:
    """The walk with every turn classified and charged again (the first is the start)."""
    seg = np.array([t.segment for t in walk], np.int64)
    fwd = np.array([(t.from_node, t.to_node) == (int(net.seg_u[t.segment]), int(net.seg_v[t.segment]))
                    for t in walk], bool)
    code = np.full(seg.size, START, np.int64)
    if seg.size > 1:
        code[1:] = model.classify(seg[:-1], fwd[:-1], seg[1:], fwd[1:])
    minutes = model.seconds(code) / 60.0
    return tuple(Traversal(t.segment, t.from_node, t.to_node, t.service, t.metres, t.minutes, TURNS[int(c)], float(m))
                 for t, c, m in zip(walk, code.tolist(), minutes.tolist()))


def _cheapest_arcs(net: Network, profile: Profile) -> dict[tuple[int, int], tuple[int, float, float]]:
    tail, head, seg, _ = net.arcs(ignore_oneway=profile.ignore_oneway)
    dm = deadhead_minutes(net, profile)
    best: dict[tuple[int, int], tuple[int, float, float]] = {}
    for t, h, s in zip(tail.tolist(), head.tolist(), seg.tolist()):
        cand = (s, float(dm[s]), float(net.seg_length[s]))
        if (t, h) not in best or (cand[1], s) < (best[(t, h)][1], best[(t, h)][0]):
            best[(t, h)] = cand
    return best


def _path(arcs, pred: np.ndarray, depot: int, node: int, *, reverse: bool) -> list[Traversal]:
    """Deadhead traversals depot -> node (reverse=False) or node -> depot (reverse=True, pred on the reversed graph)."""
    if node == depot:
        return []
    chain = [node]
    while chain[-1] != depot:
        p = int(pred[chain[-1]])
        if p < 0:
            raise ValueError(f"node {node} and depot {depot} are not connected both ways")
        chain.append(p)
    if not reverse:
        chain = chain[::-1]  # depot ... node
    out = []
    for a, b in zip(chain[:-1], chain[1:]):
        s, mins, metres = arcs[(a, b)]
        out.append(Traversal(s, a, b, False, metres, mins, "unknown", 0.0))
    return out
