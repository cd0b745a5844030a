"""Readers: GeoJSON properties, CSV edge lists, OpenStreetMap XML, dispatch on extension.

Expected values are hand counts of the small invented inputs written here, and
lengths from pyproj's Geod (reference library).
"""
from __future__ import annotations

import numpy as np
import pytest

from helpers.geojson import GEOD, collection, feature, grid, offset, write
from crewcut.solve.errors import InputError
from crewcut.solve.network.model import SERVICE_BOTH_SIDES, SERVICE_EACH_DIRECTION, SERVICE_NONE, SERVICE_ONE_PASS
from crewcut.solve.profile import Profile
from crewcut.solve.readers import file_kind, read_network

PROFILE = Profile()


# ------------------------------------------------------------------ GeoJSON
def test_geojson_properties(tmp_path):
    doc = collection([
        feature([offset(0, 0), offset(100, 0)], id="w1", name="Ashlar Street", oneway="yes",
                service="one_pass", speed_kmh=20, **{"class": "secondary"}),
        feature([offset(100, 0), offset(100, 100)], id=7, oneway="-1", closed=True),
        feature([offset(100, 100), offset(0, 100)], oneway=False, service="each_direction"),
        feature([offset(0, 100), offset(0, 0)], oneway=True, service="none"),
    ])
    net = read_network(write(tmp_path / "t.geojson", doc), PROFILE)
    assert net.seg_source == ["w1", "7", "2", "3"]  # default id: the feature index
    assert net.seg_name[0] == "Ashlar Street" and net.seg_class[0] == "secondary"
    assert net.seg_oneway.tolist() == [True, True, False, True]
    assert net.seg_service.tolist() == [SERVICE_ONE_PASS, SERVICE_BOTH_SIDES, SERVICE_EACH_DIRECTION, SERVICE_NONE]
    assert net.seg_speed_kmh[0] == 20 and np.isnan(net.seg_speed_kmh[1:]).all()
    assert net.seg_closed.tolist() == [False, True, False, False]


def test_oneway_minus_one_reverses_the_line(tmp_path):
    a, b = offset(0, 0), offset(0, 100)
    net = read_network(write(tmp_path / "t.json", collection([feature([a, b], id="r", oneway=-1)])), PROFILE)
    # stored in its legal direction: from the drawn end to the drawn start
    np.testing.assert_allclose(net.seg_coords[0], [b, a])
    assert net.seg_oneway[0]
    assert net.node_lat[net.seg_u[0]] > net.node_lat[net.seg_v[0]]


def test_multilinestring_parts_become_lines(tmp_path):
    parts = [[offset(0, 0), offset(100, 0)], [offset(300, 0), offset(400, 0), offset(400, 50)]]
    doc = collection([{"type": "Feature", "properties": {"id": "m", "oneway": "yes"},
                       "geometry": {"type": "MultiLineString", "coordinates": parts}}])
    net = read_network(write(tmp_path / "m.geojson", doc), PROFILE)
    assert net.seg_source == ["m/part1", "m/part2"]
    assert net.seg_oneway.all()
    ref = [GEOD.line_length([p[0] for p in c], [p[1] for p in c]) for c in parts]  # reference library: pyproj
    np.testing.assert_allclose(net.seg_length, ref, rtol=1e-9)


def test_third_coordinate_is_ignored(tmp_path):
    doc = collection([feature([offset(0, 0) + [12.5], offset(100, 0) + [13.0]], id="z")])
    net = read_network(write(tmp_path / "z.geojson", doc), PROFILE)
    assert net.seg_length[0] == pytest.approx(100.0, abs=1e-3)  # Geod placed the end 100 m east


@pytest.mark.parametrize("props,match", [
    ({"oneway": "sometimes"}, "unknown oneway value 'sometimes'"),
    ({"service": "twice"}, "unknown service value 'twice'"),
    ({"speed_kmh": -5}, "speed_kmh -5 is not a speed between 0.5 and 200 km/h"),
    ({"closed": "maybe"}, "closed 'maybe' is not true or false"),
])
def test_geojson_bad_properties_name_the_feature(tmp_path, props, match):
    doc = collection([feature([offset(0, 0), offset(100, 0)], id="bad7", **props)])
    with pytest.raises(InputError, match=match) as exc:
        read_network(write(tmp_path / "b.geojson", doc), PROFILE)
    assert "feature 'bad7'" in exc.value.message and exc.value.hint


