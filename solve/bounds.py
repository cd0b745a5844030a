"""Lower bounds on route length: one crew, and the longest of k crews' routes.

One crew
--------
Every route serves every pass once (service minutes are fixed) and adds deadhead
traversals that make the served passes a balanced multigraph. So service minutes
plus any lower bound on that augmentation is a lower bound on the route
(turn penalties excluded): :func:`single_crew_lower_bound` uses
:func:`solve.eulerize.augmentation_lower_bound` (exact in the undirected and
directed cases, the larger of the T-join and flow relaxations in the mixed case;
all of them ignore connectivity, which can only make a route longer).

k crews (min-max)
-----------------
:func:`fleet_lower_bound` returns ``max(total / k, longest round trip)``:

* ``total``: the k routes together serve every pass once and each is a closed
  walk, so their union is a balanced multigraph containing every pass. With
  several depots this union need not be one connected walk, which is why the
  bound uses service minutes plus the augmentation bound *without*
  connectivity (the single-crew route cost with its connection would not be
  valid). The longest of k routes is at least their mean, ``total / k``.
* ``longest round trip``: every pass is served by some crew whose route leaves
  its depot, reaches the pass, serves it and returns; so the longest route is at
  least, for the pass where this is largest, the cheapest over depots (and, for
  an undirected pass, over its two directions) of depot -> tail + service +
  head -> depot (shortest deadhead paths, legal directions only).

References
----------
G. N. Frederickson, M. S. Hecht and C. E. Kim, "Approximation algorithms for
some routing problems", SIAM Journal on Computing 7 (1978) 178-193.
D. Ahr and G. Reinelt, "A tabu search algorithm for the min-max k-Chinese
postman problem", Computers & Operations Research 33 (2006) 3403-3422.
"""
from __future__ import annotations

import numbers

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import dijkstra

from .errors import InputError
from .eulerize import augmentation_lower_bound
from .network import Network
from .profile import Profile
from .tasks import build_deadhead, build_tasks


def _check_depots(net: Network, depots) -> list[int]:
    if isinstance(depots, (numbers.Integral, np.integer)):
        depots = [depots]
    out = []
    for d in depots:
        if isinstance(d, bool) or not isinstance(d, (numbers.Integral, np.integer)) or not 0 <= d < net.n_nodes:
            raise InputError(f"depot node {d!r} is not in the network (0..{net.n_nodes - 1})",
                             "snap depots to the network with solve.depot.snap_depot")
        out.append(int(d))
    if not out:
        raise InputError("no depot given", "give at least one depot node")
    return sorted(set(out))


def single_crew_lower_bound(net: Network, profile: Profile, segments=None) -> float:
    """Service minutes plus a proven bound on the deadhead any single route needs."""
    tasks = build_tasks(net, profile, segments)
    if len(tasks) == 0:
        return 0.0
    arcs = build_deadhead(net, profile)
    return float(tasks.minutes.sum()) + augmentation_lower_bound(tasks, arcs, net.n_nodes)


def _round_trips(net, tasks, arcs, depots: list[int]) -> np.ndarray:
    """Per task: the cheapest depot -> serve it -> same depot round trip (minutes)."""
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
    dh = np.where(tasks.directed[None, :], fwd, np.minimum(fwd, rev))
    return dh.min(axis=0) + tasks.minutes


def fleet_lower_bound(net: Network, profile: Profile, depots: list[int], k: int, segments=None) -> float:
    """Minutes that the longest of ``k`` crews' routes must at least take (turns excluded).

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
    rt = _round_trips(net, tasks, arcs, ds)
    if not np.all(np.isfinite(rt)):
        bad = np.unique(tasks.seg[~np.isfinite(rt)])
        names = ", ".join(f"segment {int(s)} ('{net.seg_source[int(s)]}')" for s in bad[:8])
        raise InputError(f"{bad.size} required segment(s) cannot be reached from any depot and driven back: "
                         f"{names}", "check one-way directions and closed segments near them, "
                         "or leave these segments out")
    total = float(tasks.minutes.sum()) + augmentation_lower_bound(tasks, arcs, net.n_nodes)
    return float(max(total / int(k), float(rt.max())))
