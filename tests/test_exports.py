"""GeoJSON, GPX and CSV exports, read back with outside libraries (gpxpy, shapely, pyproj, csv)."""
from __future__ import annotations

import csv
import hashlib
import io
import json

import gpxpy
import pytest
import shapely
from pyproj import Geod
from shapely.geometry import shape

from crewcut.cli.main import main
from crewcut.plans.planfile import plan_from_dict, plan_to_dict, write_plan
from helpers.plans import make_plan

GEOD = Geod(ellps="WGS84")


@pytest.fixture(scope="module", params=["test-factory", "crewcut-plan"])
def plan(request, tmp_path_factory):
    """A hand-made plan, and a plan made by the project's own planner on a small generated town (as the file's
    document: the records the exports must show)."""
    if request.param == "test-factory":
        return plan_to_dict(make_plan(k=3))
    pytest.importorskip("crewcut.solve.postman.eulerize", reason="the route engine (crewcut.solve.postman.eulerize) is not in this tree yet")
    from crewcut.demo.towngen import write_town

    d = tmp_path_factory.mktemp("planned")
    write_town(d / "town.geojson", 200, 0)
    assert main(["--quiet", "plan", str(d / "town.geojson"), "--crews", "3", "--depot=-30.5,45.2",
                 "--out", str(d), "--time-limit", "5", "--workers", "1"]) == 0
    return json.loads((d / "plan.json").read_text())


@pytest.fixture()
def plan_path(tmp_path, plan):
    return str(write_plan(plan_from_dict(plan), tmp_path / "plan.json"))


def _export(plan_path, form, capsys):
    assert main(["export", plan_path, "--format", form]) == 0
    return capsys.readouterr().out


def _driving_points(plan, route):
    """The route's points in driving order, rebuilt here from the plan's segments and traversals."""
    segs = plan["network"]["segments"]
    pts = []
    for t in route["traversals"]:
        c = segs[t["segment"]]["coords"]
        if t["from"] != segs[t["segment"]]["from"]:
            c = c[::-1]
        if pts:
            assert pts[-1] == c[0]  # consecutive traversals share a node
            c = c[1:]
        pts.extend(c)
    return pts


def test_gpx_one_track_per_crew_points_in_order(plan, plan_path, capsys):
    text = _export(plan_path, "gpx", capsys)
    gpx = gpxpy.parse(io.StringIO(text))  # reference GPX reader
    assert gpx.version == "1.1"
    assert 'xmlns="http://www.topografix.com/GPX/1/1"' in text
    # a track, followed as drawn; GPX routes get re-planned between points by devices
    assert not gpx.routes and len(gpx.tracks) == len(plan["crews"])
    for trk, crew in zip(gpx.tracks, plan["crews"]):
        assert trk.name.split()[0] == crew["id"]
        want = _driving_points(plan, crew["routes"][0])
        pts = [p for seg in trk.segments for p in seg.points]
        assert len(pts) == len(want)
        for p, (lon, lat) in zip(pts, want):
            assert abs(p.longitude - lon) <= 1e-7 and abs(p.latitude - lat) <= 1e-7
        # the track starts and ends at the crew's depot waypoint
        wpt = [w for w in gpx.waypoints if w.name == f"{crew['id']} depot"]
        assert len(wpt) == 1
        for p in (pts[0], pts[-1]):
            assert abs(p.longitude - wpt[0].longitude) <= 1e-7 and abs(p.latitude - wpt[0].latitude) <= 1e-7


def test_geojson_territories_and_routes(plan, plan_path, capsys):
    doc = json.loads(_export(plan_path, "geojson", capsys))
    assert doc["type"] == "FeatureCollection" and "crs" not in doc  # RFC 7946 section 4: no crs member
    terr = [f for f in doc["features"] if f["properties"]["kind"] == "territory"]
    routes = [f for f in doc["features"] if f["properties"]["kind"] == "route"]
    assert [f["properties"]["crew"] for f in terr] == [c["id"] for c in plan["crews"]]
    assert [f["properties"]["crew"] for f in routes] == [c["id"] for c in plan["crews"]]
    segs = plan["network"]["segments"]
    for f, crew in zip(terr, plan["crews"]):
        g = shape(f["geometry"])  # shapely reads the GeoJSON geometry
        assert g.geom_type == "MultiLineString" and len(g.geoms) == len(crew["territory"])
        # lon/lat order (RFC 7946 section 3.1.1): x is longitude near -30.5, y latitude near 45.2
        xmin, ymin, xmax, ymax = g.bounds
        assert -30.6 < xmin <= xmax < -30.4 and 45.1 < ymin <= ymax < 45.3
        # geodesic length (pyproj) equals the plan's territory length within 0.1 %
        want = sum(segs[s]["length_m"] for s in crew["territory"])
        assert GEOD.geometry_length(g) == pytest.approx(want, rel=1e-3)
    for f, crew in zip(routes, plan["crews"]):
        line = shape(f["geometry"])
        assert line.geom_type == "LineString"
        coords = [list(c) for c in line.coords]
        assert coords == _driving_points(plan, crew["routes"][0])  # continuous, in driving order
        depot = plan["network"]["nodes"][crew["depot_node"]]
        assert coords[0] == coords[-1] == [depot["lon"], depot["lat"]]  # a closed walk from the depot
        metres = sum(t["metres"] for t in crew["routes"][0]["traversals"])
        assert GEOD.geometry_length(line) == pytest.approx(metres, rel=1e-3)
        assert f["properties"]["traversals"] == len(crew["routes"][0]["traversals"])
    assert all(shapely.is_valid(shape(f["geometry"])) for f in doc["features"])


