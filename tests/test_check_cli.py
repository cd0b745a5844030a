"""``crewcut check`` and :mod:`crewcut.solve.network.diagnose`: summaries, bad input, reachability.

Bad input: every case asserts the message, exit status 2, no traceback, nothing
written and the input file unchanged. Reachability is checked against networkx's
own graph search (reference library) on the exported MultiDiGraph.
"""
from __future__ import annotations

import os
import re
import subprocess
import sys
from pathlib import Path

import networkx as nx
import numpy as np
import pytest

from helpers.geojson import GEOD, collection, feature, grid, offset, one_way_grid, write
from crewcut.cli.main import main
from crewcut.solve.network.diagnose import check_network
from crewcut.solve.profile import Profile
from crewcut.solve.readers import read_network

ROOT = Path(__file__).resolve().parent.parent


@pytest.fixture(autouse=True)
def _wide_terminal(monkeypatch, tmp_path):
    monkeypatch.setenv("COLUMNS", "300")  # rich wraps at the terminal width; keep messages on one line
    monkeypatch.chdir(tmp_path)  # anything written by mistake would show up in the snapshot


def _snapshot(folder: Path) -> dict:
    return {p.relative_to(folder).as_posix(): p.read_bytes() for p in sorted(folder.rglob("*")) if p.is_file()}


def _flat(text: str) -> str:
    """Whitespace collapsed and table borders (box-drawing characters) removed."""
    return " ".join(re.sub("[\u2500-\u257f]", " ", text).split())


def run_bad(capsys, folder: Path, argv: list[str], *expected: str) -> str:
    before = _snapshot(folder)
    rc = main(argv)
    out, err = capsys.readouterr()
    assert rc == 2
    assert "Traceback" not in err and "Traceback" not in out
    flat = _flat(err)
    for text in expected:
        assert text in flat, f"{text!r} not in {flat!r}"
    assert _snapshot(folder) == before  # nothing written, input untouched
    return flat


def trap_network(kind: str) -> dict:
    """A 3 x 3 grid plus a one-way spur 'spur' off its corner: 'out' can never be left, 'in' never reached."""
    doc = grid(3, 3)
    a, b = offset(200, 200), offset(300, 260)
    doc["features"].append(feature([a, b] if kind == "out" else [b, a], id="spur", oneway="yes",
                                   name="Tallow Cut"))
    return doc


# ------------------------------------------------------------------ good input
def test_check_prints_summary_and_exits_0(capsys, tmp_path):
    doc = grid(4, 3)
    path = write(tmp_path / "town.geojson", doc)
    assert main(["check", str(path)]) == 0
    out = _flat(capsys.readouterr().out)
    for header in ("road class", "segments", "length (km)", "one-way (km)", "required passes", "to serve (km)",
                   "total", "connected pieces", "odd-degree nodes", "dead ends", "plannable"):
        assert header in out
    # 17 block sides of 100 m (placed with pyproj's Geod): 1.70 km, both curbs = 34 passes
    total_km = sum(GEOD.line_length(*zip(*f["geometry"]["coordinates"])) for f in doc["features"]) / 1000
    assert f"total 17 {total_km:.2f} 0.00 34 {2 * total_km:.2f}" in out


def test_check_with_depot_reports_the_depot(capsys, tmp_path):
    path = write(tmp_path / "town.geojson", grid(3, 3))
    lon, lat = offset(3, 2)
    assert main(["check", str(path), "--depot", f"{lon},{lat}"]) == 0  # negative longitude, own argument
    assert "node 0 (from --depot" in _flat(capsys.readouterr().out)


def test_check_uses_first_crew_depot_from_config(capsys, tmp_path):
    path = write(tmp_path / "town.geojson", grid(3, 3))
    lon, lat = offset(200, 200)
    cfg = tmp_path / "c.toml"
    cfg.write_text(f'[[crews]]\nid = "east"\ndepot = [{lon}, {lat}]\n[[crews]]\nid = "west"\ndepot_node = 0\n')
    assert main(["check", str(path), "--config", str(cfg)]) == 0
    assert "crew 'east'" in _flat(capsys.readouterr().out)


