"""Mixed Chinese postman augmentation: directed and undirected required passes.

Problem
-------
Some required passes must be driven one way (one-way streets, curbs swept with
traffic), others may be driven either way; deadheading may use only legal
directions. Choose a direction for every undirected pass and add deadhead copies
of least total cost so that in- and out-degree are equal at every node. The
problem is NP-hard (Papadimitriou 1976).

Method (heuristic, then exact when small)
-----------------------------------------
Two strategies in the manner of Frederickson's MIXED algorithms (1979), the
better one kept:

1. *Flow first.* A minimum-cost flow meets the imbalance of the directed passes;
   each undirected pass may carry one unit of flow in either direction at zero
   cost (serving it that way), deadhead arcs carry any flow at their cost.
   Undirected passes that carry flow take that direction. The undecided rest is
   oriented along closed trails after pairing its odd-degree nodes through a
   virtual node, which leaves an imbalance of at most one at those nodes.
2. *Parity first.* A minimum T-join over each segment's cheapest legal direction
   first evens all degrees; its segments join the flow of strategy 1 as extra
   free items, which steers the orientation; they are then dropped again.

Improvement step: whatever the strategy, the final orientation is completed by
the exact directed augmentation (:func:`crewcut.solve.postman.flow.min_cost_flow`), which is
optimal for that orientation.

Lower bound, the larger of two relaxations (both ignore connectivity):

* T-join relaxation: every feasible augmentation, read without directions, has
  odd-degree nodes exactly where the passes do (balanced nodes have even
  degree), so it contains a T-join, and each of its traversals costs at least
  its segment's cheapest legal direction.
* Flow relaxation (the first flow of strategy 1): any feasible answer is such a
  flow: its deadhead copies plus one unit on each undirected pass in the
  direction chosen meet the directed imbalance, at the answer's cost.

Exact: for small instances a CP-SAT integer program (a boolean direction per
undirected pass, an integer count per deadhead arc, one balance equation per
node) runs under a deterministic time limit, single-threaded for repeatable
answers. Its proven bound raises the lower bound; its optimum, when proven and
the passes with the depot are connected, makes the answer exact. Counts are
capped at the number of passes, which some optimal answer respects (for a
fixed orientation the cheapest copies are a flow of at most that many paths).

References
----------
G. N. Frederickson, "Approximation algorithms for some postman problems",
Journal of the ACM 26 (1979) 538-554.
C. H. Papadimitriou, "On the complexity of edge traversing", Journal of the
ACM 23 (1976) 544-554.
J. Edmonds and E. L. Johnson, "Matching, Euler tours and the Chinese postman",
Mathematical Programming 5 (1973) 88-124.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from crewcut.solve.postman.flow import RESOLUTION_MIN, SCALE, int_costs, min_cost_flow
from crewcut.solve.postman.tjoin import min_tjoin

EXACT_MAX_SIZE = 3000  # passes + deadhead arcs up to which CP-SAT is tried


@dataclass(frozen=True)
class MixedResult:
    orientation: np.ndarray  # bool per item, True = tail -> head
    counts: np.ndarray  # int64 copies per deadhead arc
    cost: float  # minutes of the copies (items excluded)
    lower_bound: float  # proven, on the copies' least cost for these items (no connectivity)
    method: str
    proven: bool  # cost proven optimal (up to RESOLUTION_MIN per copy)


def euler_orient(a: np.ndarray, b: np.ndarray, n_nodes: int) -> np.ndarray:
    """Orient undirected edges so that every node has |in - out| <= 1.

    Nodes of even degree end balanced. Odd-degree nodes are joined to a virtual
    node, then edges are oriented along closed trails (every degree is even);
    dropping the virtual edges leaves the odd nodes off by one. Deterministic.
    """
    a = np.asarray(a, np.int64)
    b = np.asarray(b, np.int64)
    m = a.size
    if m == 0:
        return np.zeros(0, bool)
    deg = np.bincount(a, minlength=n_nodes) + np.bincount(b, minlength=n_nodes)
    odd = np.flatnonzero(deg % 2)
    ea = np.concatenate([a, odd])
    eb = np.concatenate([b, np.full(odd.size, n_nodes, np.int64)])
    ends = np.concatenate([ea, eb])
    eid = np.concatenate([np.arange(ea.size), np.arange(ea.size)])
    order = np.lexsort((eid, ends))
    ptr = np.zeros(n_nodes + 2, np.int64)
    np.add.at(ptr, ends + 1, 1)
    ptr = np.cumsum(ptr)
    adj = eid[order].tolist()
    pos = ptr[:-1].tolist()
    end = ptr[1:].tolist()
    ea_l, eb_l = ea.tolist(), eb.tolist()
    used = bytearray(ea.size)
    fwd = bytearray(ea.size)
    for start in range(n_nodes + 1):
        x = start
        while True:
            p = pos[x]
            e_end = end[x]
            while p < e_end and used[adj[p]]:
                p += 1
            pos[x] = p
            if p == e_end:
                if x == start:
                    break
                raise AssertionError("euler_orient: trail stuck away from its start")  # even degrees forbid it
            e = adj[p]
            used[e] = 1
            if ea_l[e] == x:
                fwd[e] = 1
                x = eb_l[e]
            else:
                x = ea_l[e]
    return np.frombuffer(bytes(fwd), np.uint8)[:m].astype(bool)


def _supply(tail, head, n_nodes):
    return np.bincount(head, minlength=n_nodes).astype(np.int64) - np.bincount(tail, minlength=n_nodes)


def flow_relaxation(it, ih, idir, at, ah, ac, n_nodes):
    """Strategy 1's flow: returns (orientation or None for undecided, Flow)."""
    d = np.flatnonzero(idir)
    u = np.flatnonzero(~idir)
    sup = _supply(it[d], ih[d], n_nodes)
    tails = np.concatenate([at, it[u], ih[u]])
    heads = np.concatenate([ah, ih[u], it[u]])
    cost = np.concatenate([ac, np.zeros(2 * u.size)])
    cap = np.concatenate([np.full(at.size, 2**40, np.int64), np.ones(2 * u.size, np.int64)])
    f = min_cost_flow(tails, heads, cost, sup, capacity=cap)
    fw = f.flow[at.size:at.size + u.size]
    bw = f.flow[at.size + u.size:]
    state = np.where((fw > 0) & (bw == 0), 1, np.where((bw > 0) & (fw == 0), -1, 0))
    return state, f


