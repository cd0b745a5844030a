"""OpenStreetMap as it is tagged: access for the vehicle, service kinds, one-way variants, size limits.

Each expected result is the meaning a tag has on the OpenStreetMap wiki (cited from
memory at each check: Key:access, Key:service, Key:oneway, Key:junction,
Key:maxweight, Key:maxheight, Key:maxwidth, Key:maxlength), applied to small
invented files written here; unit factors are the international foot and inch
(1959 agreement: 1 ft = 0.3048 m, 1 in = 0.0254 m) and the short ton (2000 lb of
0.45359237 kg). The Helsinki extract is cross-checked with pyosmium reading the
same file.
"""
from __future__ import annotations

import dataclasses
import re

import osmium
import pytest

from helpers.geojson import offset
from crewcut.cli.main import main
from crewcut.solve.errors import InputError
from crewcut.solve.profile import Profile, builtin_profile, profile_from_dict
from crewcut.solve.readers import read_network
from crewcut.solve.readers.osmtags import parse_limit
from crewcut.solve.vehicle import Vehicle

LIGHT = Profile()  # a motor vehicle, not heavy, no size figures
HEAVY = dataclasses.replace(Profile(), vehicle=Vehicle(kind="motor", heavy=True))
WALKER = dataclasses.replace(Profile(), vehicle=Vehicle(kind="foot"), ignore_oneway=True)


def write_osm(tmp_path, ways: list[dict], name: str = "town.osm"):
    """One residential way per entry (way ids 100, 101, ...), each two nodes of its own, 100 m apart.

    The tags given replace or add to ``highway=residential``.
    """
    nodes, lines = [], []
    for i, tags in enumerate(ways):
        a, b = 2 * i + 1, 2 * i + 2
        for nid, (x, y) in ((a, (0, 200 * i)), (b, (100, 200 * i))):
            lon, lat = offset(x, y)
            nodes.append(f' <node id="{nid}" version="1" lat="{lat:.7f}" lon="{lon:.7f}"/>')
        tags = {"highway": "residential", **tags}
        tag_xml = "".join(f'<tag k="{k}" v="{v.replace(chr(34), "&quot;")}"/>' for k, v in tags.items())
        lines.append(f' <way id="{100 + i}"><nd ref="{a}"/><nd ref="{b}"/>{tag_xml}</way>')
    path = tmp_path / name
    path.write_text('<?xml version="1.0" encoding="UTF-8"?>\n<osm version="0.6" generator="hand">\n'
                    + "\n".join(nodes + lines) + "\n</osm>\n", encoding="utf-8")
    return path


def kept(tmp_path, tags: dict, profile: Profile) -> bool:
    net = read_network(write_osm(tmp_path, [tags, {}]), profile)  # way 101 keeps the network from being empty
    return "way/100" in net.seg_source


# ------------------------------------------------------------------ access
# OpenStreetMap wiki, Key:access (from memory): the most specific transport mode key
# present overrides the more general ones; for a lorry hgv > motor_vehicle > vehicle > access,
# for a walker foot > access. no/private shut the way; yes, permissive, designated open it;
# destination, delivery, customers allow access to reach places on the street itself, which
# is what a crew serving the street does; agricultural/forestry open it only to farm or forest vehicles.
@pytest.mark.parametrize("tags,light,heavy,walker", [
    ({}, True, True, True),
    ({"access": "private"}, False, False, False),
    ({"access": "no"}, False, False, False),
    ({"access": "no", "motor_vehicle": "yes"}, True, True, False),
    ({"vehicle": "no"}, False, False, True),
    ({"vehicle": "no", "motor_vehicle": "destination"}, True, True, True),
    ({"motor_vehicle": "private"}, False, False, True),
    ({"hgv": "no"}, True, False, True),
    ({"access": "no", "hgv": "designated"}, False, True, False),
    ({"motor_vehicle": "no", "foot": "yes"}, False, False, True),
    ({"foot": "no"}, True, True, False),
    ({"access": "destination"}, True, True, True),
    ({"access": "delivery"}, True, True, True),
    ({"access": "customers"}, True, True, True),
    ({"access": "permissive"}, True, True, True),
    ({"access": "agricultural"}, False, False, False),
    ({"motor_vehicle": "forestry"}, False, False, True),
])
def test_access_hierarchy(tmp_path, tags, light, heavy, walker):
    assert kept(tmp_path, tags, LIGHT) is light
    assert kept(tmp_path, tags, HEAVY) is heavy
    assert kept(tmp_path, tags, WALKER) is walker


