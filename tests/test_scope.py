"""Service areas and streets no closed route can serve (crewcut.solve.network.scope), end to end.

Outside references: which streets lie on a closed walk from the depot is checked
against networkx's strongly connected components (reference library); which
streets are inside an area against shapely's point-in-polygon on pyproj's
geodesic midpoints, computed here and not by the project's code. Bad input
gives exit 2, a message naming the fault, no traceback, nothing written.
"""
from __future__ import annotations

import hashlib
import json
from pathlib import Path

import networkx as nx
import numpy as np
import pytest
import shapely
from hypothesis import HealthCheck, given, settings, strategies as st

from helpers.checks import check_plan_independently
from helpers.geojson import GEOD, grid, offset, one_way_grid, write
from crewcut.cli.main import main
from crewcut.solve.costs import required_passes
from crewcut.solve.network.scope import scope_network, unservable_streets
from crewcut.solve.profile import Profile
from crewcut.solve.readers import read_network


@pytest.fixture(autouse=True)
def _wide(monkeypatch):
    monkeypatch.setenv("COLUMNS", "300")


def _run(capsys, *argv) -> tuple[int, str, str]:
    code = main([str(a) for a in argv])
    cap = capsys.readouterr()
    return code, " ".join(cap.out.split()), " ".join(cap.err.split())


def _area(path: Path, ring, kind="Polygon") -> Path:
    geom = {"type": "Polygon", "coordinates": [ring]} if kind == "Polygon" else {"type": kind, "coordinates": ring}
    return write(path, {"type": "FeatureCollection", "features": [{"type": "Feature", "properties": {},
                                                                  "geometry": geom}]})


def _box(e0, n0, e1, n1) -> list:
    ring = [offset(e0, n0), offset(e1, n0), offset(e1, n1), offset(e0, n1)]
    return ring + [ring[0]]


def _midpoint_inside(doc: dict, ring) -> dict[str, bool]:
    """Independent: each feature's geodesic midpoint (pyproj Geod) inside the lon/lat ring (shapely)."""
    poly = shapely.Polygon(ring)
    out = {}
    for f in doc["features"]:
        (lon1, lat1), (lon2, lat2) = f["geometry"]["coordinates"]
        az, _, dist = GEOD.inv(lon1, lat1, lon2, lat2)
        lon, lat, _ = GEOD.fwd(lon1, lat1, az, dist / 2)
        out[f["properties"]["id"]] = poly.covers(shapely.Point(lon, lat))
    return out


def test_area_serves_the_streets_whose_middle_lies_inside(tmp_path, capsys):
    doc = grid(6, 5)  # 100 m blocks; the box's edges run through the middle of blocks, never near a midpoint
    town = write(tmp_path / "town.geojson", doc)
    ring = _box(-20, -20, 270, 230)
    area = _area(tmp_path / "district.geojson", ring)
    want = _midpoint_inside(doc, ring)
    assert 0 < sum(want.values()) < len(want)
    out = tmp_path / "out"
    code, stdout, err = _run(capsys, "plan", town, "--area", area, "--crews", 2, "--depot", ",".join(map(str, offset(0, 0))),
                             "--workers", 1, "--out", out)
    assert code == 0, err
    plan = json.loads((out / "plan.json").read_text())
    check_plan_independently(plan)
    served = {plan["network"]["segments"][t["segment"]]["source_id"]
              for c in plan["crews"] for r in c["routes"] for t in r["traversals"] if t["mode"] == "service"}
    assert served == {k for k, v in want.items() if v}
    assert plan["settings"]["area"]["type"] == "MultiPolygon" and plan["left_out"] == []
    assert "service area:" in stdout
    assert _run(capsys, "verify", out / "plan.json", town)[0] == 0
    assert _run(capsys, "verify", out / "plan.json", town, "--area", area)[0] == 0
    other = _area(tmp_path / "other.geojson", _box(-20, -20, 170, 230))
    code, _, err = _run(capsys, "verify", out / "plan.json", town, "--area", other)
    assert code == 2 and "another service area" in err


