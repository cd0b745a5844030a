"""The invented demo town: deterministic, the requested size, and plannable.

Every structural check rebuilds the street graph straight from the GeoJSON
coordinates (no project code in between) and asks a reference library:
networkx for connectivity, shapely for geometry.
"""
from __future__ import annotations

import json
import math
import tomllib
from collections import Counter
from pathlib import Path

import networkx as nx
import numpy as np
import pytest
import shapely
from shapely.geometry import LineString

from crewcut.demo import towngen
from crewcut.solve.errors import InputError

ROOT = Path(__file__).resolve().parent.parent
EXAMPLE = ROOT / "examples" / "tallowmere.geojson"
EXAMPLE_CONFIG = ROOT / "examples" / "tallowmere.toml"


@pytest.fixture(scope="module")
def town2k() -> dict:
    return towngen.generate_town(2_000, seed=0)


def _node(c) -> tuple[float, float]:
    return (c[0], c[1])


def drivable_digraph(town: dict) -> nx.DiGraph:
    """Legal driving directions, read the way OpenStreetMap defines ``oneway``.

    ``oneway=yes``: only in the drawn direction; ``oneway=-1``: only against it;
    anything else two-way (OpenStreetMap wiki, Key:oneway).
    """
    g = nx.DiGraph()
    for f in town["features"]:
        c = f["geometry"]["coordinates"]
        a, b = _node(c[0]), _node(c[-1])
        ow = f["properties"].get("oneway")
        if ow == "yes":
            g.add_edge(a, b)
        elif ow == "-1":
            g.add_edge(b, a)
        else:
            g.add_edge(a, b)
            g.add_edge(b, a)
    return g


def undirected(town: dict, skip=lambda f: False) -> nx.MultiGraph:
    g = nx.MultiGraph()
    for f in town["features"]:
        if skip(f):
            continue
        c = f["geometry"]["coordinates"]
        g.add_edge(_node(c[0]), _node(c[-1]))
    return g


# ------------------------------------------------------------------ determinism
def test_same_seed_same_bytes_other_seed_other_town():
    a = towngen.dumps_town(towngen.generate_town(600, seed=3))
    b = towngen.dumps_town(towngen.generate_town(600, seed=3))
    c = towngen.dumps_town(towngen.generate_town(600, seed=4))
    assert a == b
    assert a != c


def test_write_town_writes_the_generated_text(tmp_path):
    path = towngen.write_town(tmp_path / "sub" / "t.geojson", 400, seed=1)
    assert path.read_text(encoding="utf-8") == towngen.dumps_town(towngen.generate_town(400, seed=1))
    assert [p.name for p in path.parent.iterdir()] == ["t.geojson"]  # no temporary file left


# ------------------------------------------------------------------------- size
@pytest.mark.parametrize("n", [200, 750, 2_000, 12_000])
def test_size_close_to_request(n):
    town = towngen.generate_town(n, seed=0)
    # each feature is one piece between intersections; a reader that splits lines at
    # shared vertices finds the same count when no vertex is shared mid-line
    assert abs(len(town["features"]) - n) <= 0.02 * n
    ends = Counter()
    inner = set()
    for f in town["features"]:
        c = f["geometry"]["coordinates"]
        ends[_node(c[0])] += 1
        ends[_node(c[-1])] += 1
        inner.update(_node(p) for p in c[1:-1])
    assert not inner & set(ends), "a street passes through another street's end without ending there"


@pytest.mark.parametrize("bad", [0, 199, 2_000_001, 1.5, "100", True, -3])
def test_bad_sizes_are_refused_clearly(bad):
    with pytest.raises(InputError, match="segments"):
        towngen.generate_town(bad)


def test_bad_seed_is_refused_clearly():
    with pytest.raises(InputError, match="seed"):
        towngen.generate_town(500, seed=-1)


# ------------------------------------------------------------------- structure
@pytest.mark.parametrize("n,seed", [(300, 0), (2_000, 0), (2_000, 7), (8_000, 2)])
def test_drivable_graph_is_strongly_connected(n, seed):
    g = drivable_digraph(towngen.generate_town(n, seed=seed))
    # reference: networkx's strong connectivity (Tarjan's algorithm)
    assert nx.is_strongly_connected(g)


