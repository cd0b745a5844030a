"""Lower bounds on route length: one crew, and the longest of k crews' routes.

One crew
--------
Every route serves every pass once (service minutes are fixed) and adds deadhead
traversals that make the served passes a balanced multigraph. So service minutes
plus any lower bound on that augmentation is a lower bound on the route's
driving minutes: :func:`single_crew_lower_bound` uses
:func:`crewcut.solve.postman.eulerize.augmentation_lower_bound` (exact in the undirected and
directed cases, the larger of the T-join and flow relaxations in the mixed case;
all of them ignore connectivity, which can only make a route longer), and adds
the turn bound below.

Turns
-----
:func:`turn_lower_bound`. Every service traversal arriving at a node ``v`` is
followed by a departure from ``v`` along some legal driving direction, unless
it is the last traversal of its route; that departure's turn is charged to this
arrival alone (distinct arrivals have distinct successors), so it costs at
least ``T`` = the cheapest turn penalty from this arrival into any legal
departure at ``v`` (a dead end forces a U-turn; the stem of a T forces a turn).
A pass that may be served either way counts its cheaper orientation, turns
after deadhead arrivals count zero (penalties are >= 0), and each of the ``k``
routes has one last arrival, so ``sum(T) - (the k largest T)`` is a lower bound
on the turn minutes of any ``k`` routes that together serve every pass once.

Turns at a node, with the deadhead they take
--------------------------------------------
A stronger rule for the fleet bound (:func:`fleet_lower_bound`,
:func:`route_lower_bound`). At a node ``v`` every served arrival of a one-way
pass has its own successor: a served departure at ``v`` (each serves once, so
it follows at most one arrival), a deadhead departure (any number), or nothing
for a route's last arrival, which is at its depot (at most ``k`` per depot).
The least total turn over such assignments is a small assignment problem per
node (:func:`scipy.optimize.linear_sum_assignment`; where every arrival's own
cheapest choice is free the sum of those is the optimum). A deadhead successor
is a deadhead traversal, distinct for distinct arrivals, so the deadhead minutes
``D`` of any plan are at least both the augmentation bound ``D*`` and the
deadhead minutes of those successors; for any weight ``w`` in [0, 1], ``D``
is at least ``(1 - w) D* + w`` (their minutes). Charging each deadhead successor
its turn plus ``w`` times its minutes, the plan costs at least
``service + (1 - w) D* + sum over nodes of the least assignment + the least turn
after each pass that may be served either way`` (zero where it may end a
route). Each ``w`` tried gives a valid bound; the largest is kept, and never
less than the rule above. At ``w = 0`` a deadhead departure costs only its turn,
so the assignment finds the same cheapest turns as the rule above, except that
the last arrivals are placed at the depots.

Turn bans
---------
Every bound here is computed without the network's forbidden turns
(``Network.turn_bans``): a route that respects them is one of the routes the
bounds already cover (forbidding turns only removes routes), so each bound stays
a valid lower bound, a relaxation. Only the deadhead arcs are those a closed walk
through the depot can use, which with bans is judged over legal turns
(:func:`crewcut.solve.postman.tasks.build_deadhead`); no route can use another.
The routes themselves respect the bans (their detours are deadhead the route
counts, :mod:`crewcut.solve.circuits.detours`), so a reported gap, route total
over bound, is measured with the route that turns legally.

k crews (min-max)
-----------------
:func:`fleet_lower_bound` returns ``max(total / k, longest round trip)``:

* ``total``: the k routes together serve every pass once and each is a closed
  walk, so their union is a balanced multigraph containing every pass. With
  several depots this union need not be one connected walk, which is why the
  bound uses service minutes plus the augmentation bound *without*
  connectivity (the single-crew route cost with its connection would not be
  valid). The longest of k routes is at least their mean, ``total / k``.
  Turns and deadhead enter ``total`` as the larger of ``D* +`` the turn bound
  for ``k`` routes and the node-matching rule above.
* ``longest round trip``: every pass is served by some crew whose route leaves
  its depot, reaches the pass, serves it and returns; so the longest route is at
  least, for the pass where this is largest, the cheapest over depots (and, for
  an undirected pass, over its two directions) of depot -> tail + service +
  head -> depot (shortest deadhead paths, legal directions only), plus the
  pass's least turn ``T`` on leaving its head unless the head is that depot
  (where the route may end).

References
----------
G. N. Frederickson, M. S. Hecht and C. E. Kim, "Approximation algorithms for
some routing problems", SIAM Journal on Computing 7 (1978) 178-193.
D. Ahr and G. Reinelt, "A tabu search algorithm for the min-max k-Chinese
postman problem", Computers & Operations Research 33 (2006) 3403-3422.
"""
from __future__ import annotations

