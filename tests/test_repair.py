"""Topology repair: snapping, split at touch, duplicates, zero length, self-loops, determinism.

Positions are placed at exact metre offsets with pyproj's Geod (reference
library), so the expected distances and lengths come from outside crewcut.
"""
from __future__ import annotations

import dataclasses

import networkx as nx
import numpy as np
import pytest

from helpers.geojson import GEOD, collection, feature, grid, offset
from crewcut.solve.errors import InputError
from crewcut.solve.network.model import SERVICE_BOTH_SIDES, SERVICE_NONE, SERVICE_ONE_PASS
from crewcut.solve.profile import Profile
from crewcut.solve.readers.geojson import features_to_lines
from crewcut.solve.network.repair import build_network

PROFILE = Profile()  # built-in defaults: snap 1 m, split at touch on


def build(doc, profile=PROFILE):
    return build_network(features_to_lines(doc, "test.geojson"), profile)


def geod_len(coords) -> float:
    c = np.asarray(coords)
    return GEOD.line_length(c[:, 0], c[:, 1])  # reference library: pyproj


@pytest.mark.parametrize("gap_m,expected_nodes", [(0.0, 3), (0.4, 3), (0.9, 3), (1.5, 4), (5.0, 4)])
def test_ends_within_tolerance_become_one_node(gap_m, expected_nodes):
    a = feature([offset(0, 0), offset(100, 0)], id="a")
    b = feature([offset(100 + gap_m, 0), offset(100 + gap_m, 80)], id="b")
    net = build(collection([a, b]))
    assert net.n_nodes == expected_nodes  # tolerance 1 m: the Profile default
    if expected_nodes == 3:
        assert net.seg_v[0] == net.seg_u[1]
        assert any("joined" in f.message for f in net.findings) == (gap_m > 0)


def test_snap_tolerance_is_configurable():
    a = feature([offset(0, 0), offset(100, 0)], id="a")
    b = feature([offset(103, 0), offset(103, 80)], id="b")
    assert build(collection([a, b])).n_nodes == 4
    wide = dataclasses.replace(PROFILE, snap_tolerance_m=5.0)
    assert build(collection([a, b]), wide).n_nodes == 3


def test_end_touching_the_middle_splits_the_other_line():
    main = feature([offset(0, 0), offset(60, 0), offset(200, 0)], id="main")
    side = feature([offset(120, 0.3), offset(120, 90)], id="side")  # 0.3 m off the main street
    net = build(collection([main, side]))
    assert net.n_segments == 3
    assert net.seg_source == ["main", "main", "side"]
    # the split keeps the length: both pieces add up to the original line (pyproj, 1 cm)
    assert net.seg_length[0] + net.seg_length[1] == pytest.approx(geod_len(main["geometry"]["coordinates"]), abs=0.01)
    assert net.seg_length[0] == pytest.approx(120.0, abs=0.05)
    assert net.seg_v[0] == net.seg_u[1] == net.seg_u[2]
    # the drawn vertex at 60 m stays in the first piece
    assert len(net.seg_coords[0]) == 3 and len(net.seg_coords[1]) == 2
    # networkx agrees the three segments meet at one node of degree 3
    g = nx.Graph(net.to_networkx().to_undirected())
    assert sorted(d for _, d in g.degree()) == [1, 1, 1, 3]


def test_split_at_touch_can_be_switched_off():
    main = feature([offset(0, 0), offset(200, 0)], id="main")
    side = feature([offset(120, 0.0), offset(120, 90)], id="side")
    off = dataclasses.replace(PROFILE, split_at_touch=False)
    assert build(collection([main, side]), off).n_segments == 2
    assert build(collection([main, side])).n_segments == 3


def test_several_touches_split_in_drawn_order():
    main = feature([offset(0, 0), offset(300, 0)], id="main", oneway="yes")
    sides = [feature([offset(x, 0), offset(x, 50)], id=f"s{x}") for x in (200, 100)]
    net = build(collection([main, *sides]))
    assert net.seg_source[:3] == ["main"] * 3
    np.testing.assert_allclose(net.seg_length[:3], [100, 100, 100], atol=0.05)
    assert net.seg_oneway[:3].all()
    assert net.seg_v[0] == net.seg_u[1] and net.seg_v[1] == net.seg_u[2]


