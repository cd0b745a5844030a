"""Small invented street networks for the tests, near Tallowmere (lon -30.5, lat 45.2).

Built straight from arrays (``make_network``), as regular grids
(``grid_network``, ``named_grid``), or through the project's topology repair
from jittered lines (``grid_lines``, ``repaired_grid``). Lengths come from
pyproj's geodesic (:func:`crewcut.solve.network.geodesy.geodesic_lengths`) unless
given; with :func:`metre_profile` one deadhead minute is one metre, so costs
compare to the metre. Invented test data: no real place or street.
"""
from __future__ import annotations

import numpy as np

from crewcut.solve.network.geodesy import geodesic_lengths, project
from crewcut.solve.network.model import SERVICE_BOTH_SIDES, SERVICE_NONE, SERVICE_ONE_PASS, Network, RawLine
from crewcut.solve.network.repair import build_network
from crewcut.solve.profile import Profile

ORIGIN = (-30.5, 45.2)
DEG_PER_M = 1.0 / 111_000.0  # rough, only to place test nodes on a grid
STREET_WORDS = ("Tallow", "Mere", "Wick", "Candle", "Lantern", "Ember", "Flax", "Reed")
ROW_NAMES = ("Tallow Row", "Mere Street", "Candle Walk", "Wick Lane", "Lantern Way")
COL_NAMES = ("Ash Rise", "Birch Rise", "", "Cedar Rise", "Dunlin Rise", "Elder Rise", "Fern Rise", "")


def metre_profile(ignore_oneway: bool = False) -> Profile:
    """Deadhead at 0.06 km/h (1 minute per metre); service at 0.03 km/h (2 minutes per metre)."""
    return Profile(ignore_oneway=ignore_oneway, service_speed_kmh={"default": 0.03},
                   deadhead_speed_kmh={"default": 0.06})


def make_network(nodes, u, v=None, lengths=None, *, oneway=None, service=None, closed=None, geometry=True,
                 coords=None, names=None, sources=None, labels=None) -> Network:
    """A :class:`Network` built directly, without a reader.

    ``nodes``: a node count (a network without coordinates, positions all 0) or
    ``(n, 2)`` lon/lat positions (projected around ``ORIGIN``; ``geometry=False``
    keeps the projection but drops the coordinates). Segments: arrays ``u``, ``v``
    (and ``oneway``, ``service`` arrays), or rows ``(u, v, oneway[, service])`` as
    ``u`` with ``v`` left out. Service defaults to one pass. ``lengths`` (metres)
    replaces the geodesic lengths of the segments' straight lines (``coords``
    gives other lines). ``closed``: a boolean mask or segment ids. One-way
    segments are legal ``u -> v``.
    """
    if v is None:  # rows
        rows = list(u)
        u = [r[0] for r in rows]
        v = [r[1] for r in rows]
        oneway = [bool(r[2]) if len(r) > 2 else False for r in rows]
        default = SERVICE_ONE_PASS if service is None else service
        service = [r[3] if len(r) > 3 else default for r in rows]
    u, v = np.asarray(u, np.int64), np.asarray(v, np.int64)
    m = u.size
    seg_oneway = np.zeros(m, bool) if oneway is None else np.asarray(oneway, bool)
    service = SERVICE_ONE_PASS if service is None else service
    seg_service = np.full(m, service, np.int8) if np.isscalar(service) else np.asarray(service, np.int8)
    seg_closed = np.zeros(m, bool)
    if closed is not None:
        closed = np.asarray(closed)
        if closed.dtype == bool and closed.size == m:
            seg_closed = closed.copy()
        else:
            seg_closed[closed.astype(np.int64)] = True
    common = dict(seg_source=list(sources) if sources is not None else [f"s{i}" for i in range(m)],
                  seg_u=u, seg_v=v, seg_oneway=seg_oneway, seg_service=seg_service,
                  seg_class=["residential"] * m,
                  seg_name=list(names) if names is not None else [f"Test Lane {i}" for i in range(m)],
                  seg_speed_kmh=np.full(m, np.nan), seg_closed=seg_closed)
    if isinstance(nodes, (int, np.integer)):
        n = int(nodes)
        nan = np.full(n, np.nan)
        return Network(node_lon=nan, node_lat=nan.copy(), node_x=np.zeros(n), node_y=np.zeros(n),
                       node_label=list(labels) if labels is not None else [str(i) for i in range(n)],
                       seg_length=np.asarray(lengths, np.float64), seg_coords=[None] * m, has_geometry=False,
                       **common)
    lonlat = np.asarray(nodes, float)
    n = lonlat.shape[0]
    lines = coords if coords is not None else [lonlat[[a, b]] for a, b in zip(u.tolist(), v.tolist())]
    x, y = project(lonlat[:, 0], lonlat[:, 1], ORIGIN)
    return Network(
        node_lon=lonlat[:, 0] if geometry else np.full(n, np.nan),
        node_lat=lonlat[:, 1] if geometry else np.full(n, np.nan),
        node_x=x, node_y=y, node_label=list(labels) if labels is not None else [str(i) for i in range(n)],
        seg_length=geodesic_lengths(lines) if lengths is None else np.asarray(lengths, float),
        seg_coords=lines if geometry else [None] * m, has_geometry=geometry, origin=ORIGIN, **common)