import numbers
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import dijkstra

from crewcut.solve.network.depot import check_depot_node
from crewcut.solve.errors import InputError
from crewcut.solve.postman.eulerize import augmentation_lower_bound
from crewcut.solve.network.model import Network
from crewcut.solve.profile import Profile
from crewcut.solve.postman.tasks import build_deadhead, build_tasks


def _check_depots(net: Network, depots) -> list[int]:
    if isinstance(depots, (numbers.Integral, np.integer)):
        depots = [depots]
    out = [check_depot_node(net, d) for d in depots]
    if not out:
        raise InputError("no depot given", "give at least one depot node")
    return sorted(set(out))


def single_crew_lower_bound(net: Network, profile: Profile, segments=None) -> float:
    """Service minutes plus a proven bound on the deadhead any single route needs."""
    tasks = build_tasks(net, profile, segments)
    if len(tasks) == 0:
        return 0.0
    arcs = build_deadhead(net, profile)
    return (float(tasks.minutes.sum()) + augmentation_lower_bound(tasks, arcs, net.n_nodes)
            + _turn_sum(_turn_terms(net, profile, tasks, arcs).min(axis=0), 1))


def _turn_terms(net: Network, profile: Profile, tasks, arcs) -> np.ndarray:
    """Least turn minutes after each task's arrival, shape (2, t).

    Row 0: the task driven tail -> head; row 1: head -> tail (``inf`` for a
    directed task, which may not be driven that way).
    """
    from crewcut.solve.circuits.turns import TurnModel

    t = len(tasks)
    out = np.full((2, t), np.inf)
    if t == 0:
        return out
    model = TurnModel.from_network(net, profile)
    if np.min(model.penalty_s) < 0:  # the proof needs penalties >= 0: no turn bound then
        out[0] = 0.0
        out[1] = np.where(tasks.directed, np.inf, 0.0)
        return out
    n = net.n_nodes
    # legal departures grouped by their start node (CSR)
    by_tail = np.argsort(arcs.tail, kind="stable")
    ptr = np.searchsorted(arcs.tail[by_tail], np.arange(n + 1))
    d_seg, d_fwd = arcs.seg[by_tail], arcs.forward[by_tail]
    und = np.flatnonzero(~tasks.directed)
    a_task = np.concatenate([np.arange(t), und])
    a_row = np.concatenate([np.zeros(t, np.int64), np.ones(und.size, np.int64)])
    a_seg = tasks.seg[a_task]
    a_node = np.where(a_row == 0, tasks.head[a_task], tasks.tail[a_task])
    a_from = np.where(a_row == 0, tasks.tail[a_task], tasks.head[a_task])
    # u -> v (a loop street counts as forward, as in crewcut.solve.route)
    a_fwd = (a_from == net.seg_u[a_seg]) & (a_node == net.seg_v[a_seg])
    cnt = ptr[a_node + 1] - ptr[a_node]
    has = cnt > 0
    best = np.zeros(a_task.size)  # a node with no way on: only a route's end (costs nothing)
    if has.any():
        idx = np.flatnonzero(has)
        c = cnt[idx]
        start = np.concatenate([[0], np.cumsum(c)[:-1]])
        rep = np.repeat(idx, c)
        j = np.arange(int(c.sum())) - np.repeat(start, c) + np.repeat(ptr[a_node[idx]], c)
        sec = model.pair_seconds(a_seg[rep], a_fwd[rep], d_seg[j], d_fwd[j])
        best[idx] = np.minimum.reduceat(sec, start) / 60.0
    out[a_row, a_task] = best
    return out


def _turn_sum(per_task: np.ndarray, k: int) -> float:
    """Sum of the per-task turn minutes less the ``k`` largest (the routes' last arrivals)."""
    if per_task.size <= k:
        return 0.0
    x = np.sort(per_task)
    return float(max(0.0, x[:x.size - k].sum()))


