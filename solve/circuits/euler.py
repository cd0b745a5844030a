"""Closed walks through every traversal of a balanced multigraph, with few costly turns.

Problem
-------
Given a list of directed traversals (tail, head, segment, direction) in which every
node has as many arrivals as departures and which is connected with the depot
(what an Eulerization returns), find a closed walk from the depot that uses each
traversal exactly once: an Euler circuit. Among the many Euler circuits, prefer
one with a small total turn penalty (U-turns and turns across traffic are slow
and dangerous with a heavy vehicle).

Method
------
*Plain*: Hierholzer's algorithm, iterative, linear in the number of traversals;
departures are taken in index order, so the result is deterministic.

*Turn-aware* (the default), in three steps:

1. At every node, pair each arriving traversal with a departing one so that the
   total turn penalty is least: an assignment problem per node, solved exactly by
   :func:`scipy.optimize.linear_sum_assignment` (two-by-two nodes are settled in
   one vectorised comparison). The pairing is a successor permutation of the
   traversals; its cycles are closed sub-circuits. Any Euler circuit induces such
   a pairing, so the least pairing cost is a lower bound on the (cyclic) turn
   penalty of every Euler circuit over the same traversals.
2. Splice the sub-circuits into one: exchanging the successors of two arrivals
   at the same node that lie on different cycles merges the two cycles. Swaps
   are taken cheapest-first from a heap; a popped swap is re-priced against the
   current successors and pushed back if it became dearer than the next one
   (lazy re-evaluation); a union-find over cycles discards swaps inside one
   cycle. The street network is connected, so this ends with a single cycle.
3. Open the cycle at the depot where the dropped turn (the last arrival's turn
   into the first departure, never driven) is dearest.

Forbidden turns (a :class:`crewcut.solve.circuits.bans.BanTable`): a banned pair
weighs :data:`crewcut.solve.circuits.bans.BAN_WEIGHT_S` more in steps 1 to 3, so the
pairing and the splices make one only where nothing else balances the node, and
of the plain and the turn-aware circuit the one with fewer banned turns is kept;
:mod:`crewcut.solve.circuits.detours` replaces what remains.

The splice step can add penalty, so the turn-aware circuit is not guaranteed to
beat the plain one; the plain circuit is computed as well and kept when it is
cheaper (reported in ``stats["kept"]``). Either way, the result never has more
turn penalty than plain Hierholzer on the same traversals.

References
----------
C. Hierholzer, "Ueber die Moeglichkeit, einen Linienzug ohne Wiederholung und
ohne Unterbrechung zu umfahren", Mathematische Annalen 6 (1873) 30-32.
Pairing arrivals with departures at each node and then joining the resulting
sub-circuits is the usual way of handling turn penalties in arc routing once the
augmentation is fixed (from memory; the splice heuristic here is our own).
"""
from __future__ import annotations

import heapq
from dataclasses import dataclass, field

import numpy as np
from scipy.optimize import linear_sum_assignment
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components

from crewcut.solve.result import TURNS
from crewcut.solve.circuits.bans import BAN_WEIGHT_S, BanTable, banned_steps
from crewcut.solve.circuits.turns import ACROSS_TRAFFIC, START, U_TURN, TurnModel


@dataclass(frozen=True)
class Circuit:
    """An Euler circuit from the depot.

    ``order``: traversal indices in driving order (the first leaves the depot, the
    last arrives there). ``turn``: turn code (see :data:`crewcut.solve.result.TURNS`) made
    at the start of each traversal in ``order``; the first is ``"start"``.
    ``turn_s``: its penalty in seconds. ``stats``: counts for the report.
    """

    order: np.ndarray
    turn: np.ndarray
    turn_s: np.ndarray
    method: str
    stats: dict = field(default_factory=dict)

    @property
    def u_turns(self) -> int:
        return int(np.count_nonzero(self.turn == U_TURN))

    @property
    def across_turns(self) -> int:
        return int(np.count_nonzero(self.turn == ACROSS_TRAFFIC))

    @property
    def total_turn_s(self) -> float:
        return float(self.turn_s.sum())


