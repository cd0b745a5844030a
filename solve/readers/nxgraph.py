"""Street graphs from the Python ecosystem: a networkx MultiDiGraph, or a GraphML file of one.

The shape read is the common one for OpenStreetMap street graphs in Python:

* nodes carry ``x`` (longitude) and ``y`` (latitude) in WGS84 degrees;
* each drivable direction of a street is a directed edge ``u -> v``; a two-way
  street is two edges, ``u -> v`` and ``v -> u``, with ``oneway`` false; a one-way
  street is one edge in its legal direction with ``oneway`` true;
* edge attributes: ``length`` (metres; not used, lengths are recomputed
  geodesically from the geometry), ``oneway``, ``highway`` (the road class),
  ``name``, optional ``osmid`` and an optional shapely ``geometry`` (a LineString
  from ``u`` to ``v``, whose ends are set exactly on the two nodes; without it the
  edge is the straight line between its nodes).
  Optional posted sweeping times ``posted``, ``posted:left``, ``posted:right``
  (the GeoJSON property names and grammar, :mod:`crewcut.solve.calendar.postings`),
  left and right as seen along ``u -> v``; of a two-way street's pair of edges
  the one read first speaks (NaN, as a data frame writes a missing value, counts as absent).
  ``highway``, ``name`` and ``osmid`` may be lists (a simplified edge merging
  several ways): the first ``highway`` and ``osmid`` are kept and names are joined
  with "; ".

The two edges of a two-way street become one two-way segment: an edge whose
reverse edge has the same drawn line (reversed) is read once. Every segment's
source id is ``way/OSMID`` when the edge has an ``osmid`` (``edge/U-V-KEY``
otherwise) and its end nodes are labelled ``node/ID``. The graph's topology is
explicit, so, as for OpenStreetMap files, no snapping by distance and no
split-at-touch is applied.

In a GraphML file every attribute is text: ``x``, ``y`` are read as numbers,
``oneway`` as true/false, ``geometry`` as WKT (shapely), list-valued attributes
written as Python list literals (``"['Elm Street', 'Oak Row']"``) as lists.
"""
from __future__ import annotations

import ast
import dataclasses
import math
from pathlib import Path

import numpy as np

from crewcut.solve.calendar.postings import POSTED_KEYS, read_posted
from crewcut.solve.errors import InputError
from crewcut.solve.network.model import Network, RawLine
from crewcut.solve.network.repair import build_network
from crewcut.solve.profile import Profile

_TRUE = ("true", "yes", "1")
_FALSE = ("false", "no", "0", "")


def _listed(value):
    """A list attribute as a list; a GraphML text "['a', 'b']" as its list; anything else as one item."""
    if isinstance(value, (list, tuple)):
        return list(value)
    if isinstance(value, str) and value.startswith("[") and value.endswith("]"):
        try:
            parsed = ast.literal_eval(value)
        except (ValueError, SyntaxError):
            return [value]
        return list(parsed) if isinstance(parsed, (list, tuple)) else [value]
    return [] if value is None else [value]


def _flag(value, where: str) -> bool:
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    text = str(value).strip().lower() if value is not None else ""
    if text in _TRUE:
        return True
    if text in _FALSE:
        return False
    raise InputError(f"{where}: oneway {value!r} is not true or false", "give oneway as true or false")


def _number(value, what: str, where: str) -> float:
    try:
        x = float(value)
    except (TypeError, ValueError):
        x = math.nan
    if isinstance(value, bool) or not math.isfinite(x):
        raise InputError(f"{where}: {what} {value!r} is not a number",
                         "nodes need x (longitude) and y (latitude) in WGS84 degrees")
    return x


def _node_xy(graph, node, where: str) -> tuple[float, float]:
    data = graph.nodes[node]
    if "x" not in data or "y" not in data:
        raise InputError(f"{where}: node {node!r} has no x/y", "every node needs x (longitude) and y (latitude)")
    x, y = _number(data["x"], "x", f"{where}: node {node!r}"), _number(data["y"], "y", f"{where}: node {node!r}")
    if not (-180 <= x <= 180 and -90 <= y <= 90):
        raise InputError(f"{where}: node {node!r} at ({x:g}, {y:g}) is not a lon/lat position",
                         "the graph must be in WGS84 degrees (unprojected); reproject it first")
    return x, y


def _coords(data: dict, a: tuple[float, float], b: tuple[float, float], where: str) -> np.ndarray:
    geom = data.get("geometry")
    if geom is None:
        return np.array([a, b], dtype=float)
    if isinstance(geom, str):
        import shapely.wkt

        try:
            geom = shapely.wkt.loads(geom)
        except Exception:  # shapely raises its own error types for bad WKT
            raise InputError(f"{where}: geometry is not WKT text", "write geometry as a WKT LINESTRING") from None
    if getattr(geom, "geom_type", None) != "LineString":
        raise InputError(f"{where}: geometry is a {getattr(geom, 'geom_type', type(geom).__name__)}, not a LineString")
    xy = np.asarray(geom.coords, dtype=float)[:, :2].copy()
    if xy.shape[0] < 2 or not np.isfinite(xy).all():
        raise InputError(f"{where}: geometry needs two or more finite positions")
    if np.hypot(*(xy[0] - b)) < np.hypot(*(xy[0] - a)):  # drawn from v to u: turn it round
        xy = xy[::-1].copy()
    # The edge joins nodes u and v (the graph's topology is explicit): its line ends exactly there,
    # whatever rounding the geometry went through.
    xy[0], xy[-1] = a, b
    return xy