def test_warnings_alone_keep_the_network_plannable(capsys, tmp_path):
    doc = grid(3, 3)
    doc["features"].append(dict(doc["features"][0], properties={"id": "copy"}))
    path = write(tmp_path / "town.geojson", doc)
    assert main(["check", str(path)]) == 0
    out = _flat(capsys.readouterr().out)
    assert "warning copy exact duplicate of feature 'e0_0'" in out


# ------------------------------------------------------------------- bad input
def test_missing_file(capsys, tmp_path):
    run_bad(capsys, tmp_path, ["check", str(tmp_path / "nope.geojson")], "nope.geojson' not found")


def test_malformed_json(capsys, tmp_path):
    path = write(tmp_path / "b.geojson", '{"type": "FeatureCollection", "features": [')
    run_bad(capsys, tmp_path, ["check", str(path)], "b.geojson: not valid JSON (line 1")


def test_not_a_feature_collection(capsys, tmp_path):
    path = write(tmp_path / "b.geojson", {"type": "Feature", "geometry": None, "properties": {}})
    run_bad(capsys, tmp_path, ["check", str(path)], "not a GeoJSON FeatureCollection (found type 'Feature')")


def test_geometry_not_a_line(capsys, tmp_path):
    doc = grid(2, 2)
    doc["features"].append({"type": "Feature", "properties": {"id": "yard"},
                            "geometry": {"type": "Point", "coordinates": offset(5, 5)}})
    path = write(tmp_path / "b.geojson", doc)
    run_bad(capsys, tmp_path, ["check", str(path)], "feature 'yard': geometry is Point, not a line",
            "fix: keep only LineString")


def test_projected_coordinates(capsys, tmp_path):
    doc = collection([feature([[385_000.0, 6_672_000.0], [385_100.0, 6_672_000.0]], id="utm1")])
    path = write(tmp_path / "b.geojson", doc)
    run_bad(capsys, tmp_path, ["check", str(path)], "feature 'utm1': position (385000, 6.672e+06) is outside",
            "looks like a projected file", "reproject")


@pytest.mark.parametrize("prop,value,text", [("service", "sweep", "unknown service value 'sweep'"),
                                             ("oneway", "reversible", "unknown oneway value 'reversible'")])
def test_unknown_service_or_oneway(capsys, tmp_path, prop, value, text):
    doc = grid(2, 2)
    doc["features"][1]["properties"][prop] = value
    path = write(tmp_path / "b.geojson", doc)
    run_bad(capsys, tmp_path, ["check", str(path)], f"feature 'e1_0': {text}", "allowed:")


@pytest.mark.parametrize("length,text", [("ten", "length_m 'ten' is not a number"),
                                         ("0", "length_m is '0'; it must be a finite number greater than zero"),
                                         ("-4.5", "length_m is '-4.5'"), ("nan", "length_m is 'nan'")])
def test_csv_bad_length(capsys, tmp_path, length, text):
    path = tmp_path / "e.csv"
    path.write_text(f"from,to,length_m\nA,B,10\nB,C,{length}\n", encoding="utf-8")
    run_bad(capsys, tmp_path, ["check", str(path)], f"e.csv: row 3: {text}")


def test_csv_missing_column(capsys, tmp_path):
    path = tmp_path / "e.csv"
    path.write_text("from,to,name\nA,B,Brine Street\n", encoding="utf-8")
    run_bad(capsys, tmp_path, ["check", str(path)], "header has no column 'length_m'")


def test_csv_row_missing_a_value(capsys, tmp_path):
    path = tmp_path / "e.csv"
    path.write_text("from,to,length_m\nA,B,10\nB,C\n", encoding="utf-8")
    run_bad(capsys, tmp_path, ["check", str(path)], "row 3 has no value for column 'length_m'")


def test_self_loop_geojson(capsys, tmp_path):
    doc = grid(2, 2)
    doc["features"].append(feature([offset(100, 100), offset(150, 150), offset(100, 150), offset(100, 100)],
                                   id="ring"))
    path = write(tmp_path / "b.geojson", doc)
    run_bad(capsys, tmp_path, ["check", str(path)], "feature 'ring' is a self-loop", "fix: split the closed line")


