"""Eulerization: the least-cost deadhead that turns the required passes into a closed walk.

Problem
-------
Given the tasks (required passes, directed or not), the deadhead arcs (legal
driving directions with their minutes) and a depot, choose a direction for every
undirected task and a multiset of deadhead arcs so that the tasks plus the added
arcs form a balanced (in-degree = out-degree), connected multigraph containing
the depot, at least deadhead cost: the Chinese postman problem and its rural,
directed and mixed relatives. Any Euler circuit of the result is a route.

Method (dispatch)
-----------------
* No tasks: nothing to add.
* Every task undirected and every usable segment two-way at equal cost:
  minimum T-join (:mod:`crewcut.solve.postman.tjoin`, Edmonds and Johnson 1973), exact; the
  result is then oriented along closed trails so that it is balanced.
* Every task directed: minimum-cost flow (:mod:`crewcut.solve.postman.flow`), exact.
* Otherwise (the mixed case): :mod:`crewcut.solve.postman.mixed`, a stated heuristic with a
  lower bound, exact by CP-SAT for small instances when proven.
* Rural case: when the tasks and the depot form several pieces, they are first
  joined by Frederickson's spanning-tree connection (:mod:`crewcut.solve.postman.connect`); the
  answer is then a heuristic, and the lower bound is the no-connection bound.

"Exact" means optimal for costs floored to :data:`crewcut.solve.postman.flow.RESOLUTION_MIN`
minutes (T-join: a billionth of the network's total cost); the reported lower
bound is always a proven bound on the least possible added cost.

References
----------
J. Edmonds and E. L. Johnson (1973), Mathematical Programming 5, 88-124.
E. J. Beltrami and L. D. Bodin (1974), Networks 4, 65-94.
G. N. Frederickson (1979), Journal of the ACM 26, 538-554.
"""
from __future__ import annotations

import numpy as np

from crewcut.solve.postman.connect import check_reachable, connect_pieces
from crewcut.solve.errors import InputError
from crewcut.solve.postman.flow import min_cost_flow
from crewcut.solve.postman.mixed import euler_orient, relaxation_bounds, solve_mixed
from crewcut.solve.result import Augmentation
from crewcut.solve.postman.tasks import DeadheadArcs, TaskSet
from crewcut.solve.postman.tjoin import min_tjoin


def _validate(tasks: TaskSet, arcs: DeadheadArcs, depot: int, n_nodes: int) -> None:
    if not isinstance(n_nodes, (int, np.integer)) or n_nodes < 1:
        raise InputError(f"n_nodes must be a positive integer, got {n_nodes!r}")
    if not isinstance(depot, (int, np.integer)) or not 0 <= depot < n_nodes:
        raise InputError(f"depot node {depot!r} is not in the network (0..{n_nodes - 1})",
                         "snap the depot to the network with crewcut.solve.network.depot.snap_depot")
    for name, arr in (("task tail", tasks.tail), ("task head", tasks.head),
                      ("arc tail", arcs.tail), ("arc head", arcs.head)):
        if arr.size and (arr.min() < 0 or arr.max() >= n_nodes):
            raise InputError(f"{name} node ids must lie in 0..{n_nodes - 1}")
    if arcs.minutes.size and (not np.all(np.isfinite(arcs.minutes)) or arcs.minutes.min() < 0):
        bad = int(arcs.seg[~(np.isfinite(arcs.minutes) & (arcs.minutes >= 0))][0])
        raise InputError(f"segment {bad} has a negative or missing deadhead time",
                         "check its length and the profile's deadhead speeds")


def _arc_lookup(arcs: DeadheadArcs):
    """(seg, forward) -> arc index, as two arrays over segment ids (-1 where illegal)."""
    m = int(arcs.seg.max()) + 1 if len(arcs) else 0
    fwd = np.full(m, -1, np.int64)
    bwd = np.full(m, -1, np.int64)
    idx = np.arange(len(arcs), dtype=np.int64)
    # Reverse order so the first arc of a (seg, direction) wins: deterministic.
    fwd[arcs.seg[arcs.forward][::-1]] = idx[arcs.forward][::-1]
    bwd[arcs.seg[~arcs.forward][::-1]] = idx[~arcs.forward][::-1]
    return fwd, bwd


