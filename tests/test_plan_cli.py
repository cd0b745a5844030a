"""``crewcut plan`` and ``crewcut verify`` end to end, and every bad input of the planning issue.

Bad input must give exit status 2, a message naming what is wrong, no traceback,
no output file, and an untouched input (brief: "Bad input").
"""
from __future__ import annotations

import hashlib
import json
from pathlib import Path

import numpy as np
import pytest

from helpers.checks import check_plan_independently, nx_lower_bound, territory_connected
from helpers.geojson import write_geojson
from helpers.nets import grid_lines
from crewcut.cli.main import main
from crewcut.solve.network.model import RawLine


def _run(capsys, *argv) -> tuple[int, str, str]:
    code = main([str(a) for a in argv])
    cap = capsys.readouterr()
    return code, cap.out, cap.err


@pytest.fixture()
def town(tmp_path) -> Path:
    path = tmp_path / "grid.geojson"
    write_geojson(path, grid_lines(9, 6, 11))
    return path


def _digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def test_plan_then_verify(tmp_path, town, capsys):
    out = tmp_path / "out"
    code, stdout, err = _run(capsys, "plan", town, "--crews", 3, "--depot", "-30.5,45.2", "--workers", 1,
                             "--out", out)
    assert code == 0, err
    plan = json.loads((out / "plan.json").read_text())
    check_plan_independently(plan)
    assert plan["summary"]["longest_min"] >= nx_lower_bound(plan) - 1e-6
    assert "lower bound" in stdout and "gap" in stdout
    code, stdout, err = _run(capsys, "verify", out / "plan.json", town)
    assert code == 0, err
    assert stdout.startswith("valid: 3 crews")


def test_same_seed_same_bytes_whatever_the_workers(tmp_path, town, capsys):
    a, b = tmp_path / "a", tmp_path / "b"
    assert _run(capsys, "plan", town, "--crews", 3, "--depot", "-30.5,45.2", "--workers", 1, "--out", a)[0] == 0
    assert _run(capsys, "plan", town, "--crews", 3, "--depot", "-30.5,45.2", "--workers", 2, "--out", b)[0] == 0
    assert (a / "plan.json").read_bytes() == (b / "plan.json").read_bytes()


def test_verify_names_a_tampered_plan(tmp_path, town, capsys):
    out = tmp_path / "out"
    assert _run(capsys, "plan", town, "--crews", 2, "--depot", "-30.5,45.2", "--workers", 1, "--out", out)[0] == 0
    plan = json.loads((out / "plan.json").read_text())
    plan["crews"][0]["routes"][0]["traversals"].pop()
    bad = tmp_path / "bad.json"
    bad.write_text(json.dumps(plan))
    code, _, err = _run(capsys, "verify", bad, town)
    assert code == 2
    assert "not at the depot" in err and "Traceback" not in err


def _bad(capsys, tmp_path, network: Path, *args, expect: str) -> None:
    before = _digest(network)
    out = tmp_path / "never"
    code, stdout, err = _run(capsys, "plan", network, *args, "--workers", 1, "--out", out)
    assert code == 2
    assert expect in err, err
    assert "Traceback" not in err
    assert not out.exists()
    assert _digest(network) == before


def test_bad_zero_crews(tmp_path, town, capsys):
    _bad(capsys, tmp_path, town, "--crews", 0, "--depot", "-30.5,45.2", expect="at least one crew")


def test_bad_more_crews_than_segments(tmp_path, town, capsys):
    _bad(capsys, tmp_path, town, "--crews", 10_000, "--depot", "-30.5,45.2", expect="segments need service")


def test_bad_unknown_crew_id(tmp_path, town, capsys):
    cfg = tmp_path / "crews.toml"
    cfg.write_text('[[crews]]\nid = "north"\ndepot = [-30.5, 45.2]\n')
    _bad(capsys, tmp_path, town, "--config", cfg, "--crew", "south", expect="unknown crew id 'south'")


def test_bad_depot_cannot_reach(tmp_path, capsys):
    # an island joined only by a closed bridge: no depot can reach it
    lines = grid_lines(4, 3, 2, drop=0.0, none_share=0.0, oneway_rows=False)
    island = [RawLine(f"isle-{i}", ln.coords + np.array([0.01, 0.0]), road_class="residential",
                      service="both_sides") for i, ln in enumerate(lines)]
    bridge = RawLine("bridge", np.array([lines[-1].coords[1], island[0].coords[0]]), road_class="residential",
                     service="none", closed=True)
    path = tmp_path / "island.geojson"
    write_geojson(path, lines + island + [bridge])
    _bad(capsys, tmp_path, path, "--crews", 2, "--depot", "-30.5,45.2", "--unservable", "refuse", expect="isle-")


def test_bad_shift_limit_no_route_can_meet(tmp_path, town, capsys):
    cfg = tmp_path / "short.toml"
    cfg.write_text("[profile]\nshift_limit_min = 0.5\n")
    _bad(capsys, tmp_path, town, "--config", cfg, "--crews", 2, "--depot", "-30.5,45.2",
         expect="no route can meet the shift limit")


def test_bad_depot_text(tmp_path, town, capsys):
    _bad(capsys, tmp_path, town, "--crews", 2, "--depot", "north", expect="not LON,LAT")


def test_bad_time_limit(tmp_path, town, capsys):
    _bad(capsys, tmp_path, town, "--crews", 2, "--depot", "-30.5,45.2", "--time-limit", "-1",
         expect="--time-limit")