def random_connected(rng: np.random.Generator, n: int, extra: float = 0.6) -> tuple[np.ndarray, np.ndarray]:
    """A random connected multigraph: a random spanning tree plus extra edges (parallels possible)."""
    perm = rng.permutation(n)
    parent = perm[rng.integers(0, np.maximum(np.arange(1, n), 1))]
    u = list(perm[1:])
    v = list(parent)
    k = int(extra * n)
    a = rng.integers(0, n, k)
    b = rng.integers(0, n, k)
    keep = a != b
    return np.array(u + a[keep].tolist(), np.int64), np.array(v + b[keep].tolist(), np.int64)


def random_strong(rng: np.random.Generator, n: int, extra: float = 1.0) -> tuple[np.ndarray, np.ndarray]:
    """A random strongly connected digraph: a Hamiltonian cycle plus random arcs."""
    perm = rng.permutation(n)
    u = perm.tolist()
    v = np.roll(perm, -1).tolist()
    k = int(extra * n)
    a = rng.integers(0, n, k)
    b = rng.integers(0, n, k)
    keep = a != b
    return np.array(u + a[keep].tolist(), np.int64), np.array(v + b[keep].tolist(), np.int64)


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
    return make_network(lonlat, rows_, closed=list(closed), geometry=geometry)


def named_grid(cols: int = 6, rows: int = 4, spacing_deg: float = 0.0015, bend: bool = True) -> Network:
    """A cols x rows grid of named two-way one-pass streets; column streets 2 and 7 have no name.

    The first row street gets a bend (an extra vertex) so that polylines with
    more than two points are exercised. The top-right street needs no service.
    Segment ids 'tm-000', ...; nodes have no label.
    """
    lon0, lat0 = ORIGIN[0] - spacing_deg * (cols - 1) / 2, ORIGIN[1] - spacing_deg * (rows - 1) / 2
    node = {}
    lon, lat = [], []
    for r in range(rows):
        for c in range(cols):
            node[(c, r)] = len(lon)
            lon.append(lon0 + c * spacing_deg)
            lat.append(lat0 + r * spacing_deg * 0.7)
    u, v, names, coords = [], [], [], []
    for r in range(rows):
        for c in range(cols - 1):
            a, b = node[(c, r)], node[(c + 1, r)]
            pts = [[lon[a], lat[a]], [lon[b], lat[b]]]
            if bend and r == 0:
                pts.insert(1, [(lon[a] + lon[b]) / 2, lat[a] - spacing_deg * 0.1])
            u.append(a), v.append(b), names.append(ROW_NAMES[r % len(ROW_NAMES)]), coords.append(np.array(pts))
    for c in range(cols):
        for r in range(rows - 1):
            a, b = node[(c, r)], node[(c, r + 1)]
            u.append(a), v.append(b), names.append(COL_NAMES[c % len(COL_NAMES)])
            coords.append(np.array([[lon[a], lat[a]], [lon[b], lat[b]]]))
    m = len(u)
    service = np.full(m, SERVICE_ONE_PASS, np.int8)
    service[(rows - 1) * (cols - 1) + cols - 2] = SERVICE_NONE  # last row street: drive-through only
    return make_network(np.column_stack([lon, lat]), u, v, service=service, coords=coords, names=names,
                        sources=[f"tm-{i:03d}" for i in range(m)], labels=[""] * len(lon))


def grid_lines(cols: int, rows: int, seed: int, *, oneway_rows: bool = True, drop: float = 0.1,
               none_share: float = 0.1, one_pass_share: float = 0.2, closed: tuple = ()) -> list[RawLine]:
    """Lines of a jittered grid: some streets missing, one-way rows in alternating directions.

    Every street stays reachable both ways (outer rows and every column are two-way
    and never dropped); service kinds are mixed (none, one pass, both sides).
    """
    rng = np.random.default_rng(seed)
    sp = 0.0012
    pts = {}
    for r in range(rows):
        for c in range(cols):
            j = rng.uniform(-0.25, 0.25, 2) * sp
            pts[r, c] = (ORIGIN[0] + (c - cols / 2) * sp + j[0], ORIGIN[1] + (r - rows / 2) * sp * 0.7 + j[1])
    lines = []

    def add(a, b, name, oneway=0, can_drop=True):
        if can_drop and rng.random() < drop:
            return
        kind = rng.random()
        service = "none" if kind < none_share else ("one_pass" if kind < none_share + one_pass_share else "both_sides")
        sid = f"st-{len(lines)}"
        coords = np.array([pts[a], pts[b]])
        if oneway < 0:
            coords = coords[::-1]
        lines.append(RawLine(sid, coords, name=name, road_class="residential", oneway=int(oneway != 0),
                             service=service, closed=sid in closed))

    for r in range(rows):
        # interior rows alternate one-way directions; outer rows and every column stay two-way
        ow = 0
        if oneway_rows and 0 < r < rows - 1:
            ow = 1 if r % 2 else -1
        for c in range(cols - 1):
            add((r, c), (r, c + 1), f"{STREET_WORDS[r % len(STREET_WORDS)]} Row", ow, can_drop=ow == 0 and r not in (0, rows - 1))
    for c in range(cols):
        for r in range(rows - 1):
            add((r, c), (r + 1, c), f"{STREET_WORDS[c % len(STREET_WORDS)]} Rise", 0, can_drop=c not in (0, cols - 1))
    return lines


def repaired_grid(cols: int, rows: int, seed: int, profile: Profile | None = None, **kw) -> Network:
    """:func:`grid_lines` through the project's topology repair (:func:`crewcut.solve.network.repair.build_network`)."""
    return build_network(grid_lines(cols, rows, seed, **kw), profile or Profile())