def turn_lower_bound(net: Network, profile: Profile, k: int = 1, segments=None) -> float:
    """Turn minutes that any ``k`` routes serving the passes of ``segments`` must spend.

    See the module notes (Turns) for the proof. ``segments``: ids or mask,
    ``None`` for all; ``k``: number of routes (each has one last arrival).
    """
    if isinstance(k, bool) or not isinstance(k, (numbers.Integral, np.integer)) or k < 1:
        raise InputError(f"number of routes k must be a whole number 1 or more, got {k!r}")
    tasks = build_tasks(net, profile, segments)
    if len(tasks) == 0:
        return 0.0
    return _turn_sum(_turn_terms(net, profile, tasks, build_deadhead(net, profile)).min(axis=0), int(k))


def _round_trips(net, tasks, arcs, depots: list[int], turn: np.ndarray | None = None) -> np.ndarray:
    """Per task: the cheapest depot -> serve it -> same depot round trip (minutes).

    ``turn``: the (2, t) least turns after each orientation's arrival
    (:func:`_turn_terms`), added unless the arrival is at that depot.
    """
    n = net.n_nodes
    # cheapest arc per ordered node pair (csr would add up parallels)
    key = arcs.tail * n + arcs.head
    order = np.lexsort((arcs.minutes, key))
    key_s = key[order]
    first = np.ones(key_s.size, bool)
    first[1:] = key_s[1:] != key_s[:-1]
    keep = order[first]
    g = sp.csr_matrix((arcs.minutes[keep], (arcs.tail[keep], arcs.head[keep])), shape=(n, n))
    out_d = dijkstra(g, directed=True, indices=depots)  # depot -> node
    back_d = dijkstra(g.T.tocsr(), directed=True, indices=depots)  # node -> depot
    fwd = out_d[:, tasks.tail] + back_d[:, tasks.head]
    rev = out_d[:, tasks.head] + back_d[:, tasks.tail]
    if turn is not None:
        dep = np.asarray(depots, np.int64)[:, None]
        fwd = fwd + np.where(tasks.head[None, :] == dep, 0.0, turn[0][None, :])
        rev = rev + np.where(tasks.tail[None, :] == dep, 0.0, np.where(np.isfinite(turn[1]), turn[1], 0.0)[None, :])
    dh = np.where(tasks.directed[None, :], fwd, np.minimum(fwd, rev))
    return dh.min(axis=0) + tasks.minutes


def fleet_lower_bound(net: Network, profile: Profile, depots: list[int], k: int, segments=None) -> float:
    """Minutes that the longest of ``k`` crews' routes must at least take (turns included).

    Parameters
    ----------
    net, profile : the network and how it is worked.
    depots : node ids of the crews' depots (one shared depot or one per crew).
    k : number of crews.
    segments : the segments to serve (ids or mask); ``None`` for all.
    """
    if isinstance(k, bool) or not isinstance(k, (numbers.Integral, np.integer)) or k < 1:
        raise InputError(f"number of crews k must be a whole number 1 or more, got {k!r}")
    ds = _check_depots(net, depots)
    tasks = build_tasks(net, profile, segments)
    if len(tasks) == 0:
        return 0.0
    arcs = build_deadhead(net, profile)
    return _min_max_bound(net, profile, tasks, arcs, ds, int(k),
                          augmentation_lower_bound(tasks, arcs, net.n_nodes))


def route_lower_bound(net: Network, profile: Profile, depot: int, tasks, arcs, augmentation_bound: float) -> float:
    """:func:`fleet_lower_bound` for one crew at ``depot``, given the tasks, the deadhead
    arcs and a proven bound on their augmentation (an Eulerization's ``lower_bound``,
    which is never below :func:`crewcut.solve.postman.eulerize.augmentation_lower_bound`).

    The route engine calls this with the tables it already built, so nothing is
    solved twice.
    """
    if len(tasks) == 0:
        return 0.0
    return _min_max_bound(net, profile, tasks, arcs, [int(depot)], 1, float(augmentation_bound))