def orient_from_flow(it, ih, idir, at, ah, ac, n_nodes):
    """Orientation of every item from the flow relaxation plus trail orientation of the rest."""
    state, f = flow_relaxation(it, ih, idir, at, ah, ac, n_nodes)
    u = np.flatnonzero(~idir)
    o = np.ones(it.size, bool)
    o[u] = state > 0
    und = u[state == 0]
    o[und] = euler_orient(it[und], ih[und], n_nodes)
    return o, f


def complete(it, ih, o, at, ah, ac, n_nodes):
    """Exact copies for a fixed orientation (the improvement step)."""
    t = np.where(o, it, ih)
    h = np.where(o, ih, it)
    return min_cost_flow(at, ah, ac, _supply(t, h, n_nodes))


def relaxation_bounds(it, ih, idir, at, ah, ac, n_nodes) -> tuple[float, float]:
    """(T-join relaxation, flow relaxation) lower bounds on the copies' cost."""
    deg = np.bincount(it, minlength=n_nodes) + np.bincount(ih, minlength=n_nodes)
    tj = min_tjoin(at, ah, ac, deg % 2 == 1, n_nodes)
    _, f = flow_relaxation(it, ih, idir, at, ah, ac, n_nodes)
    return tj.lower_bound, f.lower_bound


def cpsat_mixed(it, ih, idir, at, ah, ac, n_nodes, time_limit_s, seed, hint=None):
    """Exact integer program; returns (orientation, counts, bound, proven) or None if no solution."""
    from ortools.sat.python import cp_model

    model = cp_model.CpModel()
    u = np.flatnonzero(~idir)
    d = np.flatnonzero(idir)
    cap = max(1, it.size)
    o = [model.new_bool_var(f"o{i}") for i in u.tolist()]
    live = np.flatnonzero(at != ah)  # a loop never helps balance and costs >= 0
    x = [model.new_int_var(0, cap, f"x{a}") for a in live.tolist()]
    const = _supply(it[d], ih[d], n_nodes)
    terms: list[list] = [[] for _ in range(n_nodes)]
    for var, a in zip(x, live.tolist()):
        terms[int(ah[a])].append(var)
        terms[int(at[a])].append(-var)
    for var, i in zip(o, u.tolist()):
        # oriented tail->head: +1 at head, -1 at tail; else the reverse: 2o - 1
        terms[int(ih[i])].append(2 * var)
        terms[int(it[i])].append(-2 * var)
        const[int(ih[i])] -= 1
        const[int(it[i])] += 1
    for v in range(n_nodes):
        if terms[v]:
            model.add(sum(terms[v]) + int(const[v]) == 0)
        elif const[v] != 0:
            return None
    icost = int_costs(ac[live])
    model.minimize(sum(int(c) * var for c, var in zip(icost.tolist(), x)))
    if hint is not None:
        ho, hc = hint
        for var, i in zip(o, u.tolist()):
            model.add_hint(var, bool(ho[i]))
        for var, a in zip(x, live.tolist()):
            model.add_hint(var, int(min(hc[a], cap)))
    solver = cp_model.CpSolver()
    solver.parameters.num_workers = 1
    solver.parameters.max_deterministic_time = float(time_limit_s)
    solver.parameters.random_seed = int(seed)
    status = solver.solve(model)
    bound = max(0.0, solver.best_objective_bound / SCALE)
    if status not in (cp_model.OPTIMAL, cp_model.FEASIBLE):
        return None  # no solution within the limit (infeasible cannot happen: the flow found one)
    orient = np.ones(it.size, bool)
    orient[u] = [bool(solver.value(var)) for var in o]
    counts = np.zeros(at.size, np.int64)
    counts[live] = [solver.value(var) for var in x]
    return orient, counts, bound, status == cp_model.OPTIMAL