# --------------------------------------------------------------------- checks
def _check(tail, head, seg, forward, depot):
    tail = np.asarray(tail, np.int64)
    head = np.asarray(head, np.int64)
    seg = np.asarray(seg, np.int64)
    forward = np.asarray(forward, bool)
    n = tail.size
    if not (head.size == seg.size == forward.size == n):
        raise ValueError("tail, head, seg and forward must have the same length")
    n_nodes = int(max(tail.max(initial=-1), head.max(initial=-1), depot)) + 1
    out_deg = np.bincount(tail, minlength=n_nodes)
    in_deg = np.bincount(head, minlength=n_nodes)
    bad = np.flatnonzero(out_deg != in_deg)
    if bad.size:
        v = int(bad[0])
        raise ValueError(f"not balanced: node {v} has {in_deg[v]} arrivals and {out_deg[v]} departures")
    if n and out_deg[depot] == 0:
        raise ValueError(f"the depot (node {depot}) has no traversal")
    return tail, head, seg, forward, n_nodes, out_deg


# ----------------------------------------------------------------- Hierholzer
def hierholzer(tail, head, depot: int) -> np.ndarray:
    """Plain Hierholzer: traversal indices of an Euler circuit from ``depot``.

    Raises ``ValueError`` when the traversals are unbalanced or not all reachable.
    """
    tail = np.asarray(tail, np.int64)
    head = np.asarray(head, np.int64)
    n = tail.size
    if n == 0:
        return np.zeros(0, np.int64)
    _check(tail, head, np.zeros(n, np.int64), np.ones(n, bool), depot)
    by_tail = np.argsort(tail, kind="stable")
    n_nodes = int(max(tail.max(), head.max(), depot)) + 1
    start = np.searchsorted(tail[by_tail], np.arange(n_nodes + 1)).tolist()
    ptr = start[:-1]
    end = start[1:]
    by_tail_l = by_tail.tolist()
    head_l = head.tolist()
    nodes = [depot]
    edges = [-1]
    out: list[int] = []
    while nodes:
        v = nodes[-1]
        if ptr[v] < end[v]:
            e = by_tail_l[ptr[v]]
            ptr[v] += 1
            nodes.append(head_l[e])
            edges.append(e)
        else:
            nodes.pop()
            e = edges.pop()
            if e >= 0:
                out.append(e)
    if len(out) != n:
        raise ValueError(f"the traversals are not connected with the depot ({n - len(out)} unreachable)")
    out.reverse()
    return np.asarray(out, np.int64)


# ----------------------------------------------------------------- turn-aware
class _Pairs:
    """All (arrival, departure) pairs at every node, with their penalties.

    Arrivals at node v sit at positions ``off[v] .. off[v+1]-1`` of ``arr``
    (traversals sorted by head), departures likewise in ``dep`` (sorted by tail).
    The penalty of arrival at position p with the j-th departure of its node is
    ``cost[pstart[p] + j]``.
    """

    def __init__(self, tail, head, seg, forward, n_nodes, deg, model: TurnModel, bans: BanTable | None = None):
        self.arr = np.argsort(head, kind="stable")
        self.dep = np.argsort(tail, kind="stable")
        self.off = np.concatenate([[0], np.cumsum(deg)])
        node_of_pos = head[self.arr]
        k = deg[node_of_pos]  # pairs per arrival position
        self.pstart = np.concatenate([[0], np.cumsum(k)])
        total = int(self.pstart[-1])
        p = np.repeat(np.arange(head.size), k)
        j = np.arange(total) - self.pstart[p]
        a = self.arr[p]
        d = self.dep[self.off[node_of_pos[p]] + j]
        self.code = model.classify(seg[a], forward[a], seg[d], forward[d])
        self.cost = model.seconds(self.code)
        self.turn_cost = self.cost  # the true penalties; ``cost`` steers the choices
        if bans is not None:  # a banned pair weighs BAN_WEIGHT_S more (at the depot too: avoided where possible)
            self.banned = bans.banned(seg[a], forward[a], seg[d], forward[d])
            self.cost = self.cost + BAN_WEIGHT_S * self.banned
        self.apos = np.empty(head.size, np.int64)
        self.apos[self.arr] = np.arange(head.size)
        self.dpos = np.empty(head.size, np.int64)
        self.dpos[self.dep] = np.arange(head.size)


