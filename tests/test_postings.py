"""Posted sweeping times read from street files into the Network, the plan file and verify.

Outside references, named at each check:

* the grammar's weekday abbreviations (``Mo`` .. ``Su``) and ``HH:MM-HH:MM`` ranges
  follow the OpenStreetMap wiki's "Key:opening_hours" page, and the
  ``<value> @ (<condition>)`` shape its "Conditional restrictions" page (from memory);
* ``parking:left|right|both:restriction:conditional`` and the rule that left and right
  are relative to the way's drawn direction: OpenStreetMap wiki "Key:parking" (from memory);
* the working side of a sweeper is the curb side of its direction of travel: the
  right in right-hand traffic, the left in left-hand traffic (fact of the trade,
  common practice, no source);
* which curb is left or right of a line is computed here on its own from the stored
  geometry (pyproj's Geod placed the positions), not taken from the project.

Every file is written inside the test; the town and its streets are invented.
"""
from __future__ import annotations

import csv
import dataclasses
import json
import re

import networkx as nx
import numpy as np
import pytest

from helpers.geojson import collection, feature, grid, offset, write
from crewcut.cli.main import main
from crewcut.fleet.day_network import resolve_closures
from crewcut.plans.planfile import read_plan
from crewcut.solve.calendar.postings import parse_conditional, parse_posting
from crewcut.solve.costs import required_passes
from crewcut.solve.errors import InputError
from crewcut.solve.network.model import (SERVICE_BOTH_SIDES, SERVICE_LEFT_CURB, SERVICE_NAMES,
                                         SERVICE_RIGHT_CURB)
from crewcut.solve.profile import Profile
from crewcut.solve.readers import read_network
from crewcut.solve.readers.nxgraph import network_from_graph

RIGHT = Profile()  # right-hand traffic (the profile's default)
LEFT = dataclasses.replace(Profile(), traffic="left")


@pytest.fixture(autouse=True)
def _wide_terminal(monkeypatch, tmp_path):
    monkeypatch.setenv("COLUMNS", "300")  # rich wraps at the terminal width; keep messages on one line
    monkeypatch.chdir(tmp_path)


def _snapshot(folder) -> dict:
    return {p.relative_to(folder).as_posix(): p.read_bytes() for p in sorted(folder.rglob("*")) if p.is_file()}


def _street(tmp_path, name="town.geojson", **props):
    """One street of 200 m drawn west to east (a middle vertex), plus a side street north from its end."""
    main_st = feature([offset(0, 0), offset(100, 0), offset(200, 0)], id="elm", name="Elm Reach", **props)
    side = feature([offset(200, 0), offset(200, 100)], id="oak", name="Oak Wynd")
    return write(tmp_path / name, collection([main_st, side]))


def _side_of(net, s: int, point_lonlat) -> str:
    """'left' or 'right' of segment s's stored direction (u -> v), for a point; plain plane geometry.

    Near the equator-free test area a degree of longitude and latitude are scaled by cos(lat);
    the sign of the cross product of (v - u) and (point - u) tells the side (positive: left).
    """
    c = np.asarray(net.seg_coords[s], float)
    k = np.cos(np.radians(c[0, 1]))
    dx, dy = (c[-1, 0] - c[0, 0]) * k, c[-1, 1] - c[0, 1]
    px, py = (point_lonlat[0] - c[0, 0]) * k, point_lonlat[1] - c[0, 1]
    return "left" if dx * py - dy * px > 0 else "right"


# ---------------------------------------------------------------------- grammar
@pytest.mark.parametrize("text, day, lo, hi", [
    ("tue 08:00-10:00", "tue", 480, 600),
    ("Tu 8:00 - 10:00", "tue", 480, 600),        # Key:opening_hours two-letter weekday (from memory)
    ("TUESDAY", "tue", None, None),              # a fixed day, no window
    ("wed2 06:30-07:15", "wed2", 390, 435),      # a cycle day label of a two-week cycle
    ("su 00:00-24:00", "sun", 0, 1440),          # 24:00 ends the day (Key:opening_hours, from memory)
])
def test_valid_postings(text, day, lo, hi):
    p = parse_posting(text, "feature 'x'")
    assert (p.day, p.open_min, p.close_min) == (day, lo, hi)


