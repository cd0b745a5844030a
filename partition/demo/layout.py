"""The street layout of the invented demo towns: seeded street networks that look and behave like a real town.

The town is Tallowmere, an invented place centred at lon -30.5, lat 45.2 (open
ocean on real maps, so it can never be mistaken for a real town). Larger towns
are the same idea grown outward from the same centre.

Method
------
Streets are laid out in a *parameter plane* where intersections sit on an integer
lattice (``u`` = column, ``v`` = row), then mapped to metres by a continuous map:

1. uneven column and row spacings (blocks of 65 to 165 m),
2. a small random displacement of every intersection, interpolated bilinearly
   over each block,
3. a smooth long-wave warp over the whole town and a shorter-wave warp that bends
   the suburbs (downtown stays square).

Every step is continuous and moves points by much less than a block, so streets
that do not cross in the parameter plane do not cross on the map, and every
street piece lies inside its own block: shared intersections are the only
places where streets meet, and they have identical coordinates.

On that lattice: arterials on some rows and columns and two diagonals; a
downtown core of one-way streets with alternating directions (one-way pairs);
residential streets elsewhere, some removed to merge blocks into irregular
ones; cul-de-sacs, crescents and drive-through service lanes inside blocks; a
meandering river that removes every street it touches except the bridges of the
arterials. The town keeps the ``n_segments`` pieces nearest the centre (an
irregular outline), then the largest connected part; any one-way street that
could not be both reached and left is made two-way, so every street can be
driven to and from every other (the drivable graph is strongly connected).

Output: a GeoJSON (RFC 7946) FeatureCollection of LineStrings, one feature per
piece of street between two intersections, with the properties the readers know
(``id``, ``name``, ``class``, ``oneway``, ``service``) plus ``bridge: "yes"`` on
bridges. The foreign member ``town`` records the name, seed, size and the
river's centre line.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import connected_components

from crewcut.solve.errors import InputError
from crewcut.solve.network.geodesy import unproject

from crewcut.demo.street_names import street_names

TOWN_NAME = "Tallowmere"
CENTRE = (-30.5, 45.2)  # lon, lat of the town centre (invented: open ocean on real maps)
MIN_SEGMENTS = 200
MAX_SEGMENTS = 2_000_000
EXAMPLE_SEGMENTS = 2_000  # the town shipped in examples/ and written by ``crewcut demo``
GENERATOR = "crewcut-towngen 1"

_K = 5  # vertices per street piece
_CLASSES = ("residential", "secondary", "primary", "service")
_RES, _SEC, _PRI, _SRV = range(4)
_RIVER_BUFFER_M = 30.0  # streets closer than this to the river's centre line are cut


# --------------------------------------------------------------------------- map
@dataclass
class _Plane:
    """The continuous map from the parameter plane to metres (see module docstring)."""

    colpos: np.ndarray  # (C,) metres of each lattice column before warping
    rowpos: np.ndarray  # (R,)
    jitter: np.ndarray  # (R, C, 2) metres
    long_waves: np.ndarray  # (n, 5): amplitude, wavelength, angle, phase, axis
    short_waves: np.ndarray
    core_m: float  # downtown radius, metres: no suburb bending inside it

    def plan_xy(self, u: np.ndarray, v: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Parameter plane -> metres before jitter and warp (the 'plan')."""
        return (np.interp(u, np.arange(self.colpos.size), self.colpos),
                np.interp(v, np.arange(self.rowpos.size), self.rowpos))

    def metres(self, u: np.ndarray, v: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        x, y = self.plan_xy(u, v)
        C, R = self.colpos.size, self.rowpos.size
        c = np.clip(np.floor(u).astype(np.int64), 0, C - 2)
        r = np.clip(np.floor(v).astype(np.int64), 0, R - 2)
        fu = (u - c)[:, None]
        fv = (v - r)[:, None]
        J = self.jitter
        j = (J[r, c] * (1 - fu) * (1 - fv) + J[r, c + 1] * fu * (1 - fv)
             + J[r + 1, c] * (1 - fu) * fv + J[r + 1, c + 1] * fu * fv)
        wx, wy = self._warp(x, y)
        wx0, wy0 = self._warp(np.zeros(1), np.zeros(1))
        return x + j[:, 0] + wx - wx0[0], y + j[:, 1] + wy - wy0[0]

    def _warp(self, x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        out = [np.zeros_like(x), np.zeros_like(x)]
        for a, lam, ang, ph, axis in self.long_waves:
            out[int(axis)] += a * np.sin(2 * np.pi * (x * math.cos(ang) + y * math.sin(ang)) / lam + ph)
        rad = np.hypot(x, y)
        t = np.clip((rad - self.core_m) / 500.0, 0.0, 1.0)
        mask = t * t * (3 - 2 * t)  # smoothstep: square downtown, bent suburbs
        for a, lam, ang, ph, axis in self.short_waves:
            out[int(axis)] += mask * a * np.sin(2 * np.pi * (x * math.cos(ang) + y * math.sin(ang)) / lam + ph)
        return out[0], out[1]


@dataclass
class _River:
    y0: float
    waves: np.ndarray  # (n, 3) amplitude, wavelength, phase

    def y(self, x: np.ndarray) -> np.ndarray:
        out = np.full_like(x, self.y0, dtype=float)
        for a, lam, ph in self.waves:
            out += a * np.sin(2 * np.pi * x / lam + ph)
        return out


# ------------------------------------------------------------------------ pieces
@dataclass
class _Pieces:
    """Street pieces in the parameter plane, one row each."""

    P: np.ndarray  # (m, K, 2) u, v
    cls: np.ndarray  # int8 class code
    oneway: np.ndarray  # bool, legal direction = drawing order of P
    bridge: np.ndarray  # bool
    name_key: np.ndarray  # int64
    name_kind: np.ndarray  # int8 index into crewcut.demo.street_names.NAME_KINDS

    @staticmethod
    def cat(parts: list[_Pieces]) -> _Pieces:
        return _Pieces(*(np.concatenate([getattr(p, f) for p in parts]) for f in
                         ("P", "cls", "oneway", "bridge", "name_key", "name_kind")))




def _straight(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """(m, 2) starts and ends -> (m, K, 2) straight polylines."""
    t = np.linspace(0.0, 1.0, _K)[None, :, None]
    return a[:, None, :] * (1 - t) + b[:, None, :] * t


def _key(a: int, b: np.ndarray, c: np.ndarray | int = 0) -> np.ndarray:
    return a * 10**12 + np.asarray(b, np.int64) * 10**6 + np.asarray(c, np.int64)


# ------------------------------------------------------------------------- build
def check_town_args(n_segments, seed) -> tuple[int, int]:
    """``(n_segments, seed)`` as ints when a town can be made of them; :class:`InputError` otherwise."""
    if isinstance(n_segments, bool) or not isinstance(n_segments, (int, np.integer)):
        raise InputError(f"number of segments (`n_segments`) must be a whole number, got {n_segments!r}",
                         f"give a number from {MIN_SEGMENTS:,} to {MAX_SEGMENTS:,}", param="n_segments")
    if not MIN_SEGMENTS <= n_segments <= MAX_SEGMENTS:
        raise InputError(f"number of segments {n_segments:,} (`n_segments`) is outside the range a town can have here",
                         f"give a number from {MIN_SEGMENTS:,} to {MAX_SEGMENTS:,} segments", param="n_segments")
    if isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or seed < 0:
        raise InputError(f"`seed` must be a whole number, zero or more, got {seed!r}", "for example 0", param="seed")
    return int(n_segments), int(seed)


def generate_town(n_segments: int, seed: int = 0) -> dict:
    """An invented town of about ``n_segments`` street segments, as GeoJSON.

    Parameters
    ----------
    n_segments : int
        Segments wanted (pieces of street between intersections), 200 to
        2,000,000. The town has this many within about 1 %.
    seed : int
        Every random choice follows from it: the same seed gives the same town.

    Returns
    -------
    dict
        A GeoJSON (RFC 7946) FeatureCollection of LineStrings in lon/lat.
    """
    n_segments, seed = check_town_args(n_segments, seed)
    rng = np.random.default_rng([seed, 0x7A11])

    # --- lattice sized for the town plus a margin for its irregular outline
    col_mean, row_mean = 118.0, 104.0
    r0_m = math.sqrt(n_segments * col_mean * row_mean / 2.0 / math.pi)  # ~2 pieces per block
    half_c = int(math.ceil(1.45 * r0_m / col_mean)) + 3
    half_r = int(math.ceil(1.45 * r0_m / row_mean)) + 3
    C, R = 2 * half_c + 1, 2 * half_r + 1
    c0, r0 = half_c, half_r  # the centre intersection
    colpos = np.concatenate([[0.0], np.cumsum(rng.uniform(72, 165, C - 1))])
    rowpos = np.concatenate([[0.0], np.cumsum(rng.uniform(64, 145, R - 1))])
    colpos -= colpos[c0]
    rowpos -= rowpos[r0]
    core_m = min(220.0 + 2.5 * math.sqrt(n_segments), 600.0)

    gx, gy = np.meshgrid(colpos, rowpos)  # (R, C)
    node_core = np.hypot(gx, gy) < core_m
    jitter = rng.uniform(-8.0, 8.0, (R, C, 2)) * np.where(node_core, 0.3, 1.0)[..., None]
    jitter[r0, c0] = 0.0
    long_waves = np.column_stack([rng.uniform(15, 22, 6), rng.uniform(2500, 4000, 6),
                                  rng.uniform(0, np.pi, 6), rng.uniform(0, 2 * np.pi, 6),
                                  np.repeat([0, 1], 3)])
    short_waves = np.column_stack([rng.uniform(13, 17, 4), rng.uniform(380, 460, 4),
                                   rng.uniform(0, np.pi, 4), rng.uniform(0, 2 * np.pi, 4),
                                   np.repeat([0, 1], 2)])
    plane = _Plane(colpos, rowpos, jitter, long_waves, short_waves, core_m)
    # the river runs south of downtown, close enough that even a small town spans it
    amp = float(np.clip(0.12 * r0_m, 50.0, 150.0))
    river = _River(y0=-float(np.clip(0.55 * r0_m, 330.0, 640.0)) - float(rng.uniform(0, 40)),
                   waves=np.array([[amp * rng.uniform(0.85, 1.0), rng.uniform(2200, 3000), rng.uniform(0, 2 * np.pi)],
                                   [amp * rng.uniform(0.25, 0.3), rng.uniform(800, 1100), rng.uniform(0, 2 * np.pi)]]))

    # --- arterial rows and columns, roughly every 9 blocks, one of each primary
    def arterial_lines(centre: int, n: int) -> np.ndarray:
        offs = []
        for sign in (1, -1):
            k = 3 if sign > 0 else -4  # two arterials (and bridges) near the centre
            while 0 < centre + k < n - 1:
                offs.append(centre + k + int(rng.integers(-1, 2)))
                k += 9 * sign
        return np.unique(np.clip(offs, 1, n - 2))

    art_cols = arterial_lines(c0, C)
    art_rows = arterial_lines(r0, R)
    pri_col = art_cols[np.argmin(np.abs(art_cols - c0))]
    pri_row = art_rows[np.argmin(np.abs(art_rows - r0))]

    # --- lattice edges: H (row r, from column c to c+1), then V (column c, row r to r+1)
    hr, hc = np.divmod(np.arange(R * (C - 1)), C - 1)
    vc, vr = np.divmod(np.arange(C * (R - 1)), R - 1)
    nH = hr.size
    a = np.concatenate([np.column_stack([hc, hr]), np.column_stack([vc, vr])]).astype(float)
    b = a + np.concatenate([np.tile([1.0, 0.0], (nH, 1)), np.tile([0.0, 1.0], (vc.size, 1))])
    is_h = np.arange(a.shape[0]) < nH
    line_idx = np.concatenate([hr, vc])  # the row of an H edge, the column of a V edge
    along = np.concatenate([hc, vr])
    art = np.where(is_h, np.isin(line_idx, art_rows), np.isin(line_idx, art_cols))
    cls = np.full(a.shape[0], _RES, np.int8)
    cls[art] = _SEC
    cls[art & is_h & (line_idx == pri_row)] = _PRI
    cls[art & ~is_h & (line_idx == pri_col)] = _PRI
    ua, va = a[:, 0].astype(np.int64), a[:, 1].astype(np.int64)
    ub, vb = b[:, 0].astype(np.int64), b[:, 1].astype(np.int64)
    core = node_core[va, ua] & node_core[vb, ub]

    # one-way core: alternate directions row by row and column by column
    ow = core & ~art
    flip = ow & (line_idx % 2 == 1)  # odd rows run west, odd columns south
    a2, b2 = a.copy(), b.copy()
    a2[flip], b2[flip] = b[flip], a[flip]
    # a few one-way residential streets outside the core (checked for traps below)
    extra_ow = (~core) & (cls == _RES) & (rng.random(cls.size) < 0.03)
    swap = extra_ow & (rng.random(cls.size) < 0.5)
    a2[swap], b2[swap] = b[swap], a[swap]
    ow |= extra_ow

    # gentle bows on some residential streets (kept small: pieces stay inside their blocks)
    bow = np.where((cls == _RES) & ~core & (rng.random(cls.size) < 0.4), rng.uniform(-0.07, 0.07, cls.size), 0.0)

    # --- the river: cut every street near it, except arterial columns (bridges)
    def river_hits(P: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        x, y = plane.plan_xy(P[..., 0].ravel(), P[..., 1].ravel())
        d = (y - river.y(x)).reshape(P.shape[:2])
        crosses = (np.sign(d) != np.sign(d[:, :1])).any(axis=1)
        near = (np.abs(d) < _RIVER_BUFFER_M).any(axis=1)
        return crosses, near | crosses

    P_lat = _straight(a2, b2)
    sag = np.sin(np.pi * np.linspace(0, 1, _K))[None, :]  # bow across the street, zero at both ends
    P_lat[:, :, 1] += np.where(is_h, 1.0, 0.0)[:, None] * bow[:, None] * sag
    P_lat[:, :, 0] += np.where(is_h, 0.0, 1.0)[:, None] * bow[:, None] * sag
    crosses, touched = river_hits(P_lat)
    bridge = crosses & art & ~is_h
    alive = ~touched | (art & ~is_h)  # arterial columns keep their approach and bridge

    # merge some blocks: drop residential edges at random (dead ends appear where it bites)
    removable = (cls == _RES) & ~core & alive
    alive &= ~(removable & (rng.random(cls.size) < 0.13))

    # --- cells: at most one feature inside each block
    ncell = (R - 1) * (C - 1)
    cr, cc = np.divmod(np.arange(ncell), C - 1)
    e_bottom = cr * (C - 1) + cc
    e_top = (cr + 1) * (C - 1) + cc
    e_left = nH + cc * (R - 1) + cr
    e_right = nH + (cc + 1) * (R - 1) + cr
    sides = np.column_stack([e_bottom, e_top, e_left, e_right])
    free = ~touched[sides].any(axis=1) & ~core[sides].all(axis=1) & ~art[sides].any(axis=1)

    # two diagonals crossing at one intersection, north-west of the centre
    rx, cx = r0 + 3, c0 - 4
    diag = []
    for name_b, d in ((0, 1), (1, -1)):
        t = np.arange(-max(R, C), max(R, C))
        r_, c_ = rx + t, cx + d * t
        ok = (r_ >= 0) & (r_ < R - 1) & (c_ >= 0) & (c_ < C) & (c_ + d >= 0) & (c_ + d < C)
        r_, c_ = r_[ok], c_[ok]
        cell = r_ * (C - 1) + np.minimum(c_, c_ + d)
        free[cell] = False
        P = _straight(np.column_stack([c_, r_]).astype(float), np.column_stack([c_ + d, r_ + 1]).astype(float))
        cr_, _ = river_hits(P)
        diag.append(_Pieces(P, np.full(len(r_), _PRI if name_b == 0 else _SEC, np.int8),
                            np.zeros(len(r_), bool), cr_, np.full(len(r_), _key(5, name_b)),
                            np.full(len(r_), 1, np.int8)))

    u = rng.random(ncell)
    present = alive[sides]
    side = rng.integers(0, 4, ncell)  # cul-de-sac: which side it leaves from
    corner = rng.integers(0, 4, ncell)  # crescent: which corner it rounds
    horiz = rng.random(ncell) < 0.5  # service lane: across which way
    corner_sides = np.array([[0, 2], [3, 0], [1, 3], [2, 1]])  # bottom/top/left/right per corner
    is_spur = free & (u < 0.11) & present[np.arange(ncell), side]
    is_cres = free & (u >= 0.11) & (u < 0.15) & present[np.arange(ncell), corner_sides[corner, 0]] \
        & present[np.arange(ncell), corner_sides[corner, 1]]
    lane_sides = np.where(horiz[:, None], [2, 3], [0, 1])
    is_lane = free & (u >= 0.15) & (u < 0.19) & present[np.arange(ncell)[:, None], lane_sides].all(axis=1)

    base = np.column_stack([cc, cr]).astype(float)
    starts = np.array([[0.5, 0.0], [0.5, 1.0], [0.0, 0.5], [1.0, 0.5]])
    inward = np.array([[0.0, 1.0], [0.0, -1.0], [1.0, 0.0], [-1.0, 0.0]])
    tt = np.linspace(0, 1, _K)[None, :, None]
    parts = []
    split = np.zeros(cls.size, bool)

    i = np.flatnonzero(is_spur)
    s = side[i]
    perp = inward[s][:, ::-1] * [1.0, -1.0]
    P = (base[i] + starts[s])[:, None, :] + tt * 0.40 * inward[s][:, None, :] \
        + (rng.uniform(-0.1, 0.1, i.size)[:, None, None] * np.sin(np.pi * tt)
           + rng.uniform(-0.1, 0.1, i.size)[:, None, None] * tt) * perp[:, None, :]
    split[sides[i, s]] = True
    parts.append(_Pieces(P, np.full(i.size, _RES, np.int8), np.zeros(i.size, bool), np.zeros(i.size, bool),
                         _key(6, i), np.full(i.size, 2, np.int8)))

    i = np.flatnonzero(is_cres)
    k = corner[i]
    ctr = base[i] + np.array([[0, 0], [1, 0], [1, 1], [0, 1]], float)[k]
    th = (k * np.pi / 2)[:, None] + np.linspace(0, np.pi / 2, _K)[None, :]
    P = ctr[:, None, :] + 0.5 * np.stack([np.cos(th), np.sin(th)], axis=-1)
    split[sides[i, corner_sides[k, 0]]] = True
    split[sides[i, corner_sides[k, 1]]] = True
    parts.append(_Pieces(P, np.full(i.size, _RES, np.int8), np.zeros(i.size, bool), np.zeros(i.size, bool),
                         _key(7, i), np.full(i.size, 3, np.int8)))

    i = np.flatnonzero(is_lane)
    h = horiz[i]
    s0 = np.where(h, 2, 0)
    s1 = np.where(h, 3, 1)
    P = _straight(base[i] + starts[s0], base[i] + starts[s1])
    split[sides[i, s0]] = True
    split[sides[i, s1]] = True
    parts.append(_Pieces(P, np.full(i.size, _SRV, np.int8), np.zeros(i.size, bool), np.zeros(i.size, bool),
                         _key(8, i), np.full(i.size, 4, np.int8)))

    # lattice pieces: whole edges, or two halves where a block feature meets them
    chunk = 12  # a residential name runs for about a dozen blocks
    lkey = np.where(art, _key(np.where(is_h, 2, 4), line_idx), _key(np.where(is_h, 1, 3), line_idx, along // chunk))
    lkind = np.where(art, 1, 0).astype(np.int8)
    keep = alive & ~split
    whole = np.flatnonzero(keep)
    parts.append(_Pieces(P_lat[whole], cls[whole], ow[whole], bridge[whole], lkey[whole], lkind[whole]))
    hs = np.flatnonzero(alive & split)
    mid = (a2[hs] + b2[hs]) / 2
    for lo, hi in ((a2[hs], mid), (mid, b2[hs])):
        parts.append(_Pieces(_straight(lo, hi), cls[hs], ow[hs], bridge[hs], lkey[hs], lkind[hs]))
    pieces = _Pieces.cat(parts + diag)

    # --- to metres, then keep the pieces nearest the centre (irregular outline)
    m = pieces.P.shape[0]
    flat = pieces.P.reshape(-1, 2)
    xs, ys = plane.metres(flat[:, 0], flat[:, 1])
    X = np.stack([xs, ys], axis=-1).reshape(m, _K, 2)
    # intersections: ends that meet in the parameter plane (to 1/2000 of a block) are one
    # node, placed once, so that every street meeting there has identical coordinates
    ends = np.concatenate([pieces.P[:, 0], pieces.P[:, -1]])
    keys = np.round(ends * 2000).astype(np.int64)
    _, first, node_of = np.unique(keys[:, 0] * 10**8 + keys[:, 1], return_index=True,
                                      return_inverse=True)
    node_of = node_of.ravel()
    nu, nv = keys[first, 0] / 2000.0, keys[first, 1] / 2000.0
    nx_, ny_ = plane.metres(nu, nv)
    su, sv = node_of[:m], node_of[m:]
    X[:, 0, 0], X[:, 0, 1] = nx_[su], ny_[su]
    X[:, -1, 0], X[:, -1, 1] = nx_[sv], ny_[sv]

    midx, midy = X[:, _K // 2, 0], X[:, _K // 2, 1]
    ang = np.arctan2(midy, midx)
    ph = rng.uniform(0, 2 * np.pi, 3)
    outline = 1 + 0.13 * np.sin(2 * ang + ph[0]) + 0.08 * np.sin(3 * ang + ph[1]) + 0.05 * np.sin(5 * ang + ph[2])
    order = np.argsort(np.hypot(midx, midy) / outline, kind="stable")

    want = n_segments
    for _ in range(4):
        chosen = order[:want]
        kept, ow_final = _drivable_core(chosen, su, sv, pieces.oneway, node_of.max() + 1)
        lost = n_segments - kept.size
        if abs(lost) <= max(2, n_segments // 500):
            break
        want += lost
    oneway = pieces.oneway.copy()
    oneway[kept] = ow_final
    kept = kept[np.argsort(_rank(order)[kept], kind="stable")]  # ids grow outward from the centre
    return _to_geojson(kept, X, pieces, oneway, plane, river, rng, n_segments, seed)


def _rank(order: np.ndarray) -> np.ndarray:
    r = np.empty_like(order)
    r[order] = np.arange(order.size)
    return r


def _drivable_core(chosen: np.ndarray, su: np.ndarray, sv: np.ndarray, oneway: np.ndarray,
                   n_nodes: int) -> tuple[np.ndarray, np.ndarray]:
    """The pieces of the largest connected part, and their one-way flags after removing traps.

    A one-way piece between two different strongly connected components can be
    entered but not left (or the reverse) by some part of the town: it becomes
    two-way. After that, in a connected graph, every component boundary is
    two-way, so the whole graph is strongly connected.
    """
    u, v = su[chosen], sv[chosen]
    g = coo_matrix((np.ones(chosen.size), (u, v)), shape=(n_nodes, n_nodes)).tocsr()
    _, lab = connected_components(g, directed=False)
    counts = np.bincount(lab[u])
    big = int(np.argmax(counts))
    sel = lab[u] == big
    chosen, u, v = chosen[sel], u[sel], v[sel]
    ow = oneway[chosen].copy()
    for _ in range(10):
        tail = np.concatenate([u, v[~ow]])
        head = np.concatenate([v, u[~ow]])
        g = coo_matrix((np.ones(tail.size), (tail, head)), shape=(n_nodes, n_nodes)).tocsr()
        _, scc = connected_components(g, directed=True, connection="strong")
        trap = ow & (scc[u] != scc[v])
        if not trap.any():
            break
        ow &= ~trap
    else:  # pragma: no cover - the argument above says one round is enough
        raise RuntimeError("town generator: could not make the drivable graph strongly connected")
    return chosen, ow


# ------------------------------------------------------------------------ output
def _to_geojson(kept, X, pieces, oneway, plane, river, rng, n_segments, seed) -> dict:
    P = X[kept]
    lon, lat = unproject(P[..., 0].ravel(), P[..., 1].ravel(), CENTRE)
    coords = np.round(np.stack([lon, lat], axis=-1).reshape(P.shape), 7)
    ow = oneway[kept]
    against = ow & (rng.random(kept.size) < 0.35)  # drawn against the traffic, marked "-1"
    coords[against] = coords[against, ::-1]
    names = street_names(pieces.name_key[kept], pieces.name_kind[kept], rng)
    cls = pieces.cls[kept]
    br = pieces.bridge[kept]
    features = []
    width = len(str(kept.size))
    clist = coords.tolist()
    for j in range(kept.size):
        fid = f"tm-{j + 1:0{width}d}"
        props = {"id": fid, "name": names[j], "class": _CLASSES[cls[j]]}
        if ow[j]:
            props["oneway"] = "-1" if against[j] else "yes"
        if cls[j] == _SRV:
            props["service"] = "none"
        if br[j]:
            props["bridge"] = "yes"
        features.append({"type": "Feature", "id": fid, "properties": props,
                         "geometry": {"type": "LineString", "coordinates": clist[j]}})
    # the river's centre line across the town, for maps
    ext = float(np.abs(X[kept][..., 0]).max()) + 200.0
    rx = np.linspace(-ext, ext, max(16, int(2 * ext / 40)))
    cols = np.arange(plane.colpos.size, dtype=float)
    rows = np.arange(plane.rowpos.size, dtype=float)
    ru = np.interp(rx, plane.colpos, cols)
    rv = np.interp(river.y(rx), plane.rowpos, rows)
    inside = (rx >= plane.colpos[0]) & (rx <= plane.colpos[-1])
    mx, my = plane.metres(ru[inside], rv[inside])
    rlon, rlat = unproject(mx, my, CENTRE)
    river_line = np.round(np.column_stack([rlon, rlat]), 7).tolist()
    return {
        "type": "FeatureCollection",
        "town": {"name": TOWN_NAME, "invented": True, "generator": GENERATOR, "seed": seed,
                 "segments_requested": n_segments, "centre": list(CENTRE),
                 "river": {"type": "LineString", "coordinates": river_line}},
        "features": features,
    }
