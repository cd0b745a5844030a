"""Street graphs from networkx (the common OpenStreetMap-graph shape) and GraphML files of them.

The graph is built here with networkx: a 4 x 3 grid near the invented town's
centre, every two-way street as two directed edges, two one-way streets as one
edge each, one street with a curved shapely geometry, one with a list of names,
and two parallel streets between the same pair of nodes. Checks against outside
references: the segment count against networkx's own count of streets (an edge
and its reverse with the same line are one street), lengths against pyproj's
geodesic (Karney) on each drawn line, and a GraphML round trip through
networkx.write_graphml.
"""
from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
from pyproj import Geod
from shapely.geometry import LineString

from crewcut.solve.errors import InputError
from crewcut.solve.profile import Profile
from crewcut.solve.readers import file_kind, read_network
from crewcut.solve.readers.nxgraph import network_from_graph

GEOD = Geod(ellps="WGS84")
LON0, LAT0, STEP = -30.5, 45.2, 0.001


def _grid() -> nx.MultiDiGraph:
    g = nx.MultiDiGraph(crs="epsg:4326")
    for i in range(4):
        for j in range(3):
            g.add_node(f"{i}{j}", x=LON0 + STEP * i, y=LAT0 + STEP * j)
    osmid = 100
    for i in range(4):
        for j in range(3):
            for di, dj in ((1, 0), (0, 1)):
                a, b = f"{i}{j}", f"{i + di}{j + dj}"
                if b not in g:
                    continue
                osmid += 1
                one_way = (a, b) in (("00", "10"), ("21", "22"))
                attrs = dict(osmid=osmid, highway="residential", name=f"Street {osmid}", oneway=one_way,
                             length=111.0)
                if (a, b) == ("11", "21"):  # a curved street with its own geometry, and a list of names
                    ax, ay, bx, by = g.nodes[a]["x"], g.nodes[a]["y"], g.nodes[b]["x"], g.nodes[b]["y"]
                    line = [(ax, ay), ((ax + bx) / 2, ay + STEP / 4), (bx, by)]
                    attrs.update(geometry=LineString(line), name=["Bend Lane", "Old Bend"])
                g.add_edge(a, b, **attrs)
                if not one_way:
                    back = dict(attrs)
                    if "geometry" in back:
                        back["geometry"] = LineString(list(attrs["geometry"].coords)[::-1])
                    g.add_edge(b, a, **back)
    # a second, different street between 01 and 02 (a loop road), both directions
    x, y = g.nodes["01"]["x"], g.nodes["01"]["y"]
    loop = LineString([(x, y), (x - STEP / 2, y + STEP / 2), (x, y + STEP)])
    g.add_edge("01", "02", osmid=900, highway="service", name="Loop Road", oneway=False, geometry=loop)
    g.add_edge("02", "01", osmid=900, highway="service", name="Loop Road", oneway=False,
               geometry=LineString(list(loop.coords)[::-1]))
    return g


def _streets(g: nx.MultiDiGraph) -> int:
    """Streets as networkx counts them: one-way edges, plus pairs of opposite two-way edges."""
    one = sum(1 for *_, d in g.edges(data=True) if d["oneway"])
    two = sum(1 for *_, d in g.edges(data=True) if not d["oneway"])
    return one + two // 2


def test_graph_becomes_a_network_with_one_segment_per_street():
    g = _grid()
    net = network_from_graph(g, Profile(), source="grid")
    assert net.n_segments == _streets(g) == 18
    assert int(net.seg_oneway.sum()) == 2
    assert net.n_nodes == g.number_of_nodes()
    # one-way segments run in the edge's direction: from node 00 to 10 and from 21 to 22
    ends = {(net.node_label[int(u)], net.node_label[int(v)]) for u, v in
            zip(net.seg_u[net.seg_oneway], net.seg_v[net.seg_oneway])}
    assert ends == {("node/00", "node/10"), ("node/21", "node/22")}
    names = set(net.seg_name)
    assert "Bend Lane; Old Bend" in names and "Loop Road" in names
    assert set(net.seg_source) >= {"way/900", "way/101"}


def test_lengths_are_geodesic_along_the_drawn_lines():
    g = _grid()
    net = network_from_graph(g, Profile())
    for s in range(net.n_segments):
        xy = np.asarray(net.seg_coords[s])
        expected = GEOD.line_length(xy[:, 0], xy[:, 1])  # pyproj's Karney geodesic
        assert net.seg_length[s] == pytest.approx(expected, rel=1e-9, abs=1e-6)


def test_graphml_round_trip_and_the_command_line(tmp_path, capsys):
    from crewcut.cli.main import main

    g = _grid()
    for *_, d in g.edges(data=True):
        if "geometry" in d:
            d["geometry"] = d["geometry"].wkt  # GraphML holds text; the common tools write WKT
        if isinstance(d["name"], list):
            d["name"] = str(d["name"])
    path = tmp_path / "streets.graphml"
    nx.write_graphml(g, path)
    assert file_kind(path) == "graphml"
    net = read_network(path, Profile())
    assert net.n_segments == 18 and "Bend Lane; Old Bend" in set(net.seg_name)
    before = path.read_bytes()
    assert main(["check", str(path)]) == 0
    assert main(["-q", "plan", str(path), "--crews", "2", "--depot=-30.5,45.2", "--out", str(tmp_path / "p"),
                 "--workers", "1"]) == 0
    assert main(["verify", str(tmp_path / "p" / "plan.json"), str(path)]) == 0
    assert path.read_bytes() == before


@pytest.mark.parametrize("edit, match", [
    (lambda g: g.add_node("00", x="far"), "node '00': x 'far' is not a number"),
    (lambda g: g.add_node("00", x=500000.0), "is not a lon/lat position"),
    (lambda g: nx.set_edge_attributes(g, {("00", "10", 0): "sometimes"}, "oneway"), "oneway 'sometimes'"),
    (lambda g: g.add_edge("00", "00", oneway=True), "is a self-loop"),
])
def test_bad_graphs_are_refused_with_the_place_named(edit, match):
    g = _grid()
    edit(g)
    with pytest.raises(InputError, match=match):
        network_from_graph(g, Profile(), source="grid")


def test_an_undirected_graph_is_refused():
    with pytest.raises(InputError, match="not a directed street graph"):
        network_from_graph(nx.Graph(_grid().to_undirected()), Profile())


def test_the_docstring_example_runs():
    import doctest

    import crewcut.solve.readers.nxgraph as module

    result = doctest.testmod(module)
    assert result.attempted > 0 and result.failed == 0
