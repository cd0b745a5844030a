"""Plane coordinates for a network that has none (CSV edge lists).

Problem
-------
Clustering crews' territories and judging their compactness need a position for
every node; a CSV edge list gives only lengths. We want coordinates whose
straight-line distances approximate the street (shortest-path) distances.

Method
------
Landmark multidimensional scaling (de Silva and Tenenbaum 2004): pick up to
``n_landmarks`` nodes by farthest-point sampling over shortest-path distances
(undirected, by length), embed the landmarks in the plane by classical MDS
(Torgerson 1952) on their squared distances, then place every other node by the
same linear map applied to its distances to the landmarks. Pieces of the network
that are not connected are laid out side by side. The coordinates are in metres of
path length, deterministic, and used for nothing but grouping: not for turns
(there are no bearings) and not for maps.

References
----------
V. de Silva and J. B. Tenenbaum (2004), Sparse multidimensional scaling using
landmark points, Stanford University technical report.
W. S. Torgerson (1952), Psychometrika 17, 401-419.
"""
from __future__ import annotations

import numpy as np
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components, dijkstra


def path_layout(n: int, u: np.ndarray, v: np.ndarray, length: np.ndarray,
                n_landmarks: int = 24) -> tuple[np.ndarray, np.ndarray]:
    """x, y (metres) for ``n`` nodes joined by undirected edges ``u-v`` of ``length``."""
    x = np.zeros(n)
    y = np.zeros(n)
    if n == 0:
        return x, y
    # symmetric adjacency keeping the shorter of parallel edges (self-loops dropped)
    a = np.concatenate([u, v]).astype(np.int64)
    b = np.concatenate([v, u]).astype(np.int64)
    w = np.concatenate([length, length]).astype(float)
    keep = a != b
    a, b, w = a[keep], b[keep], w[keep]
    order = np.lexsort((w, b, a))
    a, b, w = a[order], b[order], w[order]
    first = np.ones(a.size, bool)
    first[1:] = (a[1:] != a[:-1]) | (b[1:] != b[:-1])
    g = coo_matrix((w[first], (a[first], b[first])), shape=(n, n)).tocsr()
    n_comp, comp = connected_components(g, directed=False)
    offset = 0.0
    for c in range(n_comp):
        nodes = np.flatnonzero(comp == c)
        cx, cy = _layout_piece(g[nodes][:, nodes], n_landmarks)
        if nodes.size > 1:
            cx = cx - cx.min()
        x[nodes] = cx + offset
        y[nodes] = cy
        offset = float(x[nodes].max()) + max(1.0, float(np.ptp(cx)) * 0.1)
    return x, y


def _layout_piece(g, n_landmarks: int) -> tuple[np.ndarray, np.ndarray]:
    n = g.shape[0]
    if n == 1:
        return np.zeros(1), np.zeros(1)
    # farthest-point sampling from node 0: deterministic
    marks = [0]
    dist = [dijkstra(g, directed=False, indices=0)]
    nearest = dist[0].copy()
    while len(marks) < min(n_landmarks, n):
        nxt = int(np.argmax(nearest))
        if nearest[nxt] <= 0:
            break
        marks.append(nxt)
        dist.append(dijkstra(g, directed=False, indices=nxt))
        nearest = np.minimum(nearest, dist[-1])
    d = np.vstack(dist)  # (L, n)
    L = len(marks)
    if L < 3:  # a path or a single edge: lay it on a line
        return d[0].copy(), np.zeros(n)
    d2 = d[:, marks] ** 2
    j = np.eye(L) - 1.0 / L
    b = -0.5 * j @ d2 @ j
    w, vec = np.linalg.eigh(b)
    order = np.argsort(w)[::-1][:2]
    w, vec = np.clip(w[order], 1e-12, None), vec[:, order]
    # sign convention so the result does not depend on the eigen-solver's choice
    vec = vec * np.where(vec[np.argmax(np.abs(vec), axis=0), [0, 1]] < 0, -1.0, 1.0)
    pinv = vec / np.sqrt(w)  # (L, 2)
    mean_d2 = d2.mean(axis=1)  # (L,)
    coords = -0.5 * ((d ** 2) - mean_d2[:, None]).T @ pinv  # (n, 2)
    return coords[:, 0], coords[:, 1]