def test_geojson_too_few_positions(tmp_path):
    doc = collection([feature([offset(0, 0)], id="stub")])
    with pytest.raises(InputError, match="feature 'stub': a line needs at least 2 positions"):
        read_network(write(tmp_path / "b.geojson", doc), PROFILE)


def test_feature_level_id_is_used(tmp_path):
    f = feature([offset(0, 0), offset(100, 0)])
    f["id"] = "top"
    assert read_network(write(tmp_path / "t.geojson", collection([f])), PROFILE).seg_source == ["top"]


def test_null_property_id_falls_back_to_the_feature_id(tmp_path):
    # RFC 7946 section 3.2: a Feature's identifier is its top-level "id"; a JSON null is no id at all.
    f = feature([offset(0, 0), offset(100, 0)], id=None)
    f["id"] = "top"
    g = feature([offset(100, 0), offset(200, 0)], id=None)
    net = read_network(write(tmp_path / "t.geojson", collection([f, g])), PROFILE)
    assert net.seg_source == ["top", "1"]  # the second falls back to its index, never "None"


# ----------------------------------------------------------------------- CSV
def test_csv_edge_list(tmp_path):
    path = tmp_path / "e.csv"
    path.write_text("from,to,length_m,oneway,name,service,class\n"
                    "A,B,120.5,no,Quarry Road,,residential\n"
                    "B,C,80,-1,,one_pass,\n"
                    "\n"
                    "C,A,95,yes,,none,service\n", encoding="utf-8")
    net = read_network(path, PROFILE)
    assert not net.has_geometry and np.isnan(net.node_lon).all() and np.isfinite(net.node_x).all()
    assert net.seg_source == ["row 2", "row 3", "row 5"]  # file line numbers
    assert net.node_label == ["A", "B", "C"]
    assert net.seg_length.tolist() == [120.5, 80.0, 95.0]
    assert net.node_label[net.seg_u[1]] == "C" and net.node_label[net.seg_v[1]] == "B"  # -1 reversed
    assert net.seg_oneway.tolist() == [False, True, True]
    assert net.seg_service.tolist() == [SERVICE_BOTH_SIDES, SERVICE_ONE_PASS, SERVICE_NONE]
    assert net.seg_name[0] == "Quarry Road"


def test_csv_id_column_and_minimal_header(tmp_path):
    path = tmp_path / "e.csv"
    path.write_text("id,from,to,length_m\nq1,1,2,10\nq2,2,3,20\n", encoding="utf-8")
    net = read_network(path, PROFILE)
    assert net.seg_source == ["q1", "q2"] and net.n_nodes == 3


# ------------------------------------------------------------- OpenStreetMap
# An invented OpenStreetMap XML file. Ways: 10 residential through nodes 1-2-3,
# 11 residential 3-4 oneway=-1, 12 a closed roundabout 5-6-7-5 touching way 13 at 5,
# 13 tertiary 3-5, 14 footway (not drivable), 15 service with access=private,
# 16 pedestrian area, 17 residential 2-8 with oneway=yes.
_OSM = """<?xml version="1.0" encoding="UTF-8"?>
<osm version="0.6" generator="hand">
{nodes}
 <way id="10"><nd ref="1"/><nd ref="2"/><nd ref="3"/><tag k="highway" v="residential"/><tag k="name" v="Flint Way"/></way>
 <way id="11"><nd ref="3"/><nd ref="4"/><tag k="highway" v="residential"/><tag k="oneway" v="-1"/></way>
 <way id="12"><nd ref="5"/><nd ref="6"/><nd ref="7"/><nd ref="5"/><tag k="highway" v="tertiary"/><tag k="junction" v="roundabout"/></way>
 <way id="13"><nd ref="3"/><nd ref="5"/><tag k="highway" v="tertiary"/></way>
 <way id="14"><nd ref="1"/><nd ref="4"/><tag k="highway" v="footway"/></way>
 <way id="15"><nd ref="4"/><nd ref="8"/><tag k="highway" v="service"/><tag k="access" v="private"/></way>
 <way id="16"><nd ref="1"/><nd ref="4"/><nd ref="8"/><nd ref="1"/><tag k="highway" v="residential"/><tag k="area" v="yes"/></way>
 <way id="17"><nd ref="2"/><nd ref="8"/><tag k="highway" v="residential"/><tag k="oneway" v="yes"/></way>
</osm>
"""
_POS = {1: (0, 0), 2: (100, 0), 3: (200, 0), 4: (200, -100), 5: (300, 0), 6: (340, 40), 7: (340, -40),
        8: (100, 100)}