def test_exact_duplicates_are_merged_with_a_warning():
    a = feature([offset(0, 0), offset(100, 0)], id="a")
    dup = feature([offset(0, 0), offset(100, 0)], id="dup")
    rev = feature([offset(100, 0), offset(0, 0)], id="rev")  # same two-way street drawn backwards
    net = build(collection([a, dup, rev]))
    assert net.n_segments == 1 and net.seg_source == ["a"]
    warned = {f.feature for f in net.findings if "duplicate" in f.message}
    assert warned == {"dup", "rev"}


def test_opposite_one_ways_are_not_duplicates():
    a = feature([offset(0, 0), offset(100, 0)], id="a", oneway="yes")
    b = feature([offset(100, 0), offset(0, 0)], id="b", oneway="yes")
    net = build(collection([a, b]))
    assert net.n_segments == 2 and not net.findings


def test_same_ends_different_shape_are_kept():
    a = feature([offset(0, 0), offset(100, 0)], id="a")
    bow = feature([offset(0, 0), offset(50, 30), offset(100, 0)], id="bow")
    net = build(collection([a, bow]))
    assert net.n_segments == 2


def test_zero_length_segment_dropped_with_warning():
    a = feature([offset(0, 0), offset(100, 0)], id="a")
    dot = feature([offset(100, 0), offset(100, 0)], id="dot")
    net = build(collection([a, dot]))
    assert net.seg_source == ["a"]
    assert [f.feature for f in net.findings if "zero-length" in f.message] == ["dot"]


def test_self_loop_is_an_error_naming_the_feature():
    ring = feature([offset(0, 0), offset(50, 0), offset(50, 50), offset(0, 0.2)], id="ring")
    with pytest.raises(InputError, match="'ring' is a self-loop"):
        build(collection([feature([offset(0, 0), offset(-80, 0)], id="x"), ring]))


def test_empty_network_is_an_error():
    with pytest.raises(InputError, match="empty"):
        build(collection([]))


def test_lengths_are_geodesic():
    doc = grid(4, 3, 150.0)
    net = build(doc)
    ref = [geod_len(f["geometry"]["coordinates"]) for f in doc["features"]]  # reference library: pyproj
    np.testing.assert_allclose(net.seg_length, ref, rtol=1e-9)


def test_service_resolution_from_line_or_profile():
    prof = dataclasses.replace(PROFILE, default_service={"default": "both_sides", "service": "none"})
    doc = collection([
        feature([offset(0, 0), offset(100, 0)], id="a", **{"class": "residential"}),
        feature([offset(100, 0), offset(200, 0)], id="b", **{"class": "service"}),
        feature([offset(200, 0), offset(300, 0)], id="c", service="one_pass", **{"class": "service"}),
    ])
    net = build(doc, prof)
    assert net.seg_service.tolist() == [SERVICE_BOTH_SIDES, SERVICE_NONE, SERVICE_ONE_PASS]


def test_same_input_same_network_and_order():
    doc = grid(5, 4)
    a, b = build(doc), build(doc)
    assert a.fingerprint == b.fingerprint
    np.testing.assert_array_equal(a.node_lon, b.node_lon)
    # node ids follow first appearance: the first line's ends are nodes 0 and 1
    assert (a.seg_u[0], a.seg_v[0]) == (0, 1)
    assert a.seg_source == [f["properties"]["id"] for f in doc["features"]]


def test_grid_topology_matches_networkx_grid():
    # networkx's grid_2d_graph is the reference for a lattice's size and degrees
    net = build(grid(5, 4))
    ref = nx.grid_2d_graph(4, 5)
    g = nx.Graph(net.to_networkx().to_undirected())
    assert g.number_of_nodes() == ref.number_of_nodes()
    assert g.number_of_edges() == ref.number_of_edges()
    assert sorted(d for _, d in g.degree()) == sorted(d for _, d in ref.degree())
    assert nx.is_isomorphic(g, ref)


def test_plain_network_without_geometry():
    from crewcut.solve.network.model import RawLine

    lines = [RawLine("r1", None, from_label="A", to_label="B", length_m=120.0),
             RawLine("r2", None, from_label="B", to_label="C", length_m=80.0, oneway=1),
             RawLine("r3", None, from_label="B", to_label="A", length_m=120.0)]  # duplicate of r1
    net = build_network(lines, PROFILE, has_geometry=False)
    assert not net.has_geometry and np.isnan(net.node_lon).all()
    assert net.node_label == ["A", "B", "C"]
    assert net.seg_source == ["r1", "r2"]
    assert [f.feature for f in net.findings] == ["r3"]
