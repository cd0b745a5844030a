"""Topology repair: turn the lines a reader found into a :class:`~crewcut.solve.network.model.Network`.

Problem
    Street data from a GIS is drawn by hand: two streets that meet at a corner
    often end a few centimetres apart, a side street ends on the middle of a main
    street without splitting it, a segment is digitised twice. A routing graph
    needs exact shared nodes.

Method
    0. Curbs posted for different times on a street served on both sides become
       two parallel lines, one per curb (:mod:`crewcut.solve.network.curbs`);
       every piece of a line carries its posting.
    1. Snap: line ends closer than ``profile.snap_tolerance_m`` become one node
       (exact duplicates by ``numpy.unique``, then pairs within the tolerance
       from a ``scipy.spatial.cKDTree`` in a local metric projection, merged
       transitively as connected components). The node keeps the position of
       its first appearance in the input.
    2. Split at touch (``profile.split_at_touch``): a node lying within the
       tolerance of the inside of another line splits that line there
       (``shapely.STRtree`` query with the ``dwithin`` predicate, then
       ``shapely.line_locate_point``, all vectorised).
    3. Lengths are geodesic on WGS84 (:func:`crewcut.solve.network.geodesy.geodesic_lengths`).
    4. Clean-up: a segment whose two ends became one node is dropped with a
       warning when it is no longer than the tolerance (zero length), and is an
       error otherwise (a self-loop cannot be routed as one segment). Exact
       duplicates (same ends, same geometry, same direction rules) are merged
       with a warning.

Node ids follow the first appearance of each node in the input (line order,
start before end); segment ids follow the input line order, the pieces of a
split line in their drawn order. Same input, same network.
"""
from __future__ import annotations

import numpy as np

from crewcut.solve.errors import InputError
from crewcut.solve.network.geodesy import geodesic_lengths, project
from crewcut.solve.network.curbs import split_curbs
from crewcut.solve.network.layout import path_layout
from crewcut.solve.network.model import SERVICE_NAMES, Finding, Network, RawLine
from crewcut.solve.profile import Profile

CURB_SERVICES = ("left_curb", "right_curb")
_MIN_TOUCH_M = 0.01  # with tolerance 0 a "touch" still allows float noise of 1 cm


def build_network(lines: list[RawLine], profile: Profile, *, has_geometry: bool = True,
                  findings: tuple[Finding, ...] | list[Finding] = (), source: str = "the input") -> Network:
    """Repair the topology of ``lines`` and build the network.

    Parameters
    ----------
    lines:
        Reader output. With ``has_geometry`` every line has ``coords`` (k >= 2
        lon/lat rows); without, every line has ``from_label``, ``to_label`` and
        ``length_m``.
    profile:
        Gives the snap tolerance, the split-at-touch switch and the default
        service per road class.
    findings:
        Remarks the reader already made; they are kept, repair findings follow.
    source:
        The file the lines came from, named in messages.

    Raises
    ------
    InputError
        Empty network, a self-loop, an unknown service value, or a street served in one
        pass whose curbs are posted for different times
        (:func:`crewcut.solve.network.curbs.split_curbs`).
    """
    hint = "check that the file holds street lines (and, for OpenStreetMap, drivable highway ways)"
    if not lines:
        raise InputError(f"{source}: the network is empty: no street lines were found", hint)
    services = _resolve_services(lines, profile)
    findings = list(findings) + _duplicate_ids(lines)
    lines, services, postings = split_curbs(lines, services, findings)
    if has_geometry:
        net = _build_geometric(lines, services, profile, findings, postings)
    else:
        net = _build_plain(lines, services, profile, findings, postings)
    if net.n_segments == 0:
        raise InputError(f"{source}: the network is empty: all {len(lines)} street line(s) have zero length", hint)
    return net


# ----------------------------------------------------------------------------- shared
def _resolve_services(lines: list[RawLine], profile: Profile) -> np.ndarray:
    cache: dict[str, str] = {}
    out = np.empty(len(lines), np.int8)
    for i, ln in enumerate(lines):
        name = ln.service
        if name is None:
            name = cache.get(ln.road_class)
            if name is None:
                name = cache[ln.road_class] = profile.service_for(ln.road_class)
        code = SERVICE_NAMES.get(name)
        if code is None:
            raise InputError(f"feature '{ln.source_id}': unknown service {name!r}",
                             f"allowed: {', '.join(SERVICE_NAMES)}")
        out[i] = code
    return out