def solve_mixed(it, ih, idir, at, ah, ac, n_nodes, *, time_limit_s=10.0, seed=0,
                ip_ok=True, bound_items=None) -> MixedResult:
    """Orientation and copies for the items ``(it, ih, idir)`` over deadhead arcs ``(at, ah, ac)``.

    ``bound_items``: mask of the items that are real passes (connectors are not);
    bounds and the integer program use those only. ``ip_ok`` False skips CP-SAT.
    """
    it, ih = np.asarray(it, np.int64), np.asarray(ih, np.int64)
    idir = np.asarray(idir, bool)
    at, ah, ac = np.asarray(at, np.int64), np.asarray(ah, np.int64), np.asarray(ac, np.float64)
    real = np.ones(it.size, bool) if bound_items is None else np.asarray(bound_items, bool)
    connected_exact = bool(real.all())

    # Strategy 1: flow first.
    o1, f1 = orient_from_flow(it, ih, idir, at, ah, ac, n_nodes)
    c1 = complete(it, ih, o1, at, ah, ac, n_nodes)
    # Strategy 2: parity first (T-join over each segment's cheapest legal direction).
    deg = np.bincount(it, minlength=n_nodes) + np.bincount(ih, minlength=n_nodes)
    tj = min_tjoin(at, ah, ac, deg % 2 == 1, n_nodes)
    j = tj.edges
    two_way = _two_way_pairs(at, ah)[j]
    it2 = np.concatenate([it, at[j]])
    ih2 = np.concatenate([ih, ah[j]])
    idir2 = np.concatenate([idir, ~two_way])
    o2, _ = orient_from_flow(it2, ih2, idir2, at, ah, ac, n_nodes)
    o2 = o2[:it.size]
    c2 = complete(it, ih, o2, at, ah, ac, n_nodes)
    if c2.cost < c1.cost - 1e-12:
        best_o, best_f, method = o2, c2, "mixed heuristic (parity first, then exact flow)"
    else:
        best_o, best_f, method = o1, c1, "mixed heuristic (flow first, then exact flow)"

    if connected_exact:
        lb = max(tj.lower_bound, f1.lower_bound)
    else:
        r = np.flatnonzero(real)
        lb = max(relaxation_bounds(it[r], ih[r], idir[r], at, ah, ac, n_nodes))
    cost, counts, orient = best_f.cost, best_f.flow, best_o
    slack = (int(counts.sum()) + 1) * RESOLUTION_MIN
    proven = connected_exact and cost <= lb + slack
    small = it.size + at.size <= EXACT_MAX_SIZE
    if ip_ok and small and time_limit_s > 0 and not proven:
        r = np.flatnonzero(real)
        hint = (orient[r], counts) if connected_exact else None
        ip = cpsat_mixed(it[r], ih[r], idir[r], at, ah, ac, n_nodes, time_limit_s, seed, hint)
        if ip is not None:
            ip_o, ip_counts, bound, optimal = ip
            lb = max(lb, bound)
            if connected_exact:
                ip_cost = float((ip_counts * ac).sum())
                if ip_cost < cost - 1e-12:
                    orient, counts, cost = ip_o, ip_counts, ip_cost
                    method = "CP-SAT integer program"
                if optimal:
                    method = "CP-SAT integer program (proven optimal)"
                    proven = True
                    lb = max(lb, min(cost, bound))
    lb = min(lb, cost)
    proven = proven or (connected_exact and cost <= lb + (int(counts.sum()) + 1) * RESOLUTION_MIN)
    return MixedResult(orient, counts, cost, lb, method, proven)


def _two_way_pairs(at, ah) -> np.ndarray:
    """True for arcs whose reverse (head -> tail) is also an arc."""
    n = int(max(at.max(), ah.max())) + 1 if at.size else 1
    key = at * n + ah
    rev = ah * n + at
    return np.isin(rev, key)