def _best_pairing(pr: _Pairs, deg: np.ndarray) -> np.ndarray:
    """Successor of every traversal under a least-penalty pairing at every node."""
    n = pr.arr.size
    succ = np.empty(n, np.int64)
    # one arrival, one departure: forced
    n1 = np.flatnonzero(deg == 1)
    succ[pr.arr[pr.off[n1]]] = pr.dep[pr.off[n1]]
    # two and two: compare the two pairings at once
    n2 = np.flatnonzero(deg == 2)
    if n2.size:
        o = pr.off[n2]
        c = pr.cost
        s0, s1 = pr.pstart[o], pr.pstart[o + 1]
        keep = c[s0] + c[s1 + 1] <= c[s0 + 1] + c[s1]  # ties keep the straight pairing
        a0, a1 = pr.arr[o], pr.arr[o + 1]
        d0, d1 = pr.dep[o], pr.dep[o + 1]
        succ[a0] = np.where(keep, d0, d1)
        succ[a1] = np.where(keep, d1, d0)
    # larger nodes: an exact assignment each
    for v in np.flatnonzero(deg > 2).tolist():
        k = int(deg[v])
        o = int(pr.off[v])
        s = int(pr.pstart[o])
        rows, cols = linear_sum_assignment(pr.cost[s:s + k * k].reshape(k, k))
        succ[pr.arr[o + rows]] = pr.dep[o + cols]
    return succ


def _cycles(succ: np.ndarray) -> tuple[int, np.ndarray]:
    n = succ.size
    g = coo_matrix((np.ones(n, np.int8), (np.arange(n), succ)), shape=(n, n))
    return connected_components(g, directed=True, connection="weak")


class _UnionFind:
    def __init__(self, n: int) -> None:
        self.parent = list(range(n))

    def find(self, x: int) -> int:
        parent = self.parent
        root = x
        while parent[root] != root:
            root = parent[root]
        while parent[x] != root:
            parent[x], x = root, parent[x]
        return root


def least_penalty_pairing(tail, head, seg, forward, n_nodes: int, model: TurnModel) -> np.ndarray:
    """The successor of every traversal under a least-penalty pairing at every node.

    Each node pairs its arrivals with its departures at the least total turn
    penalty, one node at a time, so the pairs may form several cycles. The first step of the turn-aware circuit; balanced traversals (as many
    arrivals as departures at every node) are assumed.
    """
    tail, head = np.asarray(tail, np.int64), np.asarray(head, np.int64)
    deg = np.bincount(tail, minlength=n_nodes)
    pr = _Pairs(tail, head, np.asarray(seg, np.int64), np.asarray(forward, bool), n_nodes, deg, model)
    return _best_pairing(pr, deg)