def _self_loop(source_id: str, length: float) -> InputError:
    return InputError(
        f"feature '{source_id}' is a self-loop: both of its ends are the same point "
        f"(a closed line of {length:,.1f} m)",
        "split the closed line into two lines at a point along it, or remove it")


def _finish(lines, services, keep_src, u, v, coords, lengths, node_lon, node_lat, node_x, node_y,
            node_label, has_geometry, origin, findings, postings) -> Network:
    """Build the Network from the kept pieces (``keep_src``: their source line per piece).

    Every piece of a line carries the line's posting; ``seg_posting`` stays empty when none is posted.
    """
    kept = tuple(postings[i] for i in keep_src) if postings else ()
    return Network(
        node_lon=node_lon, node_lat=node_lat, node_x=node_x, node_y=node_y,
        node_label=node_label,
        seg_source=[lines[i].source_id for i in keep_src],
        seg_u=u.astype(np.int64), seg_v=v.astype(np.int64), seg_length=lengths.astype(np.float64),
        seg_oneway=np.array([bool(lines[i].oneway) for i in keep_src], dtype=bool),
        seg_service=services[keep_src].astype(np.int8),
        seg_class=[lines[i].road_class for i in keep_src],
        seg_name=[lines[i].name for i in keep_src],
        seg_speed_kmh=np.array([np.nan if lines[i].speed_kmh is None else float(lines[i].speed_kmh)
                                for i in keep_src], dtype=np.float64),
        seg_closed=np.array([bool(lines[i].closed) for i in keep_src], dtype=bool),
        seg_coords=coords, has_geometry=has_geometry, origin=origin, findings=tuple(findings),
        seg_posting=kept if any(p is not None for p in kept) else ())


def _duplicate_ids(lines: list[RawLine]) -> list[Finding]:
    """A warning per feature id that several street lines share (messages and closures name ids)."""
    seen: dict[str, int] = {}
    for line in lines:
        seen[line.source_id] = seen.get(line.source_id, 0) + 1
    return [Finding("warning", sid, f"feature id '{sid}' is used by {n} street lines; messages and closures "
                                    "that name it cannot tell them apart",
                    "give every feature its own id") for sid, n in seen.items() if n > 1]


def _clean(lines, parent, u, v, lengths, geom_key, tol, findings):
    """Indices of the pieces to keep, after zero-length and duplicate removal.

    ``geom_key(i)`` gives a hashable description of piece i's shape in its
    stored direction (or None without geometry); duplicates compare it.
    """
    m = u.size
    keep = np.ones(m, bool)
    loops = np.flatnonzero(u == v)
    for i in loops.tolist():
        if lengths[i] <= max(tol, 1e-9):
            keep[i] = False
            findings.append(Finding("warning", lines[parent[i]].source_id,
                                    f"zero-length segment ({lengths[i]:.2f} m) dropped",
                                    "remove the degenerate line from the source data"))
        else:
            raise _self_loop(lines[parent[i]].source_id, float(lengths[i]))
    # duplicates: candidates share the unordered node pair; confirmed on shape, direction, length
    a = np.minimum(u, v)
    b = np.maximum(u, v)
    idx = np.flatnonzero(keep)
    order = idx[np.lexsort((idx, b[idx], a[idx]))]
    pa, pb = a[order], b[order]
    same_as_prev = np.zeros(order.size, bool)
    same_as_prev[1:] = (pa[1:] == pa[:-1]) & (pb[1:] == pb[:-1])
    if same_as_prev.any():
        starts = np.flatnonzero(~same_as_prev)
        bounds = np.append(starts, order.size)
        multi = np.flatnonzero(np.diff(bounds) > 1)
        for g in multi.tolist():
            members = order[bounds[g]:bounds[g + 1]].tolist()
            seen: dict = {}
            for i in members:  # members are in input order within the group
                ln = lines[parent[i]]
                key = _dup_key(ln, int(u[i]), int(v[i]), geom_key(i), float(lengths[i]))
                first = seen.get(key)
                if first is None:
                    seen[key] = i
                    continue
                keep[i] = False
                findings.append(Finding(
                    "warning", ln.source_id,
                    f"exact duplicate of feature '{lines[parent[first]].source_id}'; merged into it",
                    "delete the duplicated line from the source data"))
    return np.flatnonzero(keep)


