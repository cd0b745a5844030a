"""Malformed street files are refused with a located message, never coerced or half-read.

Sources: RFC 7946 section 3.1.1 (a GeoJSON position is an array of *numbers*);
RFC 4180 section 2 (a quoted CSV field ends with a closing quote); a text CSV file
holds no NUL byte and names each column once (common practice, no source). The
speed range 0.5 to 200 km/h (a walking pace to a motorway's) is common practice,
no source.
"""
from __future__ import annotations

import json

import pytest

from crewcut.solve.errors import InputError
from crewcut.solve.network.diagnose import check_network
from crewcut.solve.profile import Profile
from crewcut.solve.readers import read_network


def _line(coords, **props) -> dict:
    return {"type": "Feature", "properties": props, "geometry": {"type": "LineString", "coordinates": coords}}


def _geojson(tmp_path, *features) -> str:
    path = tmp_path / "streets.geojson"
    path.write_text(json.dumps({"type": "FeatureCollection", "features": list(features)}))
    return str(path)


@pytest.mark.parametrize("bad", [["-30.5", "45.2"], [True, 45.2], [-30.5, None], [-30.5], "x"])
def test_positions_must_be_json_numbers(tmp_path, bad):
    path = _geojson(tmp_path, _line([[-30.5, 45.2001], bad], id="elm"))
    before = open(path, "rb").read()
    with pytest.raises(InputError, match=r"feature 'elm': position 1 .*not a pair of JSON numbers"):
        read_network(path, Profile())
    assert open(path, "rb").read() == before  # the input is never modified


def test_json_nested_too_deeply_is_a_message_not_a_recursion_error(tmp_path):
    path = tmp_path / "deep.geojson"
    path.write_text("[" * 200_000)
    with pytest.raises(InputError, match="nested too deeply"):
        read_network(str(path), Profile())


@pytest.mark.parametrize("speed", [1e-300, 0.1, 250, "fast", True])
def test_street_speed_outside_the_working_range(tmp_path, speed):
    path = _geojson(tmp_path, _line([[-30.5, 45.2], [-30.5, 45.201]], id="oak", speed_kmh=speed))
    with pytest.raises(InputError, match=r"feature 'oak': speed_kmh .* between 0.5 and 200 km/h"):
        read_network(path, Profile())


@pytest.mark.parametrize("text, match", [
    ('from,to,length_m\na,b,"12\n', r"line 2: not readable as CSV"),            # RFC 4180: unterminated quote
    ("from,to,length_m,from\na,b,12,c\n", r"column 'from' more than once"),
    ("from,to,length_m\na,b,1\x002\n", r"line 2 holds a NUL byte"),
])
def test_csv_refusals(tmp_path, text, match):
    path = tmp_path / "edges.csv"
    path.write_text(text)
    with pytest.raises(InputError, match=match):
        read_network(str(path), Profile())


def test_duplicate_feature_ids_are_warned(tmp_path):
    path = _geojson(tmp_path, _line([[-30.5, 45.2], [-30.5, 45.201]], id="a"),
                    _line([[-30.5, 45.201], [-30.499, 45.201]], id="a"))
    report = check_network(read_network(path, Profile()), Profile())
    assert any(f.feature == "a" and "used by 2 street lines" in f.message for f in report.warnings)


def test_nothing_to_serve_is_not_plannable(tmp_path):
    path = _geojson(tmp_path, _line([[-30.5, 45.2], [-30.5, 45.201]], id="a", closed=True),
                    _line([[-30.5, 45.201], [-30.499, 45.201]], id="b", service="none"))
    report = check_network(read_network(path, Profile()), Profile())
    assert not report.plannable
    assert any("nothing to serve" in f.message for f in report.errors)


@pytest.mark.parametrize("doc, match", [
    ({"service_speed_kmh": {"default": 1e-300}}, r"service_speed_kmh.default' is 1e-300 km/h"),
    ({"deadhead_speed_kmh": {"default": 500}}, r"deadhead_speed_kmh.default' is 500 km/h"),
    ({"turn_penalty_s": {"u_turn": 1e9}}, r"turn_penalty_s.u_turn' is 1e\+09 s; it must be at most 600 s"),
    ({"turn_penalty_s": {"u_turn": -1}}, r"turn_penalty_s.u_turn' is -1"),
    ({"network": {"snap_tolerance_m": 1e6}}, r"snap_tolerance_m' is 1e\+06 m; it must be at most 50 m"),
    ({"priority": {"default": 10**30}}, r"priority.default' is"),
    ({"profile": {"depot_snap_max_m": 1e9}}, r"depot_snap_max_m' is 1e\+09 m"),
    ({"crews": [{"id": "a", "depot": [-30.5, 45.2], "depot_node": 3}]}, r"both 'depot' and 'depot_node'"),
])
def test_profile_ranges(doc, match):
    from crewcut.solve.profile import profile_from_dict

    with pytest.raises(InputError, match=match):
        profile_from_dict(doc, source="test.toml")