def test_self_loop_csv(capsys, tmp_path):
    path = tmp_path / "e.csv"
    path.write_text("from,to,length_m\nA,B,10\nB,B,40\n", encoding="utf-8")
    run_bad(capsys, tmp_path, ["check", str(path)], "row 3: edge 'row 3' is a self-loop")


def test_empty_network(capsys, tmp_path):
    path = write(tmp_path / "b.geojson", collection([]))
    run_bad(capsys, tmp_path, ["check", str(path)], "the network is empty")


def test_network_of_zero_length_lines_only(capsys, tmp_path):
    # Every line starts and ends on one point: repair drops them all, which leaves no street
    # to plan (common practice, no source); the file is named in the message.
    path = write(tmp_path / "z.geojson", collection([feature([offset(0, 0), offset(0, 0)], id="dot")]))
    run_bad(capsys, tmp_path, ["check", str(path)], "z.geojson: the network is empty")


def test_depot_too_far(capsys, tmp_path):
    path = write(tmp_path / "town.geojson", grid(3, 3))
    lon, lat = offset(0, 3000)
    run_bad(capsys, tmp_path, ["check", str(path), f"--depot={lon},{lat}"],
            "m from the nearest usable street (the limit is 500 m)", "depot_snap_max_m")


def test_depot_distance_is_configurable(capsys, tmp_path):
    path = write(tmp_path / "town.geojson", grid(3, 3))
    cfg = tmp_path / "c.toml"
    cfg.write_text("[profile]\ndepot_snap_max_m = 20\n")
    lon, lat = offset(0, 250)  # 50 m north of the grid's corner
    run_bad(capsys, tmp_path, ["check", str(path), "--config", str(cfg), f"--depot={lon},{lat}"],
            "is 50 m from the nearest usable street (the limit is 20 m)")


@pytest.mark.parametrize("kind,text", [("out", "one-way street 'Tallow Cut' can never be left"),
                                       ("in", "one-way street 'Tallow Cut' can never be reached")])
def test_one_way_trap_without_depot(capsys, tmp_path, kind, text):
    path = write(tmp_path / "t.geojson", trap_network(kind))
    before = path.read_bytes()
    assert main(["check", str(path), "--unservable", "refuse"]) == 2
    out = _flat(capsys.readouterr().out)
    assert f"error spur {text}" in out and "not plannable" in out
    assert "plannable once 1 street segment(s)" in out and "--unservable leave_out" in out
    assert path.read_bytes() == before and _snapshot(tmp_path) == {"t.geojson": before}
    # the default policy leaves the trap out, says so, and the network is plannable
    assert main(["check", str(path)]) == 0
    out = _flat(capsys.readouterr().out)
    assert f"warning spur {text}" in out and "left out of every route" in out
    assert "Result: plannable: 1 street segment(s)" in out and "will be left out" in out
    assert _snapshot(tmp_path) == {"t.geojson": before}


def test_one_way_trap_with_depot(capsys, tmp_path):
    path = write(tmp_path / "t.geojson", trap_network("out"))
    lon, lat = offset(0, 0)
    assert main(["check", str(path), f"--depot={lon},{lat}", "--unservable", "refuse"]) == 2
    out = _flat(capsys.readouterr().out)
    assert "error spur street 'Tallow Cut' can be reached from the depot but never left back to it" in out
    assert main(["check", str(path), f"--depot={lon},{lat}"]) == 0
    out = _flat(capsys.readouterr().out)
    assert "spur Tallow Cut 1" in out and "no legal way leads from it back to a depot" in out


def test_unreadable_pbf(capsys, tmp_path):
    path = tmp_path / "city.osm.pbf"
    path.write_bytes(b"this is not a protocol buffer file" * 10)
    run_bad(capsys, tmp_path, ["check", str(path)], "city.osm.pbf: not a readable OpenStreetMap file")