def _dup_key(ln: RawLine, u: int, v: int, shape, length: float):
    """Hashable identity of a piece: ends, direction rule, shape, length (1 cm)."""
    if ln.service in CURB_SERVICES:  # the two curbs of one street share ends and shape but are not duplicates
        return (u, v, ln.service, shape, round(length, 2))
    if ln.oneway:
        return (u, v, True, shape, round(length, 2))
    if u > v:  # two-way: the same street drawn the other way round is a duplicate too
        shape = None if shape is None else tuple(reversed(shape))
        u, v = v, u
    return (u, v, False, shape, round(length, 2))


# ----------------------------------------------------------------------- no geometry
def _build_plain(lines, services, profile, findings, postings) -> Network:
    labels: dict[str, int] = {}
    m = len(lines)
    u = np.empty(m, np.int64)
    v = np.empty(m, np.int64)
    lengths = np.empty(m, np.float64)
    for i, ln in enumerate(lines):
        if ln.from_label is None or ln.to_label is None or ln.length_m is None:
            raise InputError(f"feature '{ln.source_id}' has neither coordinates nor from/to/length",
                             "give every edge its two end labels and its length in metres")
        length = float(ln.length_m)
        if not np.isfinite(length) or length <= 0:
            raise InputError(f"feature '{ln.source_id}': length {ln.length_m!r} m is not a positive number",
                             "give the length in metres, greater than zero")
        u[i] = labels.setdefault(ln.from_label, len(labels))
        v[i] = labels.setdefault(ln.to_label, len(labels))
        lengths[i] = length
    parent = np.arange(m)
    keep = _clean(lines, parent, u, v, lengths, lambda i: None, 0.0, findings)
    n = len(labels)
    nan = np.full(n, np.nan)
    # No coordinates: lay the nodes out from path lengths, for grouping only (not maps, not turns).
    x, y = path_layout(n, u[keep], v[keep], lengths[keep])
    return _finish(lines, services, keep, u[keep], v[keep], [None] * keep.size, lengths[keep],
                   nan, nan.copy(), x, y, list(labels), False, (0.0, 0.0), findings, postings)