def test_toml_nested_too_deeply(tmp_path):
    from crewcut.solve.profile import load_profile

    path = tmp_path / "deep.toml"
    path.write_text("a = " + "[" * 100_000)
    with pytest.raises(InputError, match="nested too deeply|not valid TOML"):
        load_profile(path)


def test_closing_an_ambiguous_feature_id_is_refused(tmp_path, capsys):
    """Two separate streets with one feature id: --close ID cannot tell which is meant (exit 2, matches listed)."""
    from crewcut.cli.main import main

    grid = [_line([[-30.5 + 0.001 * i, 45.2], [-30.5 + 0.001 * (i + 1), 45.2]], id=f"row{i}") for i in range(4)]
    grid += [_line([[-30.5 + 0.001 * i, 45.2], [-30.5 + 0.001 * i, 45.201]], id=f"col{i}") for i in range(5)]
    grid += [_line([[-30.5 + 0.001 * i, 45.201], [-30.5 + 0.001 * (i + 1), 45.201]], id="twin") for i in (0, 2)]
    grid += [_line([[-30.5 + 0.001 * i, 45.201], [-30.5 + 0.001 * (i + 1), 45.201]], id=f"top{i}") for i in (1, 3)]
    town = _geojson(tmp_path, *grid)
    assert main(["-q", "plan", town, "--crews", "2", "--depot=-30.5,45.2", "--out", str(tmp_path / "p"),
                 "--workers", "1"]) == 0
    assert main(["-q", "rebalance", str(tmp_path / "p" / "plan.json"), "--close", "twin",
                 "--out", str(tmp_path / "r")]) == 2
    assert "'twin' is ambiguous: 2 separate streets" in capsys.readouterr().err
    assert not (tmp_path / "r").exists()
    assert main(["-q", "rebalance", str(tmp_path / "p" / "plan.json"), "--close", "row1",
                 "--out", str(tmp_path / "r"), "--workers", "1"]) == 0


def test_seed_range_workers_cap_and_crew_count_before_snapping(tmp_path, capsys):
    """Seeds outside [0, 2**32 - 1] are refused (scikit-learn's KMeans random_state range); more workers than
    cores are capped with a warning; a crew count above the segments needing service is refused before any
    depot is snapped; the OSM reader names a malformed coordinate instead of raising pyosmium's error."""
    from crewcut.cli.main import main

    grid = [_line([[-30.5 + 0.001 * i, 45.2], [-30.5 + 0.001 * (i + 1), 45.2]], id=f"r{i}") for i in range(3)]
    town = _geojson(tmp_path, *grid)
    base = ["plan", town, "--depot=-30.5,45.2", "--out", str(tmp_path / "p")]
    assert main([*base, "--crews", "2", "--seed", str(2**32)]) == 2
    assert main([*base, "--crews", "9"]) == 2
    err = capsys.readouterr().err
    assert "--seed is 4294967296" in err and "9 crews but only 3 segments need service" in err
    assert main([*base, "--crews", "2", "--workers", "999"]) == 0
    assert "999 workers asked for" in capsys.readouterr().err
    osm = tmp_path / "bad.osm"
    osm.write_text('<?xml version="1.0"?><osm version="0.6"><node id="1" lat="abc" lon="1"/></osm>')
    assert main(["check", str(osm)]) == 2
    assert "wrong format for coordinate" in capsys.readouterr().err


@pytest.mark.parametrize("edit, where", [
    (lambda d: d["network"]["segments"][3].__setitem__("name", ["a", "list"]), r"\$\.network\.segments\[3\]\.name"),
    (lambda d: d["crews"][0]["routes"][0]["totals"].__setitem__("total_min", "12"), r"total_min"),
    (lambda d: d.__setitem__("settings", []), r"settings"),
    (lambda d: d["network"]["nodes"][2].__setitem__("lon", 1e300), r"\$\.network\.nodes\[2\]\.lon is 1e\+300"),
])
@pytest.mark.parametrize("command", [["table"], ["sheets"], ["map"], ["report", "--out", "{o}"], ["rebalance"]])
def test_damaged_plan_is_refused_by_every_reader(tmp_path, capsys, edit, where, command):
    """A hand-damaged plan is checked against plan.schema.json (JSON Schema draft 2020-12) before any command
    uses it: exit 2 with the JSON path of the first violation, nothing written."""
    import json
    import re

    from crewcut.cli.main import main

    grid = [_line([[-30.5 + 0.001 * i, 45.2], [-30.5 + 0.001 * (i + 1), 45.2]], id=f"r{i}") for i in range(4)]
    town = _geojson(tmp_path, *grid)
    assert main(["-q", "plan", town, "--crews", "2", "--depot=-30.5,45.2", "--out", str(tmp_path / "p"),
                 "--workers", "1"]) == 0
    doc = json.loads((tmp_path / "p" / "plan.json").read_text())
    edit(doc)
    bad = tmp_path / "bad.json"
    bad.write_text(json.dumps(doc))
    capsys.readouterr()
    argv = [command[0], str(bad), *[a.format(o=tmp_path / "r.html") for a in command[1:]]]
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert "damaged plan file" in err and re.search(where, err), err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["bad.json", "p", "streets.geojson"]