def _reorient(arc_idx: np.ndarray, keep: np.ndarray, arcs: DeadheadArcs, fwd, bwd) -> np.ndarray:
    """The arc of the same segment in the other direction where ``keep`` is False."""
    out = arc_idx.copy()
    flip = ~keep
    s = arcs.seg[arc_idx[flip]]
    other = np.where(arcs.forward[arc_idx[flip]], bwd[s], fwd[s])
    if np.any(other < 0):
        raise AssertionError("a one-way connector was flipped")
    out[flip] = other
    return out


def _symmetric(arcs: DeadheadArcs) -> bool:
    """Every usable segment drivable both ways at the same cost."""
    fwd, bwd = _arc_lookup(arcs)
    used = np.unique(arcs.seg)
    if np.any(fwd[used] < 0) or np.any(bwd[used] < 0):
        return False
    return bool(np.allclose(arcs.minutes[fwd[used]], arcs.minutes[bwd[used]], rtol=0, atol=0))


def eulerize(tasks: TaskSet, arcs: DeadheadArcs, depot: int, n_nodes: int, *,
             time_limit_s: float = 10.0, seed: int = 0, seg_source=None) -> Augmentation:
    """Least-cost deadhead additions making the tasks a closed walk from ``depot``.

    Parameters
    ----------
    tasks : from :func:`crewcut.solve.postman.tasks.build_tasks`.
    arcs : from :func:`crewcut.solve.postman.tasks.build_deadhead`.
    depot : node id of the depot.
    n_nodes : number of nodes of the network.
    time_limit_s : deterministic time budget of the exact integer program (mixed case).
    seed : seed of every random choice (the integer program's search).
    seg_source : optional source feature id per segment, used in error messages.

    Returns
    -------
    :class:`crewcut.solve.result.Augmentation` with ``arcs`` (indices into ``arcs``,
    sorted, repeats allowed), ``orientation`` (one bool per task, True = driven
    tail -> head; always True for directed tasks), ``cost`` (minutes added),
    ``lower_bound``, ``method`` and ``exact``.
    """
    _validate(tasks, arcs, depot, n_nodes)
    if not (isinstance(time_limit_s, (int, float)) and time_limit_s >= 0):
        raise InputError(f"time_limit_s must be a number >= 0, got {time_limit_s!r}")
    nt = len(tasks)
    if nt == 0:
        return Augmentation(np.zeros(0, np.int64), np.zeros(0, bool), 0.0, 0.0, "nothing to serve", True)
    check_reachable(tasks.tail, tasks.head, tasks.seg, arcs.tail, arcs.head, int(depot), n_nodes, seg_source)
    conn = connect_pieces(tasks.tail, tasks.head, int(depot), arcs.tail, arcs.head, arcs.seg,
                          arcs.minutes, n_nodes)
    rural = conn.arc.size > 0
    suffix = f" + rural connection of {conn.n_pieces} pieces (Frederickson spanning tree)" if rural else ""
    fwd, bwd = _arc_lookup(arcs)
    at, ah, ac = arcs.tail, arcs.head, arcs.minutes
    it = np.concatenate([tasks.tail, at[conn.arc]])  # items: the tasks, then the connectors
    ih = np.concatenate([tasks.head, ah[conn.arc]])

    if not tasks.directed.any() and _symmetric(arcs):
        deg = np.bincount(it, minlength=n_nodes) + np.bincount(ih, minlength=n_nodes)
        tj = min_tjoin(at, ah, ac, deg % 2 == 1, n_nodes)
        j = tj.edges
        o = euler_orient(np.concatenate([it, at[j]]), np.concatenate([ih, ah[j]]), n_nodes)
        orient = o[:nt]
        extra = np.concatenate([conn.arc, j])
        added = _reorient(extra, o[nt:], arcs, fwd, bwd)
        if rural:
            t_deg = np.bincount(tasks.tail, minlength=n_nodes) + np.bincount(tasks.head, minlength=n_nodes)
            lb = min_tjoin(at, ah, ac, t_deg % 2 == 1, n_nodes).lower_bound
        else:
            lb = tj.lower_bound
        method = "minimum T-join (Edmonds-Johnson, sparse blossom)" + suffix
        exact = not rural
    elif tasks.directed.all():
        sup = np.bincount(ih, minlength=n_nodes).astype(np.int64) - np.bincount(it, minlength=n_nodes)
        f = min_cost_flow(at, ah, ac, sup)
        orient = np.ones(nt, bool)
        added = np.concatenate([conn.arc, np.repeat(np.arange(len(arcs)), f.flow)])
        if rural:
            sup0 = np.bincount(tasks.head, minlength=n_nodes).astype(np.int64) - \
                np.bincount(tasks.tail, minlength=n_nodes)
            lb = min_cost_flow(at, ah, ac, sup0).lower_bound
        else:
            lb = f.lower_bound
        method = "minimum-cost flow (Edmonds-Johnson, OR-tools)" + suffix
        exact = not rural
    else:
        idir = np.concatenate([tasks.directed, ~conn.two_way])
        real = np.concatenate([np.ones(nt, bool), np.zeros(conn.arc.size, bool)])
        r = solve_mixed(it, ih, idir, at, ah, ac, n_nodes, time_limit_s=time_limit_s, seed=seed,
                        bound_items=real)
        orient = r.orientation[:nt] | tasks.directed
        conn_arcs = _reorient(conn.arc, r.orientation[nt:] | ~conn.two_way, arcs, fwd, bwd)
        added = np.concatenate([conn_arcs, np.repeat(np.arange(len(arcs)), r.counts)])
        lb = r.lower_bound
        method = r.method + suffix
        exact = r.proven and not rural
    added = np.sort(added.astype(np.int64))
    cost = float(arcs.minutes[added].sum())
    lb = float(min(lb, cost))
    return Augmentation(arcs=added, orientation=orient.astype(bool), cost=cost, lower_bound=lb,
                        method=method, exact=bool(exact))