def _helsinki_reachable(pbf: Path, path: Path) -> None:
    """The Helsinki extract cut to the streets a closed route from the centre can reach, as GeoJSON.

    The extract is cut at its border, so some one-way pieces can be entered but not
    left (or the other way round); planning all of it is bad input (tested above
    on an invented island). networkx's strongly connected component of the depot
    says which streets a closed route can serve.
    """
    import networkx as nx

    from crewcut.solve.network.model import SERVICE_LABELS
    from crewcut.solve.profile import Profile
    from crewcut.solve.readers import read_network

    net = read_network(pbf, Profile())
    depot, _ = net.nearest_node(24.94, 60.17)
    scc = next(c for c in nx.strongly_connected_components(net.to_networkx()) if depot in c)
    keep = [s for s in range(net.n_segments) if net.seg_u[s] in scc and net.seg_v[s] in scc and not net.seg_closed[s]]
    assert len(keep) > 0.8 * net.n_segments
    feats = [{"type": "Feature",
              "properties": {"id": net.seg_source[s] + f"#{s}", "name": net.seg_name[s], "class": net.seg_class[s],
                             "oneway": bool(net.seg_oneway[s]),
                             "service": SERVICE_LABELS[int(net.seg_service[s])]},
              "geometry": {"type": "LineString", "coordinates": net.seg_coords[s].tolist()}} for s in keep]
    path.write_text(json.dumps({"type": "FeatureCollection", "features": feats}))


@pytest.mark.slow
def test_helsinki_four_crews(tmp_path, helsinki_pbf, capsys):
    """Real streets (OpenStreetMap extract of central Helsinki, ODbL): plan, verify, check independently."""
    town = tmp_path / "helsinki-reachable.geojson"
    _helsinki_reachable(helsinki_pbf, town)
    out = tmp_path / "hki"
    code, stdout, err = _run(capsys, "plan", town, "--crews", 4, "--depot", "24.94,60.17",
                             "--time-limit", 20, "--out", out)
    assert code == 0, err
    plan = json.loads((out / "plan.json").read_text())
    check_plan_independently(plan)
    for i in range(4):
        assert territory_connected(plan, i)
    assert plan["summary"]["longest_min"] >= nx_lower_bound(plan) - 1e-6
    print(f"\nHelsinki, 4 crews: longest/mean {plan['summary']['longest_over_mean']:.3f}, "
          f"gap to the lower bound {plan['summary']['gap']:.3f}")
    code, stdout, err = _run(capsys, "verify", out / "plan.json", town)
    assert code == 0, err
    assert "valid: 4 crews" in stdout


# The library names its parameters, the command line the flags the user typed. The
# parameters are the library functions' own (inspect.signature); the flags are the
# sub-commands' own (their argparse parsers, as `crewcut plan --help` lists them).
@pytest.mark.parametrize("args,words", [
    (("--crews", 0, "--depot", "-30.5,45.2"), "--crews is 0"),
    (("--crews", 2, "--depot", "-30.5,45.2", "--seed", "-1"), "--seed is -1"),
    (("--depot", "-30.5,45.2"), "--depot was given without --crews"),
    (("--crews", 2, "--depot", "-29.0,45.2"), "--depot at -29.000000,45.200000 is"),
])
def test_bad_input_names_the_flag_typed(tmp_path, town, capsys, args, words):
    _bad(capsys, tmp_path, town, *args, expect=words)


def test_library_errors_name_parameters_not_flags(town):
    import inspect
    import pickle

    from crewcut.fleet.crews import resolve_crews
    from crewcut.fleet.executor import check_workers
    from crewcut.fleet.planner import plan_fleet
    from crewcut.solve.errors import InputError
    from crewcut.solve.profile import load_profile
    from crewcut.solve.readers import read_network

    profile = load_profile(None)
    net = read_network(town, profile)
    cases = [(resolve_crews, lambda: resolve_crews(net, profile, k=0), "k", "`k` is 0"),
             (resolve_crews, lambda: resolve_crews(net, profile, depot_lonlat=(-30.5, 45.2)), "k", "`depot_lonlat`"),
             (check_workers, lambda: check_workers(0), "workers", "`workers` is 0"),
             (plan_fleet, lambda: plan_fleet(net, profile, resolve_crews(net, profile, k=2, depot_lonlat=(-30.5, 45.2)),
                                             seed=-1), "seed", "`seed` is -1")]
    for fn, call, param, words in cases:
        with pytest.raises(InputError) as exc:
            call()
        err = exc.value
        assert err.param == param and param in inspect.signature(fn).parameters
        assert words in err.message and "--" not in str(err)
        again = pickle.loads(pickle.dumps(err))  # as it comes back from a worker process
        assert (again.message, again.hint, again.param) == (err.message, err.hint, err.param)


def test_every_flag_in_the_table_is_a_flag_of_a_command(capsys):
    import re

    from crewcut.cli.flags import FLAGS
    from crewcut.cli.main import COMMANDS

    helps = ""
    for name in COMMANDS:
        with pytest.raises(SystemExit):
            main([name, "--help"])
        helps += capsys.readouterr().out
    typed = set(re.findall(r"(?<![\w-])--[a-z][a-z-]*", helps))
    assert set(FLAGS.values()) <= typed, set(FLAGS.values()) - typed