def test_walker_keeps_footways_only_when_the_profile_lists_them(tmp_path):
    # OpenStreetMap wiki, Key:highway (from memory): highway=footway is a path mainly for walkers
    path = write_osm(tmp_path, [{"highway": "footway"}, {}])
    assert set(read_network(path, WALKER).seg_source) == {"way/101"}
    walker_on_paths = dataclasses.replace(WALKER, osm_highways=("residential", "footway"))
    assert set(read_network(path, walker_on_paths).seg_source) == {"way/100", "way/101"}


# ------------------------------------------------------------------ service kinds
# OpenStreetMap wiki, Key:service (from memory): parking_aisle is a lane inside a car park,
# driveway leads to one property; alley is a narrow street between buildings (served).
def test_service_kinds_left_out_unless_kept(tmp_path):
    path = write_osm(tmp_path, [{"highway": "service", "service": "parking_aisle"},
                                {"highway": "service", "service": "driveway"},
                                {"highway": "service", "service": "alley"}])
    assert set(read_network(path, LIGHT).seg_source) == {"way/102"}
    keep = profile_from_dict({"osm": {"keep_service_kinds": ["driveway"]}})
    assert set(read_network(path, keep).seg_source) == {"way/101", "way/102"}


def test_left_out_ways_are_counted_per_reason(tmp_path):
    path = write_osm(tmp_path, [{"access": "private"}] * 7 + [{"highway": "service", "service": "driveway"}, {}])
    net = read_network(path, LIGHT)
    msgs = [f.message for f in net.findings]
    private = [m for m in msgs if "access=private" in m]
    assert len(private) == 1  # one finding for the seven ways, not seven
    assert private[0].startswith("7 way(s) left out: access=private (first: way/100, way/101")
    assert re.search(r"way/104, \.\.\.", private[0])  # five named, the rest elided
    assert any(m.startswith("1 way(s) left out: service=driveway (first: way/107)") for m in msgs)


# ------------------------------------------------------------------ one-way
def _oneway(tmp_path, tags, profile=LIGHT):
    net = read_network(write_osm(tmp_path, [tags, {}]), profile)
    idx = [i for i, s in enumerate(net.seg_source) if s == "way/100"]
    return None if not idx else bool(net.seg_oneway[idx[0]]), net


# OpenStreetMap wiki, Key:oneway (from memory): yes/true/1 as drawn, -1 against, no/false/0 two-way;
# oneway:bicycle only speaks for cyclists. Key:junction: roundabout (and circular) imply oneway=yes;
# Key:highway: motorway and motorway_link are one-way unless tagged oneway=no.
@pytest.mark.parametrize("tags,one_way", [
    ({"oneway": "yes"}, True), ({"oneway": "true"}, True), ({"oneway": "1"}, True), ({"oneway": "-1"}, True),
    ({"oneway": "no"}, False), ({"oneway": "false"}, False), ({"oneway": "0"}, False),
    ({"junction": "roundabout"}, True), ({"junction": "circular"}, True),
    ({"junction": "roundabout", "oneway": "no"}, False),
    ({"highway": "motorway"}, True), ({"highway": "motorway_link"}, True),
    ({"highway": "motorway_link", "oneway": "no"}, False),
    ({"oneway": "yes", "oneway:bicycle": "no"}, True),
    ({"oneway:conditional": "yes @ (Mo-Fr 07:00-09:00)"}, False),
])
def test_oneway_values(tmp_path, tags, one_way):
    assert _oneway(tmp_path, tags)[0] is one_way


# OpenStreetMap wiki, Key:oneway (from memory): reversible means the direction changes over time,
# alternating that traffic takes turns (a narrow passage with lights): neither can be planned as one direction.
@pytest.mark.parametrize("value", ["reversible", "alternating"])
def test_reversible_ways_are_dropped_with_a_warning(tmp_path, value):
    got, net = _oneway(tmp_path, {"oneway": value})
    assert got is None
    assert any(f.severity == "warning" and f"left out: oneway={value}" in f.message and f.feature == "way/100"
               for f in net.findings)
    assert _oneway(tmp_path, {"oneway": value}, WALKER)[0] is False  # a walker uses it both ways