def _min_max_bound(net, profile, tasks, arcs, depots: list[int], k: int, augmentation_bound: float) -> float:
    """``max(total / k, longest round trip)`` (module notes, k crews)."""
    turn = _turn_terms(net, profile, tasks, arcs)
    rt = _round_trips(net, tasks, arcs, depots, turn)
    if not np.all(np.isfinite(rt)):
        bad = np.unique(tasks.seg[~np.isfinite(rt)])
        names = ", ".join(f"segment {int(s)} ('{net.seg_source[int(s)]}')" for s in bad[:8])
        raise InputError(f"{bad.size} required segment(s) cannot be reached from any depot and driven back: "
                         f"{names}", "check one-way directions and closed segments near them, "
                         "or leave these segments out")
    total = float(tasks.minutes.sum()) + max(augmentation_bound + _turn_sum(turn.min(axis=0), k),
                                             _matched_extra(net, profile, tasks, arcs, depots, k, turn,
                                                            augmentation_bound))
    return float(max(total / k, float(rt.max())))


def _matched_extra(net, profile, tasks, arcs, depots: list[int], k: int, turn: np.ndarray,
                   augmentation_bound: float) -> float:
    """Deadhead plus turns by the node-matching rule (module notes), best over the weights tried."""
    nt = _node_turns(net, profile, tasks, arcs, depots, k)
    if nt is None:
        return 0.0
    und = np.flatnonzero(~tasks.directed)
    dep = np.asarray(depots, np.int64)
    # an undirected pass: its cheaper orientation's least turn, none where it may end a route
    t_fwd = np.where(np.isin(tasks.head[und], dep), 0.0, turn[0, und])
    t_rev = np.where(np.isin(tasks.tail[und], dep), 0.0, turn[1, und])
    loose = float(np.minimum(t_fwd, t_rev).sum())
    return max((1.0 - lam) * augmentation_bound + _node_turn_sum(nt, lam) + loose for lam in _LAMBDAS)


# ------------------------------------------------------------------ node matching
# Weights tried for the deadhead term (see module notes, "Turns at a node"); each
# gives a valid bound, the largest is kept. The bound is concave in the weight,
# so a few points get close to its best.
_LAMBDAS = (0.0, 0.25, 0.5, 0.75, 1.0)


@dataclass(frozen=True)
class _NodeTurns:
    """Per node, the served arrivals and the successors they could have (flat arrays)."""

    a_node: np.ndarray  # (na,) node of each directed served arrival, sorted
    s_row: np.ndarray  # (p,) arrival of each (arrival, served departure) pair
    s_col: np.ndarray  # (p,) global id of the served departure
    s_min: np.ndarray  # (p,) turn minutes of the pair
    d_row: np.ndarray  # (q,) arrival of each (arrival, deadhead arc) pair, sorted
    d_min: np.ndarray  # (q,) turn minutes of the pair
    d_drive: np.ndarray  # (q,) deadhead minutes of the arc
    free: np.ndarray  # (na,) routes that may end at the arrival's node (0 away from depots)


def _node_turns(net: Network, profile: Profile, tasks, arcs, depots: list[int], k: int) -> _NodeTurns | None:
    from crewcut.solve.circuits.turns import TurnModel

    model = TurnModel.from_network(net, profile)
    if np.min(model.penalty_s) < 0:
        return None
    n = net.n_nodes
    d_idx = np.flatnonzero(tasks.directed)
    if d_idx.size == 0:
        return None
    fwd = (tasks.tail == net.seg_u[tasks.seg]) & (tasks.head == net.seg_v[tasks.seg])
    # arrivals: directed tasks at their heads
    order = d_idx[np.argsort(tasks.head[d_idx], kind="stable")]
    a_node, a_seg, a_fwd = tasks.head[order], tasks.seg[order], fwd[order]
    # served departures: directed tasks from their tails, undirected ones from either end
    u_idx = np.flatnonzero(~tasks.directed)
    u_seg = tasks.seg[u_idx]
    dep_node = np.concatenate([tasks.tail[d_idx], net.seg_u[u_seg], net.seg_v[u_seg]])
    dep_seg = np.concatenate([tasks.seg[d_idx], u_seg, u_seg])
    dep_fwd = np.concatenate([fwd[d_idx], np.ones(u_seg.size, bool), np.zeros(u_seg.size, bool)])
    s_row, s_col = _pairs_at(a_node, dep_node, n)
    s_min = model.pair_seconds(a_seg[s_row], a_fwd[s_row], dep_seg[s_col], dep_fwd[s_col]) / 60.0
    d_row, d_arc = _pairs_at(a_node, arcs.tail, n)
    d_min = model.pair_seconds(a_seg[d_row], a_fwd[d_row], arcs.seg[d_arc], arcs.forward[d_arc]) / 60.0
    free = np.zeros(a_node.size, np.int64)
    free[np.isin(a_node, np.asarray(depots, np.int64))] = k
    return _NodeTurns(a_node, s_row, s_col, s_min, d_row, d_min, arcs.minutes[d_arc], free)