def test_area_from_the_config_is_relative_to_it(tmp_path, capsys):
    doc = grid(4, 4)
    town = write(tmp_path / "town.geojson", doc)
    (tmp_path / "cfg").mkdir()
    _area(tmp_path / "cfg" / "district.geojson", _box(-20, -20, 170, 170))
    cfg = tmp_path / "cfg" / "run.toml"
    cfg.write_text('[network]\nservice_area = "district.geojson"\nunservable = "refuse"\n', encoding="utf-8")
    out = tmp_path / "out"
    code, _, err = _run(capsys, "plan", town, "--config", cfg, "--crews", 1, "--depot",
                        ",".join(map(str, offset(0, 0))), "--workers", 1, "--out", out)
    assert code == 0, err
    plan = json.loads((out / "plan.json").read_text())
    assert plan["settings"]["unservable"] == "refuse"
    assert plan["settings"]["area"]["source"].endswith("district.geojson")
    assert _run(capsys, "verify", out / "plan.json", town, "--config", cfg)[0] == 0


@pytest.mark.parametrize("geom,text", [
    ({"type": "Polygon", "coordinates": [[[0, 0], [1, 1], [1, 0], [0, 1], [0, 0]]]}, "not valid: Self-intersection"),
    ({"type": "MultiPolygon", "coordinates": []}, "the area is empty"),
    ({"type": "Polygon", "coordinates": [[[0, 0], [1, 0], [2, 0], [0, 0]]]}, "has no area"),
    ({"type": "Polygon", "coordinates": [[[0, 0], [1, 0], [1, 1], [0, 1]]]}, "the ring is not closed"),
    ({"type": "Point", "coordinates": [0, 0]}, "geometry is Point, not a Polygon"),
    ({"type": "Polygon", "coordinates": [[[0, 0], [1, 0], [1, "a"], [0, 0]]]}, "not a pair of JSON numbers"),
])
def test_bad_area_is_refused_with_its_place(tmp_path, capsys, geom, text):
    town = write(tmp_path / "town.geojson", grid(3, 3))
    area = write(tmp_path / "district.geojson", geom)
    before = {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in tmp_path.iterdir()}
    code, out, err = _run(capsys, "plan", town, "--area", area, "--crews", 1, "--depot",
                          ",".join(map(str, offset(0, 0))), "--out", tmp_path / "out")
    assert code == 2 and text in err and "district.geojson" in err and "Traceback" not in out + err, err
    assert {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in tmp_path.iterdir()} == before


def test_area_with_no_street_inside(tmp_path, capsys):
    town = write(tmp_path / "town.geojson", grid(3, 3))
    area = _area(tmp_path / "far.geojson", _box(5000, 5000, 6000, 6000))
    code, out, err = _run(capsys, "plan", town, "--area", area, "--crews", 1, "--depot",
                          ",".join(map(str, offset(0, 0))), "--out", tmp_path / "out")
    assert code == 2 and "holds no street that needs service" in err and "--area" in err
    assert not (tmp_path / "out").exists()


# ------------------------------------------------------------ unservable streets
def _one_way_town(seed: int) -> dict:
    return one_way_grid(seed, 5, 4, 0.3, 0.15)


def _depot_scc_segments(net, depot: int) -> set[int]:
    """Reference: segments with both ends in the depot's strongly connected component (networkx)."""
    g = net.to_networkx()
    comp = next(c for c in nx.strongly_connected_components(g) if depot in c)
    return {s for s in range(net.n_segments) if net.seg_u[s] in comp and net.seg_v[s] in comp}


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(seed=st.integers(0, 10_000))
def test_left_out_equals_what_lies_outside_the_depots_strong_component(tmp_path, seed):
    net = read_network(write(tmp_path / f"r{seed}.geojson", _one_way_town(seed)), Profile())
    depot = int(seed % net.n_nodes)
    inside = _depot_scc_segments(net, depot)
    need = required_passes(net, Profile()).total > 0
    left = unservable_streets(net, Profile(), [depot])
    assert {x.segment for x in left} == {s for s in range(net.n_segments) if need[s]} - inside
    g = net.to_networkx()
    reach = nx.descendants(g, depot) | {depot}
    for x in left:  # the reason follows from networkx's reachability too
        assert (x.reason == "cannot_be_reached") == (net.seg_u[x.segment] not in reach
                                                     and (net.seg_oneway[x.segment] or net.seg_v[x.segment] not in reach))