# ------------------------------------------------------------------ size limits
# OpenStreetMap wiki, Key:maxweight / Key:maxheight / Key:maxwidth / Key:maxlength (from memory):
# a plain number is tonnes (weight) or metres; units may follow after a space (t, kg, st, lbs; m, ft);
# feet and inches are written 7'6"; none/default/unsigned mean no sign limits the street.
@pytest.mark.parametrize("value,key,expected", [
    ("3.5", "maxweight", 3.5), ("3.5 t", "maxweight", 3.5), ("7500 kg", "maxweight", 7.5),
    ("10 st", "maxweight", 10 * 2000 * 0.45359237 / 1000),
    ("3", "maxheight", 3.0), ("3 m", "maxheight", 3.0), ("3.2m", "maxheight", 3.2),
    ("7'6\"", "maxheight", 7 * 0.3048 + 6 * 0.0254), ("12'", "maxwidth", 12 * 0.3048),
    ("11 ft", "maxlength", 11 * 0.3048),
    ("none", "maxheight", float("inf")), ("default", "maxweight", float("inf")),
    ("unsigned", "maxwidth", float("inf")),
])
def test_limit_values(value, key, expected):
    assert parse_limit(value, key) == pytest.approx(expected)


@pytest.mark.parametrize("value,key", [("3,5", "maxweight"), ("below_default", "maxheight"), ("0", "maxheight"),
                                       ("7'6\"", "maxweight"), ("3.5 t", "maxheight"), ("tall", "maxheight")])
def test_unreadable_limit_values_are_not_guessed(value, key):
    assert parse_limit(value, key) is None


SWEEPER = dataclasses.replace(Profile(), vehicle=Vehicle(kind="motor", heavy=True, weight_t=16.0, height_m=3.3,
                                                         width_m=2.55, length_m=8.5))


@pytest.mark.parametrize("tags,is_kept", [
    ({"maxheight": "3.0"}, False), ({"maxheight": "3.3"}, True), ({"maxheight": "7'6\""}, False),
    ({"maxheight": "12'"}, True), ({"maxweight": "3.5 t"}, False), ({"maxweight": "none"}, True),
    ({"maxwidth": "2.5"}, False), ({"maxlength": "12"}, True), ({"maxlength": "8 m"}, False),
])
def test_size_limits_against_the_vehicle(tmp_path, tags, is_kept):
    path = write_osm(tmp_path, [tags, {}])  # a second street keeps the network from being empty
    net = read_network(path, SWEEPER)
    assert ("way/100" in net.seg_source) is is_kept
    if not is_kept:
        key, raw = next(iter(tags.items()))
        f = next(f for f in net.findings if key in f.message)
        assert f.severity == "warning" and f.feature == "way/100" and "way/100" in f.message
        assert "left out" in f.message
    assert kept(tmp_path, tags, LIGHT)  # no size figures: no size limit applies


def test_unreadable_limit_keeps_the_way_and_warns(tmp_path):
    net = read_network(write_osm(tmp_path, [{"maxweight": "3,5"}, {}]), SWEEPER)
    assert "way/100" in net.seg_source
    assert any(f.severity == "warning" and "maxweight" in f.message and "could not be read" in f.message
               for f in net.findings)


def test_vehicle_too_big_for_every_street(tmp_path):
    path = write_osm(tmp_path, [{"maxheight": "2.5"}, {"maxheight": "3"}])
    with pytest.raises(InputError, match=r"vehicle\.height_m = 3\.3 rules out every street in .*town\.osm"):
        read_network(path, SWEEPER)


def test_check_refuses_a_vehicle_too_big_for_every_street(tmp_path, capsys):
    path = write_osm(tmp_path, [{"maxweight": "7.5"}])
    before = path.read_bytes()
    cfg = tmp_path / "lorry.toml"
    cfg.write_text("[vehicle]\nkind = \"motor\"\nweight_t = 18\n", encoding="utf-8")
    rc = main(["check", str(path), "--config", str(cfg)])
    out, err = capsys.readouterr()
    assert rc == 2 and "Traceback" not in out + err
    assert "vehicle.weight_t = 18 rules out every street" in " ".join(err.split())
    assert path.read_bytes() == before and sorted(p.name for p in tmp_path.iterdir()) == ["lorry.toml", "town.osm"]