def augmented_arcs(tasks: TaskSet, arcs: DeadheadArcs, aug: Augmentation) -> tuple[np.ndarray, np.ndarray]:
    """(tail, head) of every traversal of the augmented multigraph: oriented tasks, then added arcs."""
    o = aug.orientation
    t = np.concatenate([np.where(o, tasks.tail, tasks.head), arcs.tail[aug.arcs]])
    h = np.concatenate([np.where(o, tasks.head, tasks.tail), arcs.head[aug.arcs]])
    return t, h


def augmentation_lower_bound(tasks: TaskSet, arcs: DeadheadArcs, n_nodes: int) -> float:
    """A proven lower bound on the added minutes, ignoring connectivity.

    Exact (the optimum up to the cost resolution) in the undirected and directed
    cases; in the mixed case the larger of the T-join and flow relaxations (see
    :mod:`crewcut.solve.postman.mixed`). Valid for any set of closed walks that together serve
    every task, connected or not.
    """
    if len(tasks) == 0:
        return 0.0
    at, ah, ac = arcs.tail, arcs.head, arcs.minutes
    if not tasks.directed.any() and _symmetric(arcs):
        deg = np.bincount(tasks.tail, minlength=n_nodes) + np.bincount(tasks.head, minlength=n_nodes)
        return min_tjoin(at, ah, ac, deg % 2 == 1, n_nodes).lower_bound
    if tasks.directed.all():
        sup = np.bincount(tasks.head, minlength=n_nodes).astype(np.int64) - \
            np.bincount(tasks.tail, minlength=n_nodes)
        return min_cost_flow(at, ah, ac, sup).lower_bound
    return max(relaxation_bounds(tasks.tail, tasks.head, tasks.directed, at, ah, ac, n_nodes))