# -------------------------------------------------------------------- with geometry
def _build_geometric(lines, services, profile: Profile, findings, postings) -> Network:
    import shapely
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components
    from scipy.spatial import cKDTree

    tol = float(profile.snap_tolerance_m)
    m0 = len(lines)
    counts = np.fromiter((0 if ln.coords is None else len(ln.coords) for ln in lines), np.int64, m0)
    short = np.flatnonzero(counts < 2)
    if short.size:
        ln = lines[int(short[0])]
        raise InputError(f"feature '{ln.source_id}' has fewer than 2 positions",
                         "a street line needs at least a start and an end position")
    pts = np.concatenate([np.asarray(ln.coords, np.float64)[:, :2] for ln in lines])
    off = np.concatenate([[0], np.cumsum(counts)])
    first_pt, last_pt = off[:-1], off[1:] - 1
    origin = (round(float(pts[:, 0].mean()), 4), round(float(pts[:, 1].mean()), 4))

    # 1. snap ends: exact duplicates first, then pairs within the tolerance
    ends = np.empty((2 * m0, 2))
    ends[0::2] = pts[first_pt]
    ends[1::2] = pts[last_pt]
    uniq, inv = np.unique(ends, axis=0, return_inverse=True)
    inv = inv.reshape(-1)
    ux, uy = project(uniq[:, 0], uniq[:, 1], origin)
    if tol > 0 and uniq.shape[0] > 1:
        pairs = cKDTree(np.column_stack([ux, uy])).query_pairs(tol, output_type="ndarray")
    else:
        pairs = np.zeros((0, 2), np.int64)
    k = uniq.shape[0]
    graph = coo_matrix((np.ones(pairs.shape[0]), (pairs[:, 0], pairs[:, 1])), shape=(k, k))
    _, comp = connected_components(graph, directed=False)
    comp_of_end = comp[inv]
    _, first_end = np.unique(comp_of_end, return_index=True)  # first appearance of each group
    order = np.argsort(first_end, kind="stable")
    node_of_comp = np.empty(order.size, np.int64)
    node_of_comp[order] = np.arange(order.size)
    node_of_end = node_of_comp[comp_of_end]
    node_first_end = first_end[order]
    node_ll = ends[node_first_end]
    n = node_ll.shape[0]
    moved = np.flatnonzero(np.any(ends != node_ll[node_of_end], axis=1))
    if moved.size:
        srcs = [lines[i].source_id for i in np.unique(moved // 2)[:5].tolist()]
        n_feat = np.unique(moved // 2).size
        findings.append(Finding(
            "warning", srcs[0],
            f"{moved.size} line end(s) in {n_feat} feature(s) were joined to a nearby end within "
            f"{tol:g} m (first: {', '.join(srcs)})",
            "fine for small drawing gaps; lower network.snap_tolerance_m if distinct streets were joined"))
    node_x, node_y = project(node_ll[:, 0], node_ll[:, 1], origin)
    labels = [""] * n
    for node, e in enumerate(node_first_end.tolist()):
        ln = lines[e // 2]
        lab = ln.from_label if e % 2 == 0 else ln.to_label
        if lab:
            labels[node] = lab
    # glue the line ends exactly onto their nodes
    pts[first_pt] = node_ll[node_of_end[0::2]]
    pts[last_pt] = node_ll[node_of_end[1::2]]
    u0 = node_of_end[0::2]
    v0 = node_of_end[1::2]

    # 2. split a line where another line's end touches its inside
    splits: dict[int, list[tuple[float, int]]] = {}
    if profile.split_at_touch:
        reach = max(tol, _MIN_TOUCH_M)
        px, py = project(pts[:, 0], pts[:, 1], origin)
        line_of_pt = np.repeat(np.arange(m0), counts)
        geoms = shapely.linestrings(np.column_stack([px, py]), indices=line_of_pt)
        nodes_pt = shapely.points(np.column_stack([node_x, node_y]))
        tree = shapely.STRtree(geoms)
        pi, li = tree.query(nodes_pt, predicate="dwithin", distance=reach)
        ok = (pi != u0[li]) & (pi != v0[li])
        pi, li = pi[ok], li[ok]
        if pi.size:
            loc = shapely.line_locate_point(geoms[li], nodes_pt[pi])
            total = shapely.length(geoms[li])
            inside = (loc > reach) & (loc < total - reach)
            pi, li, loc = pi[inside], li[inside], loc[inside]
            for node, line, at in zip(pi.tolist(), li.tolist(), loc.tolist()):
                splits.setdefault(line, []).append((at, node))
            cum = None
            if splits:
                seglen = np.hypot(np.diff(px), np.diff(py))
                seglen[last_pt[:-1]] = 0.0  # no step from one line's end to the next line's start
                cum = np.concatenate([[0.0], np.cumsum(seglen)])

    # assemble pieces in input order
    parent_l: list[int] = []
    u_l: list[int] = []
    v_l: list[int] = []
    coords: list[np.ndarray] = []
    for i in range(m0):
        a, b = int(off[i]), int(off[i + 1])
        if i not in splits:
            parent_l.append(i)
            u_l.append(int(u0[i]))
            v_l.append(int(v0[i]))
            coords.append(pts[a:b])
            continue
        d = cum[a:b] - cum[a]
        cuts = sorted(set(splits[i]))
        prev_node, prev_at = int(u0[i]), 0.0
        for at, node in cuts + [(float(d[-1]) + 1.0, int(v0[i]))]:
            if node == prev_node:
                continue
            sel = (d > prev_at) & (d < at)  # the drawn vertices strictly between the two cuts
            sel[0] = sel[-1] = False
            inner = pts[a:b][sel]
            piece = np.vstack([node_ll[prev_node], inner, node_ll[node]])
            parent_l.append(i)
            u_l.append(prev_node)
            v_l.append(node)
            coords.append(piece)
            prev_node, prev_at = node, at
    parent = np.asarray(parent_l, np.int64)
    u = np.asarray(u_l, np.int64)
    v = np.asarray(v_l, np.int64)
    lengths = geodesic_lengths(coords)

    rounded = [None] * len(coords)

    def shape(i):
        if rounded[i] is None:
            rounded[i] = tuple(map(tuple, np.round(coords[i], 7).tolist()))
        return rounded[i]

    keep = _clean(lines, parent, u, v, lengths, shape, tol, findings)
    return _finish(lines, services, parent[keep], u[keep], v[keep], [coords[i] for i in keep.tolist()],
                   lengths[keep], node_ll[:, 0].copy(), node_ll[:, 1].copy(), node_x, node_y, labels,
                   True, origin, findings, postings)