# ------------------------------------------------------------------ the [vehicle] table
@pytest.mark.parametrize("table,words", [
    ({"weight_t": "3.5 t"}, "vehicle.weight_t' must be a number"),
    ({"height_m": -3}, "vehicle.height_m' is -3"),
    ({"width_m": 0}, "vehicle.width_m' is 0"),
    ({"weight_t": 61}, "vehicle.weight_t' is 61"),
    ({"length_m": 31}, "vehicle.length_m' is 31"),
    ({"height_m": 6.5}, "vehicle.height_m' is 6.5"),
    ({"colour": "orange"}, "unknown key 'vehicle.colour'"),
    ({"kind": "bicycle"}, "vehicle.kind' is 'bicycle'"),
    ({"heavy": "yes"}, "vehicle.heavy' must be true or false"),
    ({"kind": "foot", "weight_t": 3}, "vehicle.weight_t is set for a walking profile"),
])
def test_vehicle_table_is_validated(table, words):
    with pytest.raises(InputError) as exc:
        profile_from_dict({"vehicle": table}, source="my.toml")
    assert str(exc.value).startswith("my.toml") and words in str(exc.value)


def test_keep_service_kinds_is_validated():
    with pytest.raises(InputError, match="osm.keep_service_kinds"):
        profile_from_dict({"osm": {"keep_service_kinds": [3]}}, source="my.toml")


def test_shipped_profiles_name_their_vehicle():
    assert builtin_profile("walking-inspection").vehicle == Vehicle(kind="foot")
    for name in ("curb-sweeping", "ploughing"):
        v = builtin_profile(name).vehicle
        assert v.kind == "motor" and v.heavy and set(v.sizes()) == {"weight_t", "height_m", "width_m", "length_m"}


# ------------------------------------------------------------------ Helsinki
def test_helsinki_left_out_counts_match_pyosmium(helsinki_pbf, capsys, monkeypatch):
    prof = builtin_profile("curb-sweeping")
    net = read_network(helsinki_pbf, prof)
    # independent count with pyosmium: ways the profile lists whose most specific access key
    # for a lorry (Key:access, from memory: hgv, motor_vehicle, vehicle, access) says private
    private = 0
    for w in osmium.FileProcessor(str(helsinki_pbf), osmium.osm.WAY):
        t = {tag.k: tag.v for tag in w.tags}
        if t.get("highway") not in prof.osm_highways or t.get("area") == "yes":
            continue
        decisive = next((t[k] for k in ("hgv", "motor_vehicle", "vehicle", "access") if k in t), None)
        private += decisive == "private"
    assert private > 0  # sanity: the extract has private roads
    got = [f.message for f in net.findings if "left out: access=private" in f.message or
           "left out: motor_vehicle=private" in f.message or "left out: vehicle=private" in f.message]
    assert sum(int(m.split()[0]) for m in got) == private
    monkeypatch.setenv("COLUMNS", "300")
    rc = main(["check", str(helsinki_pbf)])  # 0: its one-way traps are left out (tests/test_helsinki.py)
    out = " ".join(capsys.readouterr().out.split())
    assert rc == 0 and "left out: access=private" in out and "left out: service=driveway" in out



def test_check_refuses_a_size_written_with_its_unit(tmp_path, capsys):
    path = write_osm(tmp_path, [{}])
    cfg = tmp_path / "lorry.toml"
    cfg.write_text('[vehicle]\nweight_t = "3.5 t"\n', encoding="utf-8")
    before = {p.name: p.read_bytes() for p in tmp_path.iterdir()}
    rc = main(["check", str(path), "--config", str(cfg)])
    out, err = capsys.readouterr()
    assert rc == 2 and "Traceback" not in out + err
    flat = " ".join(err.split())
    assert "lorry.toml: setting 'vehicle.weight_t' must be a number (in tonnes)" in flat and "weight_t = 3.5" in flat
    assert {p.name: p.read_bytes() for p in tmp_path.iterdir()} == before
