"""Seeds for growing territories: one starting point and one starting segment per crew.

Method
------
k-means (scikit-learn's :class:`~sklearn.cluster.KMeans`, Lloyd's algorithm) on the
midpoints of the segments that need service, each weighted by its estimated work,
so that cluster centres sit where the work is. When every crew shares one depot the
centres start from k-means++ (Arthur and Vassilvitskii 2007) with ``random_state =
seed``; when crews have depots of their own the centres start *at the depots*
(crews sharing a depot start on a small ring around it) and Lloyd's iterations
only pull them towards their work, which keeps each territory near its own yard.
Crews are then matched to centres by the assignment that minimises the total
depot-to-centre distance (scipy's ``linear_sum_assignment``). Each crew's seed
segment is the required segment nearest its centre that the crew can serve.
"""
from __future__ import annotations

import numpy as np
from scipy.optimize import linear_sum_assignment
from sklearn.cluster import KMeans

from crewcut.fleet.streets import StreetGraph


def seed_territories(sg: StreetGraph, depot_xy: np.ndarray, eligible: np.ndarray, *, seed: int = 0,
                     weight: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Centres (k, 2) and seed segments (k,) for k crews.

    Parameters
    ----------
    sg: the street graph of the plan.
    depot_xy: (k, 2) local metres of each crew's depot.
    eligible: (k, m) bool, True where crew i can serve segment s.
    seed: random state for k-means.
    weight: per-segment weight (defaults to ``sg.work``).
    """
    k = depot_xy.shape[0]
    req = np.flatnonzero(sg.required)
    x = np.stack([sg.mid_x[req], sg.mid_y[req]], axis=1)
    w = (sg.work if weight is None else weight)[req]
    w = np.where(w > 0, w, 1e-6)
    distinct = np.unique(depot_xy, axis=0)
    if k == 1:
        centres = np.average(x, axis=0, weights=w)[None, :]
    else:
        n_clusters = min(k, req.size)
        if distinct.shape[0] == 1:
            km = KMeans(n_clusters=n_clusters, init="k-means++", n_init=4, random_state=seed)
        else:
            km = KMeans(n_clusters=n_clusters, init=_anchors(depot_xy, x), n_init=1, random_state=seed)
        km.fit(x, sample_weight=w)
        centres = km.cluster_centers_
    # match crews to centres: least total depot-centre distance; ties (a shared
    # depot) resolved clockwise from north so that crew order reads around the map
    d = np.hypot(depot_xy[:, None, 0] - centres[None, :, 0], depot_xy[:, None, 1] - centres[None, :, 1])
    if distinct.shape[0] == 1:
        c0 = depot_xy[0]
        ang = np.mod(np.arctan2(centres[:, 0] - c0[0], centres[:, 1] - c0[1]), 2 * np.pi)
        col = np.argsort(ang, kind="stable")
    else:
        _, col = linear_sum_assignment(np.round(d, 3))
    centres = centres[col]
    seeds = np.full(k, -1, np.int64)
    taken = np.zeros(sg.required.size, bool)
    for i in range(k):
        ok = req[eligible[i, req] & ~taken[req]]
        if ok.size == 0:
            continue
        dd = np.hypot(sg.mid_x[ok] - centres[i, 0], sg.mid_y[ok] - centres[i, 1])
        s = int(ok[np.lexsort((ok, dd))[0]])
        seeds[i] = s
        taken[s] = True
    return centres, seeds


def _anchors(depot_xy: np.ndarray, x: np.ndarray) -> np.ndarray:
    """Initial centres at the depots; crews sharing a depot spread on a ring around it."""
    span = float(max(np.ptp(x[:, 0]), np.ptp(x[:, 1]), 1.0))
    init = depot_xy.astype(float).copy()
    keys = [tuple(np.round(p, 6)) for p in depot_xy]
    for key in sorted(set(keys)):
        idx = [i for i, kk in enumerate(keys) if kk == key]
        if len(idx) > 1:
            r = 0.1 * span
            for j, i in enumerate(idx):
                a = 2 * np.pi * j / len(idx)
                init[i] = depot_xy[i] + r * np.array([np.sin(a), np.cos(a)])
    return init