def _osm_file(tmp_path):
    nodes = "\n".join(f' <node id="{k}" version="1" lat="{offset(*p)[1]:.7f}" lon="{offset(*p)[0]:.7f}"/>'
                      for k, p in _POS.items())
    path = tmp_path / "town.osm"
    path.write_text(_OSM.format(nodes=nodes), encoding="utf-8")
    return path


def test_osm_xml_ways_split_and_directions(tmp_path):
    net = read_network(_osm_file(tmp_path), PROFILE)
    # hand count: way 10 splits at node 2 (shared with 17): 2 pieces; 11: 1; 12 closed loop with one
    # junction (5): halved, 2 pieces; 13: 1; 17: 1. Ways 14, 15, 16 are not kept.
    assert sorted(set(net.seg_source)) == ["way/10", "way/11", "way/12", "way/13", "way/17"]
    assert net.seg_source.count("way/10") == 2 and net.seg_source.count("way/12") == 2
    assert net.n_segments == 7
    by = {s: i for i, s in reversed(list(enumerate(net.seg_source)))}
    label = net.node_label
    # oneway=-1: stored from node 4 to node 3
    i = by["way/11"]
    assert (label[net.seg_u[i]], label[net.seg_v[i]]) == ("node/4", "node/3") and net.seg_oneway[i]
    # the roundabout is one-way without a oneway tag; way 13 two-way; 17 one-way as drawn
    assert net.seg_oneway[[j for j, s in enumerate(net.seg_source) if s == "way/12"]].all()
    assert not net.seg_oneway[by["way/13"]] and net.seg_oneway[by["way/17"]]
    assert net.seg_name[by["way/10"]] == "Flint Way" and net.seg_class[by["way/13"]] == "tertiary"
    # the roundabout's length equals the geodesic ring length (reference library: pyproj)
    ring = [np.round(offset(*_POS[k]), 7) for k in (5, 6, 7, 5)]  # as written in the file
    total = sum(net.seg_length[j] for j, s in enumerate(net.seg_source) if s == "way/12")
    assert total == pytest.approx(GEOD.line_length([p[0] for p in ring], [p[1] for p in ring]), abs=0.01)


def test_osm_highway_list_comes_from_the_profile(tmp_path):
    import dataclasses

    only_tertiary = dataclasses.replace(PROFILE, osm_highways=("tertiary",))
    net = read_network(_osm_file(tmp_path), only_tertiary)
    assert sorted(set(net.seg_source)) == ["way/12", "way/13"]


# ------------------------------------------------------------------ dispatch
@pytest.mark.parametrize("name,kind", [("a.geojson", "geojson"), ("A.JSON", "geojson"), ("x.osm", "osm"),
                                       ("x.osm.pbf", "pbf"), ("x.pbf", "pbf"), ("e.csv", "csv")])
def test_file_kind(name, kind):
    assert file_kind(name) == kind


def test_unknown_extension_names_it_and_the_allowed_ones(tmp_path):
    path = tmp_path / "streets.shp"
    path.write_bytes(b"\0")
    with pytest.raises(InputError, match=r"extension '\.shp'") as exc:
        read_network(path, PROFILE)
    assert ".geojson" in exc.value.hint and ".osm.pbf" in exc.value.hint


def test_missing_file(tmp_path):
    with pytest.raises(InputError, match="not found"):
        read_network(tmp_path / "nowhere.geojson", PROFILE)


def test_grid_reads_the_same_from_geojson_and_csv(tmp_path):
    # the same lattice as a GeoJSON file and as a CSV edge list: same topology and lengths
    doc = grid(3, 3)
    g = read_network(write(tmp_path / "g.geojson", doc), PROFILE)
    rows = ["from,to,length_m"]
    for f in doc["features"]:
        c = f["geometry"]["coordinates"]
        length = GEOD.line_length([p[0] for p in c], [p[1] for p in c])  # reference library: pyproj
        rows.append(f"{c[0][0]:.7f} {c[0][1]:.7f},{c[-1][0]:.7f} {c[-1][1]:.7f},{length!r}")
    path = tmp_path / "g.csv"
    path.write_text("\n".join(rows) + "\n", encoding="utf-8")
    c = read_network(path, PROFILE)
    assert (c.n_nodes, c.n_segments) == (g.n_nodes, g.n_segments)
    np.testing.assert_array_equal(c.seg_u, g.seg_u)
    np.testing.assert_array_equal(c.seg_v, g.seg_v)
    np.testing.assert_allclose(c.seg_length, g.seg_length, rtol=1e-12)