def test_csv_every_required_segment_once_with_its_crew(plan, plan_path, capsys):
    rows = list(csv.DictReader(io.StringIO(_export(plan_path, "csv", capsys))))
    assert list(rows[0]) == ["segment_id", "source_id", "name", "crew", "passes_required", "passes_served"]
    ids = [int(r["segment_id"]) for r in rows]
    assert len(ids) == len(set(ids))
    required = {s["id"] for s in plan["network"]["segments"] if sum(s["passes"].values()) > 0}
    assert required <= set(ids)
    owner = {s: c["id"] for c in plan["crews"] for s in c["territory"]}
    for r in rows:
        s = int(r["segment_id"])
        assert r["crew"] == owner.get(s, "")
        assert r["source_id"] == plan["network"]["segments"][s]["source_id"]
        if s in required:
            assert r["crew"] in {c["id"] for c in plan["crews"]}
            assert int(r["passes_served"]) == int(r["passes_required"]) >= 1


@pytest.mark.parametrize("form", ["geojson", "gpx", "csv"])
def test_same_plan_same_bytes_and_atomic_file(plan_path, tmp_path, form, capsys):
    a, b = tmp_path / f"a.{form}", tmp_path / f"b.{form}"
    assert main(["export", plan_path, "--format", form, "--out", str(a)]) == 0
    assert main(["export", plan_path, "--format", form, "--out", str(b)]) == 0
    capsys.readouterr()
    assert a.read_bytes() == b.read_bytes() == _export(plan_path, form, capsys).encode()
    assert [p.name for p in tmp_path.iterdir() if p.name.endswith(".part")] == []


def test_bad_input_exit_2_nothing_written_input_untouched(tmp_path, plan_path, capsys):
    bad = tmp_path / "streets.geojson"
    bad.write_text('{"type": "FeatureCollection", "features": []}')
    out = tmp_path / "out.gpx"
    assert main(["export", str(bad), "--format", "gpx", "--out", str(out)]) == 2
    err = capsys.readouterr().err
    assert "not a crewcut plan" in err and "Traceback" not in err
    assert not out.exists()
    # a plan without coordinates cannot become GPX; an existing output stays as it was
    before = hashlib.sha256(open(plan_path, "rb").read()).hexdigest()
    p = json.load(open(plan_path))
    p["network"]["has_geometry"] = False
    for s in p["network"]["segments"]:
        s["coords"] = None
    flat = tmp_path / "flat.json"
    flat.write_text(json.dumps(p))
    out.write_text("keep me")
    assert main(["export", str(flat), "--format", "gpx", "--out", str(out)]) == 2
    assert "no coordinates" in capsys.readouterr().err
    assert out.read_text() == "keep me"
    assert hashlib.sha256(open(plan_path, "rb").read()).hexdigest() == before
    # CSV needs no coordinates
    assert main(["export", str(flat), "--format", "csv"]) == 0


@pytest.mark.parametrize("spoil, named", [
    (lambda p: p["network"]["segments"][2].update(coords=None), "segment 2"),
    (lambda p: p["network"]["segments"][2].update(coords=[[1.0, 2.0, 3.0]]), "segment 2"),
    (lambda p: p["network"]["segments"][2]["coords"][0].__setitem__(0, "east"), "segment 2"),
    (lambda p: p["network"]["nodes"][1].update(lon="x"), "node 1"),
    (lambda p: p["crews"][0]["routes"][0]["traversals"][0].update(turn_minutes="x"), "traversal 0"),
])
def test_hand_edited_plan_is_a_clear_error(tmp_path, spoil, named, capsys):
    # common practice, no source: a damaged plan file is refused with a message, not a traceback
    p = plan_to_dict(make_plan(k=2))
    spoil(p)
    path = tmp_path / "plan.json"
    path.write_text(json.dumps(p))
    out = tmp_path / "out.gpx"
    assert main(["export", str(path), "--format", "gpx", "--out", str(out)]) == 2
    err = capsys.readouterr().err
    assert named in err and "Traceback" not in err and not out.exists()