def test_river_has_few_bridges_and_they_are_the_only_crossings(town2k):
    bridges = [f for f in town2k["features"] if f["properties"].get("bridge") == "yes"]
    assert 2 <= len(bridges) <= 10
    river = LineString(town2k["town"]["river"]["coordinates"])
    lines = [LineString(f["geometry"]["coordinates"]) for f in town2k["features"]]
    # reference: shapely's intersection test against the river's centre line
    crossing = {f["id"] for f, hit in zip(town2k["features"], shapely.intersects(lines, river)) if hit}
    assert crossing == {f["id"] for f in bridges}
    # without its bridges the town falls apart into two big banks
    g = undirected(town2k, skip=lambda f: f["properties"].get("bridge") == "yes")
    parts = sorted((len(c) for c in nx.connected_components(g)), reverse=True)
    n = undirected(town2k).number_of_nodes()
    assert len(parts) >= 2 and parts[1] >= 0.1 * n
    assert nx.is_connected(undirected(town2k))


def test_streets_meet_only_at_shared_ends(town2k):
    feats = town2k["features"]
    lines = [LineString(f["geometry"]["coordinates"]) for f in feats]
    tree = shapely.STRtree(lines)
    # reference: shapely's STRtree 'intersects' predicate over all pairs of streets
    left, right = tree.query(lines, predicate="intersects")
    for i, j in zip(left.tolist(), right.tolist()):
        if i >= j:
            continue
        ci, cj = feats[i]["geometry"]["coordinates"], feats[j]["geometry"]["coordinates"]
        shared = {_node(ci[0]), _node(ci[-1])} & {_node(cj[0]), _node(cj[-1])}
        assert shared, f"{feats[i]['id']} and {feats[j]['id']} cross without an intersection"
        inter = lines[i].intersection(lines[j])
        pts = {(p.x, p.y) for p in getattr(inter, "geoms", [inter])}
        assert pts <= shared, f"{feats[i]['id']} and {feats[j]['id']} touch away from their shared end"


def test_town_has_dead_ends_one_ways_curves_and_lanes(town2k):
    g = undirected(town2k)
    assert sum(1 for _, d in g.degree() if d == 1) >= 20  # cul-de-sacs and cut streets
    props = [f["properties"] for f in town2k["features"]]
    ow = Counter(p.get("oneway") for p in props)
    assert ow["yes"] >= 20 and ow["-1"] >= 5
    assert {p["class"] for p in props} == {"primary", "secondary", "residential", "service"}
    assert all(p["service"] == "none" for p in props if p["class"] == "service")
    # curved streets: vertices that leave the straight chord by more than 2 m
    # (1e-5 degrees of latitude is about 1.1 m; common practice, no source)
    bent = 0
    for f in town2k["features"]:
        c = np.array(f["geometry"]["coordinates"])
        if len(c) < 3:
            continue
        chord = LineString([c[0], c[-1]])
        dev = max(chord.distance(shapely.Point(p)) for p in c[1:-1])
        bent += dev > 2e-5
    assert bent >= 0.2 * len(town2k["features"])


def test_names_ids_and_coordinates(town2k):
    feats = town2k["features"]
    ids = [f["properties"]["id"] for f in feats]
    assert len(set(ids)) == len(ids)
    assert all(f["id"] == f["properties"]["id"] for f in feats)
    names = {f["properties"]["name"] for f in feats}
    assert all(n and n.strip() == n for n in names)
    # a few real, famous street names (from memory): none may appear
    famous = {"Main Street", "High Street", "Baker Street", "Abbey Road", "Wall Street", "Broadway",
              "Fifth Avenue", "Park Avenue", "Oxford Street", "Penny Lane", "Church Street", "Station Road"}
    assert not names & famous
    xy = np.array([p for f in feats for p in f["geometry"]["coordinates"]])
    assert np.all(np.abs(xy[:, 0]) <= 180) and np.all(np.abs(xy[:, 1]) <= 90)
    # RFC 7946: positions are longitude first; the town sits around its centre
    assert np.all(np.abs(xy[:, 0] - towngen.CENTRE[0]) < 0.2) and np.all(np.abs(xy[:, 1] - towngen.CENTRE[1]) < 0.2)
    assert town2k["type"] == "FeatureCollection"
    assert all(f["geometry"]["type"] == "LineString" for f in feats)


def test_streets_within_100_m_of_the_centre(town2k):
    lon0, lat0 = towngen.CENTRE
    # metres per degree from the spherical approximation, R = 6,371 km (from memory)
    k = math.pi / 180 * 6_371_000
    best = min(math.hypot((x - lon0) * k * math.cos(math.radians(lat0)), (y - lat0) * k)
               for f in town2k["features"] for x, y in f["geometry"]["coordinates"])
    assert best < 100