def _pairs_at(a_node: np.ndarray, b_node: np.ndarray, n: int) -> tuple[np.ndarray, np.ndarray]:
    """Every (i, j) with ``a_node[i] == b_node[j]``, rows ascending (``a_node`` sorted)."""
    b_ord = np.argsort(b_node, kind="stable")
    ptr = np.searchsorted(b_node[b_ord], np.arange(n + 1))
    cnt = ptr[a_node + 1] - ptr[a_node]
    rows = np.repeat(np.arange(a_node.size), cnt)
    start = np.concatenate([[0], np.cumsum(cnt)[:-1]]).astype(np.int64)
    j = np.arange(int(cnt.sum())) - np.repeat(start, cnt) + np.repeat(ptr[a_node], cnt)
    return rows, b_ord[j]


def _node_turn_sum(nt: _NodeTurns, lam: float) -> float:
    """Sum over nodes of the least cost of giving every served arrival its own successor.

    A successor is a served departure at the node (each at most once) or a
    deadhead departure (any number), charged its turn plus ``lam`` times its
    deadhead minutes; at a depot up to ``free`` arrivals may end a route instead.
    Nodes where every arrival's cheapest choice differs are summed directly;
    the others are solved as assignment problems.
    """
    from scipy.optimize import linear_sum_assignment

    na = nt.a_node.size
    dh = np.full(na, np.inf)
    if nt.d_row.size:
        np.minimum.at(dh, nt.d_row, nt.d_min + lam * nt.d_drive)
    best_s = np.full(na, np.inf)
    np.minimum.at(best_s, nt.s_row, nt.s_min)
    # the served departure each arrival would take alone (lowest cost, then lowest id)
    o = np.lexsort((nt.s_col, nt.s_min, nt.s_row))
    first = np.ones(o.size, bool)
    first[1:] = nt.s_row[o][1:] != nt.s_row[o][:-1]
    pick = np.full(na, -1, np.int64)
    pick[nt.s_row[o][first]] = nt.s_col[o][first]
    alone = np.minimum(best_s, dh)
    takes = np.where(best_s <= dh, pick, -1)
    node_ids, node_of = np.unique(nt.a_node, return_inverse=True)
    hard = np.zeros(node_ids.size, bool)
    hard[node_of[nt.free > 0]] = True
    t = np.flatnonzero(takes >= 0)
    if t.size:
        pairs, cnt = np.unique(np.stack([node_of[t], takes[t]]), axis=1, return_counts=True)
        hard[pairs[0, cnt > 1]] = True  # two arrivals want the same departure
    total = float(alone[~hard[node_of]].sum())
    if not np.isfinite(total):
        return 0.0  # an arrival with no way on at all: no bound from this rule
    # arrivals are sorted by node and pairs by arrival: each node is one slice of both
    a_ptr = np.searchsorted(node_of, np.arange(node_ids.size + 1))
    s_ptr = np.searchsorted(nt.s_row, a_ptr)
    for v in np.flatnonzero(hard).tolist():
        r0, r = int(a_ptr[v]), int(a_ptr[v + 1] - a_ptr[v])
        # every arrival at a node pairs with the same departures, in the same order
        nd = int(s_ptr[v + 1] - s_ptr[v]) // r
        m = np.full((r, nd + r + int(nt.free[r0])), 1e9)
        m[:, :nd] = nt.s_min[int(s_ptr[v]):int(s_ptr[v + 1])].reshape(r, nd)
        d = dh[r0:r0 + r]
        m[np.arange(r), nd + np.arange(r)] = np.where(np.isfinite(d), d, 1e9)
        m[:, nd + r:] = 0.0
        i, j = linear_sum_assignment(m)
        got = float(m[i, j].sum())
        if got >= 1e9:
            return 0.0
        total += got
    return total