@pytest.mark.parametrize("toml,text", [
    ('[profile]\ncolour = "red"\n', "unknown key 'profile.colour'"),
    ("[service_speed_kmh]\ndefault = -3\n", "'service_speed_kmh.default' is -3 km/h, not a working speed"),
    ("[profile]\nshift_limit_min = 2000\n", "shift_limit_min' is 2000 minutes, longer than a day"),
])
def test_bad_config(capsys, tmp_path, toml, text):
    path = write(tmp_path / "town.geojson", grid(2, 2))
    cfg = tmp_path / "c.toml"
    cfg.write_text(toml)
    run_bad(capsys, tmp_path, ["check", str(path), "--config", str(cfg)], text)


def test_exit_status_through_python_m_partition(tmp_path):
    path = write(tmp_path / "b.geojson", "[1, 2")
    env = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""), COLUMNS="300")
    proc = subprocess.run([sys.executable, "-m", "partition", "check", str(path)], cwd=tmp_path, env=env,
                          capture_output=True, text=True, timeout=120)
    assert proc.returncode == 2
    assert "not valid JSON" in proc.stderr and "Traceback" not in proc.stderr
    assert sorted(p.name for p in tmp_path.iterdir()) == ["b.geojson"]


# -------------------------------------------------- analysis against networkx
def _random_mixed_network(seed: int) -> dict:
    return one_way_grid(seed, 5, 5, 0.35, 0.15)


@pytest.mark.parametrize("seed", range(6))
def test_reachability_from_depot_matches_networkx(tmp_path, seed):
    net = read_network(write(tmp_path / "r.geojson", _random_mixed_network(seed)), Profile())
    depot = 0
    rep = check_network(net, Profile(), depot, "refuse")
    g = net.to_networkx()
    # reference library: networkx graph search on the exported directed multigraph
    fwd = nx.descendants(g, depot) | {depot}
    back = nx.ancestors(g, depot) | {depot}
    reach = {d["segment"] for t, h, d in g.edges(data=True) if t in fwd}
    good = {d["segment"] for t, h, d in g.edges(data=True) if t in fwd and h in back}
    assert rep.not_reachable == net.n_segments - len(reach)
    assert rep.cannot_return == len(reach - good)
    bad_src = {f.feature for f in rep.findings if f.severity == "error"}
    assert bad_src == {net.seg_source[s] for s in range(net.n_segments) if s not in good}
    assert rep.plannable == (len(good) == net.n_segments)
    # the left-out list: exactly the segments on no closed walk through the depot, with the reason
    assert {x.segment for x in rep.left_out} == set(range(net.n_segments)) - good
    assert all((x.reason == "cannot_be_reached") == (x.segment not in reach) for x in rep.left_out)


@pytest.mark.parametrize("seed", range(6))
def test_traps_without_depot_match_networkx(tmp_path, seed):
    net = read_network(write(tmp_path / "r.geojson", _random_mixed_network(seed)), Profile())
    rep = check_network(net, Profile(), unservable="refuse")
    g = net.to_networkx()
    # reference: the largest strongly connected part by length (networkx), one weak piece here
    parts = [c for c in nx.strongly_connected_components(g)]
    length = [sum(d["length"] for t, h, d in g.edges(data=True) if t in c and h in c) for c in parts]
    main_part = parts[int(np.argmax(length))]
    good = {d["segment"] for t, h, d in g.edges(data=True) if t in main_part and h in main_part}
    assert {f.feature for f in rep.findings if f.severity == "error"} == \
        {net.seg_source[s] for s in range(net.n_segments) if s not in good}
    assert {x.segment for x in rep.left_out} == set(range(net.n_segments)) - good
    assert rep.plannable_once_left_out == (len(good) < net.n_segments)


def test_summary_figures_match_networkx(tmp_path):
    net = read_network(write(tmp_path / "r.geojson", _random_mixed_network(1)), Profile())
    rep = check_network(net, Profile())
    u = nx.MultiGraph()
    u.add_edges_from(zip(net.seg_u.tolist(), net.seg_v.tolist()))  # reference library: networkx
    assert rep.components == nx.number_connected_components(u)
    assert rep.odd_nodes == sum(1 for _, d in u.degree() if d % 2)
    assert rep.dead_ends == sum(1 for _, d in u.degree() if d == 1)
    assert rep.oneway_km == pytest.approx(net.seg_length[net.seg_oneway].sum() / 1000)