@pytest.mark.parametrize("text, day, lo, hi", [
    ("no_parking @ (Tu 08:00-10:00)", "tue", 480, 600),   # Conditional restrictions: value @ (condition)
    ("no_stopping @ (Fr 07:00-09:30)", "fri", 420, 570),
])
def test_valid_conditionals(text, day, lo, hi):
    p = parse_conditional(text, "way/1")
    assert (p.day, p.open_min, p.close_min) == (day, lo, hi)


@pytest.mark.parametrize("value, match", [
    ("   ", "empty"),                              # blank text ("" counts as absent, like service "")
    ("08:00-10:00", "cannot be read"),            # no day
    ("tue 08:00", "cannot be read"),              # half a window
    ("tue 10:00-08:00", "ends before it starts"),
    ("tue 25:00-26:00", "not a clock time"),
    ("tue 08:60-09:00", "not a clock time"),
    (7, "not text"),
])
def test_bad_posting_names_feature_and_property(tmp_path, value, match):
    path = _street(tmp_path, **{"posted:left": value})
    with pytest.raises(InputError, match=match) as err:
        read_network(path, RIGHT)
    assert "feature 'elm'" in err.value.message and "posted:left" in err.value.message


def test_readme_states_the_grammar_of_the_module():
    """The README's grammar block is the one postings.py documents (a consistency check, no outside source)."""
    from pathlib import Path

    import crewcut.solve.calendar.postings as postings

    def block(text: str) -> list[str]:
        lines = [ln.strip() for ln in text.splitlines()]
        start = next(i for i, ln in enumerate(lines) if ln.startswith("posting     :="))
        return lines[start:start + 6]

    readme = (Path(__file__).resolve().parent.parent / "README.md").read_text(encoding="utf-8")
    assert block(readme) == block(postings.__doc__)
    for name in ("posted:left", "posted:right", "parking:both:restriction:conditional"):
        assert name in readme


# ------------------------------------------------------------------- GeoJSON
def test_whole_street_posting_holds_for_every_piece(tmp_path):
    # "oak" starts on elm's end; a third street ends on elm's middle vertex and splits it there
    doc = collection([
        feature([offset(0, 0), offset(100, 0), offset(200, 0)], id="elm", posted="thu 09:00-11:00"),
        feature([offset(100, 0), offset(100, -100)], id="ash"),
    ])
    net = read_network(write(tmp_path / "t.geojson", doc), RIGHT)
    elm = [s for s in range(net.n_segments) if net.seg_source[s] == "elm"]
    assert len(elm) == 2  # split at the touch
    for s in elm:
        p = net.posting(s)
        assert (p.day, p.window_text()) == ("thu", "09:00-11:00")
    assert all(net.posting(s) is None for s in range(net.n_segments) if net.seg_source[s] == "ash")


def test_no_posting_leaves_the_network_as_before(tmp_path):
    plain = read_network(_street(tmp_path, "a.geojson"), RIGHT)
    assert plain.seg_posting == ()
    posted = read_network(_street(tmp_path, "b.geojson", posted="mon"), RIGHT)
    assert posted.fingerprint != plain.fingerprint  # a posting is part of the network's identity


def test_alternate_side_split_two_way(tmp_path):
    path = _street(tmp_path, service="both_sides",
                   **{"posted:left": "tue 08:00-10:00", "posted:right": "thu 08:00-10:00"})
    net = read_network(path, RIGHT)
    assert net.seg_source == ["elm:left", "elm:right", "oak"]  # deterministic, readable ids
    left, right = 0, 1
    assert int(net.seg_u[left]) == int(net.seg_u[right]) and int(net.seg_v[left]) == int(net.seg_v[right])
    np.testing.assert_array_equal(net.seg_coords[left], net.seg_coords[right])
    assert net.seg_service[left] == SERVICE_LEFT_CURB and net.seg_service[right] == SERVICE_RIGHT_CURB
    assert net.posting(left).day == "tue" and net.posting(right).day == "thu"
    # the north curb of a west-to-east street is on its left (plane geometry, _side_of)
    assert _side_of(net, left, offset(100, 5)) == "left"
    # right-hand traffic: the right curb is worked driving u -> v, the left one driving v -> u
    p = required_passes(net, RIGHT)
    assert (p.forward[right], p.backward[right], p.either[right]) == (1, 0, 0)
    assert (p.forward[left], p.backward[left], p.either[left]) == (0, 1, 0)
    # left-hand traffic: the other way round
    q = required_passes(net, LEFT)
    assert (q.forward[right], q.backward[right]) == (0, 1)
    assert (q.forward[left], q.backward[left]) == (1, 0)
    # the two curb segments together need what one both_sides segment needs: one pass each way
    whole = read_network(_street(tmp_path, "w.geojson", service="both_sides"), RIGHT)
    w = required_passes(whole, RIGHT)
    assert (p.forward[:2].sum(), p.backward[:2].sum()) == (w.forward[0], w.backward[0]) == (1, 1)