def test_a_depot_that_serves_nothing_is_named(tmp_path, capsys):
    town = write(tmp_path / "town.geojson", _one_way_town(3))  # seed 3: the corner node's strong part is empty
    code, _, err = _run(capsys, "plan", town, "--crews", 1, "--depot", ",".join(map(str, offset(0, 0))),
                        "--out", tmp_path / "out")
    assert code == 2 and "no closed route from a depot can serve any street" in err and "--depot" in err
    assert not (tmp_path / "out").exists()


@pytest.mark.parametrize("seed", [2, 5, 8])
def test_plan_leaves_out_the_traps_and_serves_everything_else(tmp_path, capsys, seed):
    town = write(tmp_path / "town.geojson", _one_way_town(seed))
    net = read_network(town, Profile())
    lonlat = offset(0, 0)
    depot = net.nearest_node(*lonlat)[0]
    trapped = {s for s in range(net.n_segments)} - _depot_scc_segments(net, depot)
    assert trapped, "the generated town should hold a trap for this test to mean something"
    code, _, err = _run(capsys, "plan", town, "--crews", 2, "--depot", ",".join(map(str, lonlat)),
                        "--unservable", "refuse", "--out", tmp_path / "never")
    assert code == 2 and "no closed route" in err and "--unservable leave_out" in err
    assert not (tmp_path / "never").exists()
    out = tmp_path / "out"
    code, stdout, err = _run(capsys, "plan", town, "--crews", 2, "--depot", ",".join(map(str, lonlat)),
                             "--workers", 1, "--out", out)
    assert code == 0, err
    plan = json.loads((out / "plan.json").read_text())
    assert {x["segment"] for x in plan["left_out"]} == trapped
    assert "Left out" in stdout
    check_plan_independently(plan)  # every other required pass served exactly once, closed walks
    assert _run(capsys, "verify", out / "plan.json", town)[0] == 0
    # verify re-derives the list: a street taken off it, a street put on it, a reason changed
    for tamper in ("drop", "add", "reason"):
        doc = json.loads((out / "plan.json").read_text())
        if tamper == "drop":
            doc["left_out"].pop()
        elif tamper == "add":
            served = min(s for s in range(net.n_segments) if s not in trapped)
            doc["left_out"].append({"segment": served, "source_id": net.seg_source[served],
                                    "name": net.seg_name[served], "length_m": 100.0, "reason": "cannot_be_left"})
        else:
            doc["left_out"][0]["reason"] = ("cannot_be_reached" if doc["left_out"][0]["reason"] == "cannot_be_left"
                                            else "cannot_be_left")
        bad = tmp_path / f"{tamper}.json"
        bad.write_text(json.dumps(doc))
        code, _, err = _run(capsys, "verify", bad, town)
        assert code == 2 and ("left_out" in err or "left out" in err), (tamper, err)


def test_refuse_message_names_streets_and_kilometres(tmp_path):
    net = read_network(write(tmp_path / "t.geojson", _one_way_town(3)), Profile())
    from crewcut.solve.errors import InputError

    with pytest.raises(InputError) as exc:
        scope_network(net, Profile(), [0], unservable="refuse")
    assert "plannable once these are left out" in exc.value.message and " km)" in exc.value.message
    with pytest.raises(InputError, match="`unservable` is 'skip'"):
        scope_network(net, Profile(), [0], unservable="skip")