def _key(coords: np.ndarray) -> tuple:
    return tuple(np.round(coords, 7).ravel().tolist())


def graph_to_lines(graph, source: str = "the graph") -> list[RawLine]:
    """The street lines of a networkx (Multi)DiGraph of the shape described in the module notes."""
    import networkx as nx

    if not isinstance(graph, (nx.DiGraph, nx.MultiDiGraph)):
        raise InputError(f"{source}: a {type(graph).__name__} is not a directed street graph",
                         "give a networkx MultiDiGraph (or DiGraph): one edge per drivable direction")
    multi = graph.is_multigraph()
    edges = graph.edges(keys=True, data=True) if multi else ((u, v, 0, d) for u, v, d in graph.edges(data=True))
    seen_two_way: set[tuple] = set()
    lines: list[RawLine] = []
    for u, v, key, data in edges:
        where = f"{source}: edge {u!r} -> {v!r}" + (f" (key {key!r})" if multi else "")
        if u == v:
            raise InputError(f"{where} is a self-loop", "split the loop into two edges at a middle node")
        coords = _coords(data, _node_xy(graph, u, source), _node_xy(graph, v, source), where)
        oneway = _flag(data.get("oneway", False), where)
        if not oneway:
            fwd, back = _key(coords), _key(coords[::-1])
            if back in seen_two_way:  # the other direction of a two-way street already read
                continue
            seen_two_way.add(fwd)
        ids = _listed(data.get("osmid"))
        highway = _listed(data.get("highway"))
        names = [str(n) for n in _listed(data.get("name")) if n is not None and str(n) != "nan"]
        posted = read_posted({k: data.get(k) for k in POSTED_KEYS.values()
                              if not (isinstance(data.get(k), float) and math.isnan(data[k]))}, where)
        lines.append(RawLine(
            source_id=f"way/{ids[0]}" if ids else f"edge/{u}-{v}-{key}", coords=coords,
            name="; ".join(dict.fromkeys(names)), road_class=str(highway[0]) if highway else "",
            oneway=1 if oneway else 0, from_label=f"node/{u}", to_label=f"node/{v}", posted=posted))
    return lines


def network_from_graph(graph, profile: Profile, source: str = "the graph") -> Network:
    """A repaired :class:`~crewcut.solve.network.model.Network` from a networkx street graph.

    Parameters
    ----------
    graph:
        A networkx ``MultiDiGraph`` (or ``DiGraph``) of the common OpenStreetMap-graph
        shape: node attributes ``x``, ``y`` (lon, lat); edge attributes ``oneway``,
        ``highway``, ``name``, optional ``osmid`` and shapely ``geometry``.
    profile:
        The work profile (service per road class, one-way handling).
    source:
        A name for messages and the plan file.

    Examples
    --------
    >>> import networkx as nx
    >>> from crewcut.solve.profile import Profile
    >>> g = nx.MultiDiGraph()
    >>> g.add_node(1, x=-30.500, y=45.200); g.add_node(2, x=-30.499, y=45.200)
    >>> _ = g.add_edge(1, 2, oneway=False, highway="residential", name="Elm Row")
    >>> _ = g.add_edge(2, 1, oneway=False, highway="residential", name="Elm Row")
    >>> net = network_from_graph(g, Profile())
    >>> net.n_segments, net.seg_name[0], round(float(net.seg_length[0]), 1)
    (1, 'Elm Row', 78.6)
    """
    lines = graph_to_lines(graph, source)
    exact = dataclasses.replace(profile, snap_tolerance_m=0.0, split_at_touch=False)
    return build_network(lines, exact, has_geometry=True, source=source)


def read_graphml(path: str | Path, profile: Profile) -> Network:
    """Read a GraphML street graph (as networkx writes it) into a :class:`~crewcut.solve.network.model.Network`."""
    import networkx as nx

    path = Path(path)
    try:
        graph = nx.read_graphml(path, force_multigraph=True)
    except (nx.NetworkXError, ValueError, KeyError, SyntaxError) as exc:
        raise InputError(f"{path}: not a readable GraphML street graph ({exc})",
                         "write the graph with networkx.write_graphml") from None
    except OSError as exc:
        raise InputError(f"{path}: cannot be read ({exc.strerror or exc})") from None
    if not graph.is_directed():
        raise InputError(f"{path}: the graph is undirected", "give a directed graph: one edge per drivable direction")
    return network_from_graph(graph, profile, source=str(path))
