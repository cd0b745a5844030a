"""Reading and writing plan files: damaged files are refused up front by every command that reads one, and a
plan read back from its file is the same plan, written again the same bytes."""
from __future__ import annotations

import copy
import json

import pytest

from crewcut.cli.main import main
from crewcut.plans.planfile import plan_from_dict, plan_to_dict, plan_to_json, read_plan, write_plan
from helpers.plans import make_plan
from crewcut.solve.errors import InputError


def _damage(plan: dict, how: str) -> dict:
    p = copy.deepcopy(plan)
    if how == "territory_text":
        p["crews"][0]["territory"][0] = "seven"
    elif how == "traversal_without_minutes":
        del p["crews"][1]["routes"][0]["traversals"][3]["minutes"]
    elif how == "segment_not_object":
        p["network"]["segments"][2] = 17
    elif how == "crews_not_list":
        p["crews"] = {"a": 1}
    elif how == "bad_mode":
        p["crews"][0]["routes"][0]["traversals"][0]["mode"] = "sweep"
    elif how == "unknown_option":
        p["settings"]["sweep_twice"] = True
    elif how == "bad_traffic":
        p["settings"]["profile"]["traffic"] = "middle"
    elif how == "total_not_number":
        p["crews"][2]["routes"][0]["totals"]["total_min"] = "long"
    elif how == "summary_unknown":
        p["summary"] = {"longest_shift_h": 7.5}
    return p


@pytest.mark.parametrize("how", ["territory_text", "traversal_without_minutes", "segment_not_object",
                                 "crews_not_list", "bad_mode", "unknown_option", "bad_traffic",
                                 "total_not_number", "summary_unknown"])
def test_damaged_plan_is_refused_by_every_reader(tmp_path, capsys, how):
    plan = plan_to_dict(make_plan(k=3))
    path = tmp_path / "plan.json"
    path.write_text(json.dumps(_damage(plan, how)))
    before = path.read_bytes()
    with pytest.raises(InputError, match="damaged plan file"):
        read_plan(path)
    for argv in (["table", str(path)], ["rebalance", str(path), "--absent", "crew-1", "--out", str(tmp_path / "o")],
                 ["export", str(path), "--format", "csv", "--out", str(tmp_path / "x.csv")]):
        assert main(argv) == 2
        err = capsys.readouterr().err
        assert "damaged plan file" in err and "Traceback" not in err
    assert path.read_bytes() == before
    assert not (tmp_path / "o").exists() and not (tmp_path / "x.csv").exists()


def test_written_plan_reads_back_unchanged(tmp_path):
    # the file is standard JSON (RFC 8259, read here by Python's own json module, not by crewcut): the
    # document it holds is the one crewcut meant to write, and reading it gives the same typed plan
    plan = make_plan(k=2)
    path = write_plan(plan, tmp_path / "plan.json")
    assert json.loads(path.read_text(encoding="utf-8")) == plan_to_dict(plan)
    assert read_plan(path) == plan


def _round_trip(path) -> None:
    """Read a plan file and write it again: the same bytes (same input, same bytes out)."""
    data = path.read_bytes()
    again = write_plan(read_plan(path), path.with_name("again.json"))
    assert again.read_bytes() == data
    assert plan_to_json(plan_from_dict(json.loads(data))).encode("utf-8") == data


def test_round_trip_of_a_generated_plan_gives_the_same_bytes(tmp_path):
    """Plans made by 'crewcut plan' and 'crewcut route' on a generated invented town, and their replans."""
    from crewcut.demo.towngen import write_town

    town = str(write_town(tmp_path / "town.geojson", 300, 3))
    assert main(["--quiet", "plan", town, "--crews", "3", "--depot=-30.5,45.2",
                 "--out", str(tmp_path / "p"), "--workers", "1"]) == 0
    _round_trip(tmp_path / "p" / "plan.json")
    assert main(["--quiet", "rebalance", str(tmp_path / "p" / "plan.json"), "--absent", "crew-2", "--defer",
                 "--out", str(tmp_path / "r"), "--workers", "1"]) == 0
    _round_trip(tmp_path / "r" / "plan.json")
    assert main(["--quiet", "route", town, "--depot=-30.5,45.2", "--out", str(tmp_path / "one")]) == 0
    _round_trip(tmp_path / "one" / "plan.json")
    assert main(["--quiet", "rebalance", str(tmp_path / "one" / "plan.json"), "--add-crew", "relief@-30.503,45.201",
                 "--overtime", "--out", str(tmp_path / "one-r"), "--workers", "1"]) == 0
    _round_trip(tmp_path / "one-r" / "plan.json")


def test_round_trip_of_the_demo_plans_gives_the_same_bytes(tmp_path):
    """The demo's one-crew and fleet plans of the invented town Tallowmere."""
    assert main(["--quiet", "demo", "--out", str(tmp_path / "demo")]) == 0
    for name in ("one-crew", "fleet"):
        _round_trip(tmp_path / "demo" / name / "plan.json")


def test_plan_in_memory_equals_its_file_and_replans_alike(tmp_path):
    """A plan made in memory equals the plan read back from its file, so a replan from either gives the same
    bytes (the project's rule: same input and seed, same bytes out)."""
    from crewcut.demo.towngen import write_town
    from crewcut.fleet.changes import Changes
    from crewcut.fleet.crews import resolve_crews
    from crewcut.fleet.planner import plan_fleet
    from crewcut.fleet.replan import replan
    from crewcut.solve.profile import Profile
    from crewcut.solve.readers import read_network

    profile = Profile()
    write_town(tmp_path / "town.geojson", 240, 5)
    net = read_network(tmp_path / "town.geojson", profile)
    crews = resolve_crews(net, profile, k=3, depot_lonlat=(-30.5, 45.2))
    plan = plan_fleet(net, profile, crews, workers=1, source="town.geojson")
    path = write_plan(plan, tmp_path / "plan.json")
    back = read_plan(path)
    assert back == plan
    changes = Changes(absent=("crew-1",))
    a = replan(plan, net, changes, workers=1)
    b = replan(back, net, changes, workers=1)
    assert plan_to_json(a) == plan_to_json(b)
    assert [c.id for c in a.crews] == ["crew-2", "crew-3"] and a.history.generation == 1