def _splice(pr: _Pairs, succ: np.ndarray, head: np.ndarray, deg: np.ndarray) -> tuple[np.ndarray, int, int]:
    """Join the cycles of ``succ`` into one by successor swaps, cheapest first.

    Returns the new successors, the number of cycles before, and the swaps made.
    """
    n_cyc, label = _cycles(succ)
    if n_cyc <= 1:
        return succ, n_cyc, 0
    # candidate swaps: two arrivals at one node (positions i < j) on different cycles
    multi = np.flatnonzero(deg >= 2)
    k = deg[multi]
    sq = k * k
    node = np.repeat(multi, sq)
    r = np.arange(int(sq.sum())) - np.repeat(np.cumsum(sq) - sq, sq)
    kk = deg[node]
    i, j = r // kk, r % kk
    keep = i < j
    pa = pr.off[node[keep]] + i[keep]
    pb = pr.off[node[keep]] + j[keep]
    a, b = pr.arr[pa], pr.arr[pb]
    diff = label[a] != label[b]
    a, b, pa, pb = a[diff], b[diff], pa[diff], pb[diff]
    base = pr.off[head[a]]  # both arrivals end at this node

    def cost_vec(p, d):
        return pr.cost[pr.pstart[p] + pr.dpos[d] - base]

    sa, sb = succ[a], succ[b]
    delta = cost_vec(pa, sb) + cost_vec(pb, sa) - cost_vec(pa, sa) - cost_vec(pb, sb)
    heap = list(zip(delta.tolist(), a.tolist(), b.tolist()))
    heapq.heapify(heap)

    cost = pr.cost.tolist()
    pstart = pr.pstart.tolist()
    apos = pr.apos.tolist()
    dpos = pr.dpos.tolist()
    off = pr.off.tolist()
    head_l = head.tolist()
    succ_l = succ.tolist()
    lab = label.tolist()
    uf = _UnionFind(n_cyc)

    def c(x: int, y: int) -> float:  # penalty of arriving by x and leaving by y
        return cost[pstart[apos[x]] + dpos[y] - off[head_l[x]]]

    left = n_cyc - 1
    swaps = 0
    while heap and left:
        dl, x, y = heapq.heappop(heap)
        rx, ry = uf.find(lab[x]), uf.find(lab[y])
        if rx == ry:
            continue
        sx, sy = succ_l[x], succ_l[y]
        now = c(x, sy) + c(y, sx) - c(x, sx) - c(y, sy)
        if now > dl and heap and now > heap[0][0]:
            heapq.heappush(heap, (now, x, y))
            continue
        succ_l[x], succ_l[y] = sy, sx
        uf.parent[rx] = ry
        left -= 1
        swaps += 1
    if left:
        raise ValueError("the traversals are not connected with the depot")
    return np.asarray(succ_l, np.int64), n_cyc, swaps


def _open_at_depot(succ: np.ndarray, pr: _Pairs, depot: int) -> np.ndarray:
    """Walk the single cycle of ``succ``, leaving the depot after its dearest turn."""
    o0, o1 = int(pr.off[depot]), int(pr.off[depot + 1])
    arrivals = pr.arr[o0:o1]
    turn_cost = pr.cost[pr.pstart[pr.apos[arrivals]] + pr.dpos[succ[arrivals]] - o0]
    last = int(arrivals[int(np.argmax(turn_cost))])  # argmax: lowest index on ties
    succ_l = succ.tolist()
    n = succ.size
    order = [0] * n
    x = succ_l[last]
    for t in range(n):
        order[t] = x
        x = succ_l[x]
    return np.asarray(order, np.int64)


def turns_along(order, seg, forward, model: TurnModel) -> tuple[np.ndarray, np.ndarray]:
    """Turn codes and penalty seconds of the traversals ``order`` in driving order (the first is "start")."""
    turn = np.full(order.size, START, np.int8)
    if order.size > 1:
        p, q = order[:-1], order[1:]
        turn[1:] = model.classify(seg[p], forward[p], seg[q], forward[q])
    return turn, model.seconds(turn)


