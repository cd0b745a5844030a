"""Detours that replace the forbidden turns left in a circuit.

Problem
-------
An Euler circuit over an Eulerized set of traversals may still have to make a
forbidden turn: at a node with one arrival and one departure the pairing is
forced, and splicing sub-circuits can force others. A crew may not make it, so
the route must get from the arriving traversal ``x`` to the departing one ``d``
another way: a closed walk of deadhead traversals from the node back to it that
leaves after ``x`` and ends before ``d`` with legal turns only, as cheap as
possible.

Method
------
Dijkstra's algorithm on the line graph (the states are the legal deadhead
directions, :class:`crewcut.solve.postman.tasks.DeadheadArcs`; a move from one
to the next is a turn at their shared node, allowed unless banned), from the
arrival ``x`` to the departure ``d``; a move costs the next traversal's deadhead
minutes plus the turn's penalty. At the depot every turn is allowed (the crew
turns in the yard, :mod:`crewcut.solve.circuits.bans`) but a banned one weighs
:data:`~crewcut.solve.circuits.bans.BAN_WEIGHT_S` more, so the yard is used only
when no other way exists. The deadhead arcs a route may use all lie on closed
walks through the depot (:func:`crewcut.solve.postman.tasks.build_deadhead`), so
a detour always exists: in the worst case back to the yard and out again.
Inserting a closed walk at a node keeps the circuit closed and every pass served
once; the detour's minutes are the route's own deadhead and are counted in its
totals. The least detour for each banned turn is exact for that turn, but the
circuit is not re-optimised around it: the route may be dearer than the best
route that respects the bans (its lower bound, computed without bans, stays valid).

Reference
---------
E. W. Dijkstra, "A note on two problems in connexion with graphs", Numerische
Mathematik 1 (1959) 269-271. Shortest paths with turn restrictions on the line
(arc) graph are common practice in road routing (from memory).
"""
from __future__ import annotations

import heapq

import numpy as np

from crewcut.solve.circuits.bans import BAN_WEIGHT_S, BanTable, banned_steps
from crewcut.solve.circuits.turns import TurnModel
from crewcut.solve.postman.tasks import DeadheadArcs

_GOAL = -2


class _LineGraph:
    """The deadhead arcs by tail node, with the turn penalty and ban check of each move."""

    def __init__(self, arcs: DeadheadArcs, model: TurnModel, bans: BanTable, depot: int) -> None:
        self.arcs = arcs
        self.model = model
        self.bans = bans
        self.depot = depot
        order = np.argsort(arcs.tail, kind="stable")
        self.by_tail = order
        n = int(max(arcs.tail.max(initial=-1), arcs.head.max(initial=-1), depot)) + 2
        self.ptr = np.searchsorted(arcs.tail[order], np.arange(n + 1))

    def moves(self, a_seg: int, a_fwd: bool, node: int, d_seg=None, d_fwd=None):
        """(next arcs, minutes of each move) after arriving at ``node`` along (a_seg, a_fwd)."""
        if d_seg is None:
            if node + 1 >= self.ptr.size:
                return np.zeros(0, np.int64), np.zeros(0)
            ys = self.by_tail[self.ptr[node]:self.ptr[node + 1]]
            seg, fwd = self.arcs.seg[ys], self.arcs.forward[ys]
            cost = self.arcs.minutes[ys].copy()
        else:
            ys = np.array([_GOAL], np.int64)
            seg, fwd = np.array([d_seg], np.int64), np.array([d_fwd], bool)
            cost = np.zeros(1)
        k = ys.size
        a_s, a_f = np.full(k, a_seg, np.int64), np.full(k, a_fwd, bool)
        cost = cost + self.model.pair_seconds(a_s, a_f, seg, fwd) / 60.0
        banned = self.bans.banned(a_s, a_f, seg, fwd)
        if node == self.depot:
            cost = cost + banned * (BAN_WEIGHT_S / 60.0)
        else:
            keep = ~banned
            ys, cost = ys[keep], cost[keep]
        return ys, cost


def detour(graph: _LineGraph, x_seg: int, x_fwd: bool, node: int, d_seg: int,
           d_fwd: bool) -> tuple[list[int], float]:
    """The least legal closed walk at ``node`` from arrival x into departure d: deadhead arc indices, minutes."""
    arcs = graph.arcs
    heap: list[tuple[float, int, int]] = []
    dist: dict[int, float] = {}
    prev: dict[int, int] = {}
    count = 0
    ys, cost = graph.moves(x_seg, x_fwd, node)
    for y, c in zip(ys.tolist(), cost.tolist()):
        if c < dist.get(y, np.inf):
            dist[y], prev[y] = c, -1
            heapq.heappush(heap, (c, count, y))
            count += 1
    done: set[int] = set()
    while heap:
        c, _, z = heapq.heappop(heap)
        if z == _GOAL:
            path = []
            z = prev[_GOAL]
            while z != -1:
                path.append(z)
                z = prev[z]
            return path[::-1], c
        if z in done:
            continue
        done.add(z)
        z_seg, z_fwd, z_head = int(arcs.seg[z]), bool(arcs.forward[z]), int(arcs.head[z])
        if z_head == node:
            gy, gc = graph.moves(z_seg, z_fwd, node, d_seg, d_fwd)
            if gy.size and c + float(gc[0]) < dist.get(_GOAL, np.inf):
                dist[_GOAL], prev[_GOAL] = c + float(gc[0]), z
                heapq.heappush(heap, (dist[_GOAL], count, _GOAL))
                count += 1
        ys, cost = graph.moves(z_seg, z_fwd, z_head)
        for y, w in zip(ys.tolist(), cost.tolist()):
            if y not in done and c + w < dist.get(y, np.inf):
                dist[y], prev[y] = c + w, z
                heapq.heappush(heap, (c + w, count, y))
                count += 1
    raise ValueError(f"no legal detour at node {node} from segment {x_seg} into segment {d_seg}: "
                     "the deadhead arcs do not hold a closed walk through the depot (an engine bug)")


def legal_order(order, tail, head, seg, forward, arcs: DeadheadArcs, model: TurnModel, bans: BanTable,
                depot: int) -> tuple[np.ndarray, np.ndarray, int]:
    """``order`` with a detour in place of every banned turn.

    A banned turn at the depot is replaced too when a detour exists that does not
    itself turn in the yard; otherwise the crew turns in the yard there. Returns
    ``(new order, added arcs, detours made)``: entries of the new order below
    ``len(tail)`` are the given traversals, entry ``len(tail) + j`` is the deadhead
    arc ``added[j]`` (an index into ``arcs``).
    """
    order = np.asarray(order, np.int64)
    bad = banned_steps(order, seg, forward, head, bans, -1)
    if bad.size == 0:
        return order, np.zeros(0, np.int64), 0
    graph = _LineGraph(arcs, model, bans, depot)
    n = int(np.asarray(tail).size)
    out: list[int] = []
    added: list[int] = []
    start = made = 0
    for t in bad.tolist():
        out.extend(order[start:t].tolist())
        x, d = int(order[t - 1]), int(order[t])
        path, cost = detour(graph, int(seg[x]), bool(forward[x]), int(head[x]), int(seg[d]), bool(forward[d]))
        start = t
        if int(head[x]) == depot and cost >= BAN_WEIGHT_S / 60.0:
            continue  # no way round without the yard: the crew turns in the yard here
        out.extend(range(n + len(added), n + len(added) + len(path)))
        made += 1
        added.extend(path)
    out.extend(order[start:].tolist())
    return np.asarray(out, np.int64), np.asarray(added, np.int64), made