def test_one_curb_posted_splits_with_an_unposted_curb(tmp_path):
    net = read_network(_street(tmp_path, service="both_sides", **{"posted:right": "fri"}), RIGHT)
    assert net.seg_source[:2] == ["elm:left", "elm:right"]
    assert net.posting(0) is None and net.posting(1).day == "fri"


def test_alternate_side_split_one_way(tmp_path):
    path = _street(tmp_path, service="both_sides", oneway="yes",
                   **{"posted:left": "mon", "posted:right": "wed"})
    net = read_network(path, RIGHT)
    p = required_passes(net, RIGHT)
    # a one-way street is worked in its legal direction only, each curb once (costs table)
    assert [(int(p.forward[s]), int(p.backward[s])) for s in (0, 1)] == [(1, 0), (1, 0)]


def test_default_service_from_the_profile_decides_the_split(tmp_path):
    # no service on the line: the profile's default for its road class applies before the split
    prof = dataclasses.replace(Profile(), default_service={"default": "both_sides", "lane": "one_pass"})
    sides = {"posted:left": "mon", "posted:right": "wed"}
    net = read_network(_street(tmp_path, "a.geojson", **{"class": "residential", **sides}), prof)
    assert net.seg_source[:2] == ["elm:left", "elm:right"]
    with pytest.raises(InputError, match="service one_pass"):
        read_network(_street(tmp_path, "b.geojson", **{"class": "lane", **sides}), prof)


def test_reversed_oneway_swaps_sides(tmp_path):
    # drawn west to east with oneway=-1: stored east to west; its drawn left (north) becomes its right
    path = _street(tmp_path, service="both_sides", oneway="-1",
                   **{"posted:left": "tue", "posted:right": "thu"})
    net = read_network(path, RIGHT)
    by_id = {net.seg_source[s]: s for s in range(net.n_segments)}
    right = by_id["elm:right"]
    assert _side_of(net, right, offset(100, 5)) == "right"  # the north curb is now on the stored right
    assert net.posting(right).day == "tue"  # ... and carries what was posted for the drawn left
    assert net.posting(by_id["elm:left"]).day == "thu"


@pytest.mark.parametrize("props, match", [
    ({"service": "one_pass", "posted:left": "mon", "posted:right": "wed"}, "one pass cannot be on two days"),
    ({"service": "each_direction", "posted:right": "wed"}, "one pass cannot be on two days"),
    ({"posted": "mon", "posted:left": "tue"}, "two different times"),
])
def test_refusals_name_the_feature(tmp_path, props, match):
    with pytest.raises(InputError, match=match) as err:
        read_network(_street(tmp_path, **props), RIGHT)
    assert "'elm'" in err.value.message
    if "one pass" in match:
        assert "both_sides" in err.value.hint


def test_empty_value_counts_as_absent(tmp_path):
    net = read_network(_street(tmp_path, posted="", **{"posted:left": None}), RIGHT)
    assert net.seg_posting == ()


def test_agreeing_whole_and_side_postings_are_one_segment(tmp_path):
    net = read_network(_street(tmp_path, service="one_pass", posted="mon 08:00-09:00",
                               **{"posted:left": "Monday 8:00-9:00"}), RIGHT)
    assert net.seg_source == ["elm", "oak"] and net.posting(0).day == "mon"