def euler_circuit(tail, head, seg, forward, depot: int, model: TurnModel | None = None, *,
                  turn_aware: bool = True, bans: BanTable | None = None) -> Circuit:
    """An Euler circuit from ``depot`` over directed traversals.

    Parameters
    ----------
    tail, head, seg, forward:
        One entry per traversal: its start and end node, its segment, and True
        when it is driven from the segment's ``u`` end to its ``v`` end.
    depot:
        Start and end node; it must have a traversal unless there are none.
    model:
        Headings and turn penalties (:meth:`TurnModel.from_network`). ``None``
        knows no geometry: only U-turns back along one segment are told, and
        they cost 90 s.
    turn_aware:
        Pair arrivals with departures to cut the turn penalty (the default), or
        plain Hierholzer.
    bans:
        Forbidden turns (:class:`crewcut.solve.circuits.bans.BanTable`). The
        turn-aware pairing weighs a banned pair :data:`~crewcut.solve.circuits.bans.BAN_WEIGHT_S`
        seconds more, so it makes one only where no pairing of the node avoids it;
        of the two circuits the one with fewer banned turns is kept. A banned turn
        that remains is for :func:`crewcut.solve.circuits.detours.legal_order` to
        replace by a detour; ``stats["banned_left"]`` counts them.

    Raises ``ValueError`` when the traversals are not balanced or not connected
    with the depot (an Eulerization bug, not a user error).
    """
    tail, head, seg, forward, n_nodes, deg = _check(tail, head, seg, forward, depot)
    if model is None:
        m = int(seg.max(initial=-1)) + 1
        pen = np.zeros(len(TURNS))
        pen[U_TURN] = 90.0
        model = TurnModel(np.full(m, np.nan), np.full(m, np.nan), True, pen)
    n = tail.size
    if n == 0:
        empty = np.zeros(0, np.int64)
        return Circuit(empty, empty.astype(np.int8), np.zeros(0), "empty", {"traversals": 0})
    plain = hierholzer(tail, head, depot)
    p_turn, p_s = turns_along(plain, seg, forward, model)
    stats = {
        "traversals": int(n),
        "plain_u_turns": int(np.count_nonzero(p_turn == U_TURN)),
        "plain_across_turns": int(np.count_nonzero(p_turn == ACROSS_TRAFFIC)),
        "plain_turn_s": float(p_s.sum()),
    }

    def n_banned(o) -> int:
        return 0 if bans is None else int(banned_steps(o, seg, forward, head, bans, depot).size)

    if bans is not None:
        stats["banned_left"] = n_banned(plain)
    if not turn_aware:
        stats.update(u_turns=stats["plain_u_turns"], across_turns=stats["plain_across_turns"],
                     turn_s=stats["plain_turn_s"], kept="plain")
        return Circuit(plain, p_turn, p_s, "hierholzer", stats)
    pr = _Pairs(tail, head, seg, forward, n_nodes, deg, model, bans)
    succ = _best_pairing(pr, deg)
    pairing_s = float(pr.turn_cost[pr.pstart[pr.apos] + pr.dpos[succ] - pr.off[head]].sum())
    succ, n_cyc, swaps = _splice(pr, succ, head, deg)
    order = _open_at_depot(succ, pr, depot)
    turn, s = turns_along(order, seg, forward, model)
    stats.update(pairing_cycle_s=pairing_s, sub_circuits=int(n_cyc), splices=int(swaps),
                 spliced_turn_s=float(s.sum()))
    if bans is None:
        plain_better = float(s.sum()) > stats["plain_turn_s"]
    else:  # fewer banned turns first (each costs a detour), then the turn penalty
        mine = n_banned(order)
        plain_better = (mine, float(s.sum())) > (stats["banned_left"], stats["plain_turn_s"])
        stats["banned_left"] = min(mine, stats["banned_left"])
    if plain_better:
        order, turn, s, kept = plain, p_turn, p_s, "plain"
    else:
        kept = "turn-aware"
    stats.update(u_turns=int(np.count_nonzero(turn == U_TURN)),
                 across_turns=int(np.count_nonzero(turn == ACROSS_TRAFFIC)),
                 turn_s=float(s.sum()), kept=kept)
    return Circuit(order, turn, s, "turn-aware pairing + splice", stats)
