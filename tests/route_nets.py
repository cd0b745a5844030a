"""Small networks built directly (no reader), for the circuit and route tests.

Invented test data, placed around the invented town's centre (lon -30.5, lat 45.2).
"""
from __future__ import annotations

import numpy as np

from crewcut.solve.network.geodesy import geodesic_lengths, project
from crewcut.solve.network.model import SERVICE_BOTH_SIDES, Network

ORIGIN = (-30.5, 45.2)
DEG_PER_M = 1.0 / 111_000.0  # rough, only to place test nodes on a grid


def make_network(lonlat, segs, *, closed=(), geometry=True, lengths=None) -> Network:
    """A :class:`Network` from node positions and ``(u, v, oneway, service)`` rows.

    Segments are straight lines; one-way segments are legal ``u -> v``. ``lengths``
    (metres) replaces the geodesic lengths, e.g. for unit-weight textbook graphs.
    """
    lonlat = np.asarray(lonlat, float)
    n, m = lonlat.shape[0], len(segs)
    u = np.array([s[0] for s in segs], np.int64)
    v = np.array([s[1] for s in segs], np.int64)
    coords = [lonlat[[a, b]] for a, b in zip(u.tolist(), v.tolist())]
    x, y = project(lonlat[:, 0], lonlat[:, 1], ORIGIN)
    closed_mask = np.zeros(m, bool)
    closed_mask[list(closed)] = True
    return Network(
        node_lon=lonlat[:, 0] if geometry else np.full(n, np.nan),
        node_lat=lonlat[:, 1] if geometry else np.full(n, np.nan),
        node_x=x, node_y=y, node_label=[str(i) for i in range(n)],
        seg_source=[f"s{i}" for i in range(m)], seg_u=u, seg_v=v,
        seg_length=geodesic_lengths(coords) if lengths is None else np.asarray(lengths, float),
        seg_oneway=np.array([bool(s[2]) for s in segs], bool),
        seg_service=np.array([s[3] if len(s) > 3 else SERVICE_BOTH_SIDES for s in segs], np.int8),
        seg_class=["residential"] * m, seg_name=[f"Test Lane {i}" for i in range(m)],
        seg_speed_kmh=np.full(m, np.nan), seg_closed=closed_mask,
        seg_coords=coords if geometry else [None] * m, has_geometry=geometry, origin=ORIGIN)


def grid_network(rows: int, cols: int, spacing_m: float = 100.0, oneway=(), service=None,
                 closed=(), geometry=True) -> Network:
    """A rows x cols street grid; segment ids: horizontal rows first, then vertical.

    ``oneway``: segment ids that are one-way (u -> v as built: west->east, south->north).
    ``service``: optional dict segment id -> SERVICE_* code (default both_sides).
    """
    lonlat = np.array([[ORIGIN[0] + c * spacing_m * DEG_PER_M / np.cos(np.radians(ORIGIN[1])),
                        ORIGIN[1] + r * spacing_m * DEG_PER_M] for r in range(rows) for c in range(cols)])
    segs = []
    for r in range(rows):
        for c in range(cols - 1):
            segs.append([r * cols + c, r * cols + c + 1])
    for r in range(rows - 1):
        for c in range(cols):
            segs.append([r * cols + c, (r + 1) * cols + c])
    service = service or {}
    ow = set(oneway)
    rows_ = [(a, b, i in ow, service.get(i, SERVICE_BOTH_SIDES)) for i, (a, b) in enumerate(segs)]
    return make_network(lonlat, rows_, closed=closed, geometry=geometry)


def assert_closed_walk(net: Network, tail, head, seg, forward, depot: int, ignore_oneway: bool = False) -> None:
    """A closed walk from ``depot`` over existing, usable segments in legal directions.

    Checked from the network arrays alone (independent of the circuit code), and
    with networkx: the walk's multigraph must pass ``networkx.is_eulerian``.
    """
    import networkx as nx

    tail, head, seg, forward = (np.asarray(a) for a in (tail, head, seg, forward))
    assert tail.size > 0
    assert tail[0] == depot and head[-1] == depot, "starts and ends at the depot"
    assert (head[:-1] == tail[1:]).all(), "consecutive traversals share a node"
    assert ((seg >= 0) & (seg < net.n_segments)).all(), "existing segments only"
    assert not net.seg_closed[seg].any(), "no closed segment is driven"
    su, sv = net.seg_u[seg], net.seg_v[seg]
    assert np.where(forward, (tail == su) & (head == sv), (tail == sv) & (head == su)).all(), \
        "each traversal runs along its segment"
    assert ignore_oneway or forward[net.seg_oneway[seg]].all(), "one-way segments only in their legal direction"
    g = nx.MultiDiGraph()
    g.add_edges_from(zip(tail.tolist(), head.tolist()))
    assert nx.is_eulerian(g)  # networkx's own check: balanced and strongly connected