# ----------------------------------------------------------------------- CSV
def test_csv_columns_and_reversed_edge(tmp_path):
    path = tmp_path / "edges.csv"
    with open(path, "w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(["id", "from", "to", "length_m", "oneway", "service", "posted", "posted:left", "posted:right"])
        w.writerow(["a", "A", "B", "120", "no", "both_sides", "tue 07:00-09:00", "", ""])
        w.writerow(["b", "B", "C", "80", "-1", "both_sides", "", "mon", "fri 10:00-12:00"])
    net = read_network(path, RIGHT)
    assert net.seg_source == ["a", "b:left", "b:right"]
    assert net.posting(0).window_text() == "07:00-09:00"
    # "b" is stored C -> B: what was left from B to C is right from C to B
    assert net.node_label[int(net.seg_u[1])] == "C"
    assert net.posting(1).day == "fri" and net.posting(2).day == "mon"


def test_csv_bad_posting_names_row_and_edge(tmp_path):
    path = tmp_path / "edges.csv"
    path.write_text("id,from,to,length_m,posted\nq,A,B,50,someday 7-9\n")
    with pytest.raises(InputError, match=r"row 2: edge 'q': posted") as err:
        read_network(path, RIGHT)
    assert "tue 08:00-10:00" in err.value.hint  # the hint shows the grammar


# ----------------------------------------------------------------------- OSM
def _osm(tmp_path, tags: dict) -> object:
    """Way 100 drawn west to east (nodes 1, 2, 3), and way 101 north from node 3."""
    pts = {1: offset(0, 0), 2: offset(100, 0), 3: offset(200, 0), 4: offset(200, 100)}
    nodes = "".join(f'<node id="{i}" version="1" lat="{la:.7f}" lon="{lo:.7f}"/>' for i, (lo, la) in pts.items())
    tag_xml = "".join(f'<tag k="{k}" v="{v}"/>' for k, v in {"highway": "residential", **tags}.items())
    path = tmp_path / "town.osm"
    path.write_text('<?xml version="1.0" encoding="UTF-8"?><osm version="0.6" generator="hand">' + nodes
                    + f'<way id="100"><nd ref="1"/><nd ref="2"/><nd ref="3"/>{tag_xml}</way>'
                    + '<way id="101"><nd ref="3"/><nd ref="4"/><tag k="highway" v="residential"/></way></osm>')
    return path


def _osm_profile(service="both_sides"):
    return dataclasses.replace(Profile(), default_service={"default": service})


def test_osm_conditional_tags(tmp_path):
    path = _osm(tmp_path, {"parking:left:restriction:conditional": "no_parking @ (Tu 08:00-10:00)",
                           "parking:right:restriction:conditional": "no_parking @ (Th 08:00-10:00)"})
    net = read_network(path, _osm_profile())
    by_id = {net.seg_source[s]: s for s in range(net.n_segments)}
    assert set(by_id) == {"way/100:left", "way/100:right", "way/101"}
    assert net.posting(by_id["way/100:left"]).day == "tue"
    assert net.posting(by_id["way/100:right"]).day == "thu"
    # Key:parking: left is left of the drawn direction; drawn west to east, left is the north curb
    assert _side_of(net, by_id["way/100:left"], offset(100, 5)) == "left"


def test_osm_reversed_way_swaps_sides(tmp_path):
    path = _osm(tmp_path, {"oneway": "-1", "parking:left:restriction:conditional": "no_parking @ (Mo 07:00-08:00)"})
    net = read_network(path, _osm_profile())
    by_id = {net.seg_source[s]: s for s in range(net.n_segments)}
    right = by_id["way/100:right"]
    assert net.node_label[int(net.seg_u[right])] == "node/3"  # stored against the drawing
    assert _side_of(net, right, offset(100, 5)) == "right"  # the drawn-left (north) curb
    assert net.posting(right).day == "mon" and net.posting(by_id["way/100:left"]) is None


def test_osm_both_tag_and_bad_tag(tmp_path):
    net = read_network(_osm(tmp_path, {"parking:both:restriction:conditional": "no_stopping @ (We 06:00-07:00)"}),
                       _osm_profile())
    assert [net.posting(s).day for s in range(net.n_segments) if net.seg_source[s] == "way/100"] == ["wed"]
    bad = _osm(tmp_path, {"parking:right:restriction:conditional": "no_parking @ (Tu 08:00-10:00; Fr 08:00-10:00)"})
    with pytest.raises(InputError, match=r"way/100: parking:right:restriction:conditional"):
        read_network(bad, _osm_profile())


# ----------------------------------------------------------------- networkx
def test_networkx_edge_attributes(tmp_path):
    g = nx.MultiDiGraph()
    g.add_node(1, x=-30.500, y=45.200)
    g.add_node(2, x=-30.499, y=45.200)
    g.add_edge(1, 2, oneway=True, highway="residential", osmid=7,
               **{"posted:left": "sat", "posted:right": "sun 05:00-06:00", "posted": float("nan")})
    net = network_from_graph(g, _osm_profile())
    assert net.seg_source == ["way/7:left", "way/7:right"]
    assert net.posting(1).window_text() == "05:00-06:00"
    # the same graph through a GraphML file as networkx writes it (attributes become text)
    del g.edges[1, 2, 0]["posted"]  # GraphML has no NaN-valued text; a missing key is how it says "absent"
    nx.write_graphml(g, tmp_path / "g.graphml")
    again = read_network(tmp_path / "g.graphml", _osm_profile())
    assert again.seg_source == net.seg_source
    assert [again.posting(s).day for s in (0, 1)] == ["sat", "sun"]


# ----------------------------------------------------------- command line
def test_check_refuses_bad_posting(tmp_path, capsys):
    path = _street(tmp_path, **{"posted:right": "tue 10:00-09:00"})
    before = _snapshot(tmp_path)
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err
    assert "feature 'elm'" in err and "posted:right" in err and "Traceback" not in err
    assert _snapshot(tmp_path) == before  # nothing written, the input unchanged


def test_plan_refuses_one_pass_with_two_days(tmp_path, capsys):
    path = _street(tmp_path, service="one_pass", **{"posted:left": "mon", "posted:right": "tue"})
    before = _snapshot(tmp_path)
    lon, lat = offset(0, 0)
    assert main(["plan", str(path), "--crews", "1", "--depot", f"{lon},{lat}", "--out", "out", "-q"]) == 2
    err = capsys.readouterr().err
    assert "feature 'elm'" in err and "both_sides" in err and "Traceback" not in err
    assert _snapshot(tmp_path) == before


# --------------------------------------------------------------- plan file
def test_plan_records_postings_and_verify_catches_a_forgery(tmp_path, capsys):
    doc = grid(3, 3, service="both_sides")
    doc["features"][0]["properties"].update({"posted:left": "tue 08:00-10:00", "posted:right": "thu"})
    doc["features"][1]["properties"]["posted"] = "wed 07:00-08:00"
    path = write(tmp_path / "town.geojson", doc)
    lon, lat = offset(0, 0)
    assert main(["plan", str(path), "--crews", "2", "--depot", f"{lon},{lat}", "--out", "out", "-q"]) == 0
    raw = (tmp_path / "out" / "plan.json").read_text()
    segs = json.loads(raw)["network"]["segments"]
    got = {s["source_id"]: s.get("posted") for s in segs}
    assert got["e0_0:left"] == {"day": "tue", "window": "08:00-10:00"}
    assert got["e0_0:right"] == {"day": "thu"}  # no window key without a window
    assert got["e0_1"] == {"day": "wed", "window": "07:00-08:00"}
    assert sum(1 for s in segs if "posted" in s) == 3  # written only when set
    plan = read_plan(tmp_path / "out" / "plan.json")
    rec = next(r for r in plan.network.segments if r.source_id == "e0_0:left")
    assert (rec.posted.day, rec.posted.window) == ("tue", "08:00-10:00")
    assert main(["verify", "out/plan.json", str(path)]) == 0
    capsys.readouterr()
    # closing the street by its own id closes both of its curbs (one street on the ground)
    both = sorted(r.id for r in plan.network.segments if r.source_id.startswith("e0_0:"))
    assert resolve_closures(plan, ["e0_0"]).tolist() == both
    assert resolve_closures(plan, ["e0_0:right"]).tolist() == both[1:]
    for forged in ({"day": "fri", "window": "08:00-10:00"}, None):
        d = json.loads(raw)
        for s in d["network"]["segments"]:
            if s["source_id"] == "e0_0:left":
                if forged is None:
                    del s["posted"]
                else:
                    s["posted"] = forged
        (tmp_path / "forged.json").write_text(json.dumps(d))
        assert main(["verify", "forged.json", str(path)]) == 2
        assert re.search(r"posted time .* in the plan", capsys.readouterr().err)