# -------------------------------------------------------------------- example
def test_example_files_come_from_the_generator():
    shipped = json.loads(EXAMPLE.read_text(encoding="utf-8"))
    fresh = towngen.generate_town(towngen.EXAMPLE_SEGMENTS, seed=0)
    assert [f["properties"] for f in shipped["features"]] == [f["properties"] for f in fresh["features"]]
    for f, g in zip(shipped["features"], fresh["features"]):
        assert np.allclose(f["geometry"]["coordinates"], g["geometry"]["coordinates"], atol=2e-7, rtol=0)
    assert EXAMPLE_CONFIG.read_text(encoding="utf-8") == towngen.town_config(fresh), \
        "examples/tallowmere.toml is stale: regenerate it with towngen.town_config"


def test_example_config_loads_with_crews_on_streets():
    from crewcut.solve.profile import load_profile

    prof = load_profile(EXAMPLE_CONFIG)
    # Enough crews that the sweeping itself (service time alone, a lower bound on
    # the work) fits in their shifts with room for driving and turns.
    from crewcut.solve.costs import required_passes, service_minutes
    from crewcut.solve.readers import read_network

    net = read_network(EXAMPLE, prof)
    work = float((required_passes(net, prof).total * service_minutes(net, prof)).sum())
    assert work <= 0.9 * sum(c.shift_limit_min for c in prof.crews)
    depots = {c.depot_lonlat for c in prof.crews}
    assert len(depots) >= 2
    town = json.loads(EXAMPLE.read_text(encoding="utf-8"))
    nodes = {_node(c) for f in town["features"] for c in (f["geometry"]["coordinates"][0],
                                                          f["geometry"]["coordinates"][-1])}
    assert depots <= nodes  # every depot sits exactly on an intersection
    raw = tomllib.loads(EXAMPLE_CONFIG.read_text(encoding="utf-8"))
    assert raw["profile"]["name"] == "curb-sweeping"


def test_example_loads_without_errors():
    from crewcut.solve.profile import load_profile
    from crewcut.solve.readers import read_network

    net = read_network(EXAMPLE, load_profile(EXAMPLE_CONFIG))
    assert not [f for f in net.findings if f.severity == "error"]
    shipped = json.loads(EXAMPLE.read_text(encoding="utf-8"))
    assert net.n_segments == len(shipped["features"])


# ------------------------------------------------------------------ crewcut demo
def test_demo_writes_the_example_town_and_config(tmp_path, capsys):
    from crewcut.cli.main import main

    out = tmp_path / "demo"
    assert main(["demo", "--out", str(out), "--only-town"]) == 0
    assert sorted(p.name for p in out.iterdir()) == ["tallowmere.geojson", "tallowmere.toml"]
    assert (out / "tallowmere.toml").read_text(encoding="utf-8") == EXAMPLE_CONFIG.read_text(encoding="utf-8")
    written = json.loads((out / "tallowmere.geojson").read_text(encoding="utf-8"))
    shipped = json.loads(EXAMPLE.read_text(encoding="utf-8"))
    assert [f["properties"] for f in written["features"]] == [f["properties"] for f in shipped["features"]]
    assert "tallowmere.geojson" in capsys.readouterr().out


@pytest.mark.parametrize("argv,words", [
    (["--segments", "5"], "number of segments 5"),
    (["--seed", "-2"], "seed must be"),
])
def test_demo_bad_numbers_exit_2_and_write_nothing(tmp_path, capsys, argv, words):
    from crewcut.cli.main import main

    out = tmp_path / "demo"
    assert main(["demo", "--out", str(out), *argv]) == 2
    err = capsys.readouterr().err
    assert words in err and "fix:" in err and "Traceback" not in err
    assert not out.exists()


def test_demo_out_that_is_a_file_exits_2_and_leaves_it(tmp_path, capsys):
    from crewcut.cli.main import main

    f = tmp_path / "taken"
    f.write_text("keep me", encoding="utf-8")
    assert main(["demo", "--out", str(f)]) == 2
    assert "is a file" in capsys.readouterr().err
    assert f.read_text(encoding="utf-8") == "keep me"


@pytest.mark.slow
def test_demo_runs_its_stages_on_a_small_town(tmp_path, capsys):
    from crewcut.cli.main import main

    out = tmp_path / "demo"
    code = main(["demo", "--out", str(out), "--segments", "300", "--seed", "1"])
    text = capsys.readouterr().out
    assert code == 0, text
    assert "Demo stages" in text and "Result: plannable" in text  # the check stage ran and passed
    assert "failed" not in text
