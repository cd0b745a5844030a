"""Forged plans: each one is called valid by a verifier that trusts the plan, and must fail ``verify``.

The genuine plan is made by ``crewcut plan`` for a 400-segment version of the
invented demo town (its network file and its config with eleven crews, written
by :func:`crewcut.demo.towngen.write_town_and_config`). Each forgery edits the
plan file's document as a person editing the file would, then makes the plan
consistent again wherever the forgery says so (route totals, shifts and the
summary's figures recomputed by the arithmetic below, turns relabelled where the
walk changed), and reads it back with ``plan_from_dict``. The truth each check
rests on is outside the plan: the network file and the config (the project's
rule that they are the truth; common practice, no source), the profile's turn
penalties, and the lower-bound argument of Ahr and Reinelt (2006) as
:func:`crewcut.solve.postman.bounds.fleet_lower_bound` computes it.
"""
from __future__ import annotations

import copy
import dataclasses
import json

import numpy as np
import pytest

from crewcut.cli.main import main
from crewcut.demo.towngen import write_town_and_config
from crewcut.plans.planfile import plan_from_dict
from crewcut.plans.verify import verify_plan
from crewcut.solve.circuits.turns import START, TurnModel
from crewcut.solve.costs import required_passes, service_minutes
from crewcut.solve.profile import load_profile
from crewcut.solve.readers import read_network
from crewcut.solve.result import TURNS
from helpers.plans import retotal


@pytest.fixture(scope="module")
def genuine(tmp_path_factory):
    """The plan's document, the network, the config's profile and the files."""
    folder = tmp_path_factory.mktemp("forgeries")
    town, cfg = write_town_and_config(folder, n_segments=400, seed=0)
    assert main(["plan", str(town), "--config", str(cfg), "--out", str(folder / "p"), "--workers", "1"]) == 0
    config = load_profile(cfg)
    net = read_network(town, config)
    doc = json.loads((folder / "p" / "plan.json").read_text())
    return doc, net, config, folder


# ----------------------------------------------------------------------------- the forger's tools
def relabel_turns(doc: dict, net, profile) -> None:
    """Every turn labelled and charged again with the engine's turn model (what a careful forger would do)."""
    model = TurnModel.from_network(net, profile)
    for crew in doc["crews"]:
        for r in crew["routes"]:
            trs = r["traversals"]
            seg = np.array([t["segment"] for t in trs], np.int64)
            fwd = np.array([t["from"] == int(net.seg_u[t["segment"]]) and t["to"] == int(net.seg_v[t["segment"]])
                            for t in trs], bool)
            code = np.full(seg.size, START)
            if seg.size > 1:
                code[1:] = model.classify(seg[:-1], fwd[:-1], seg[1:], fwd[1:])
            for t, c, sec in zip(trs, code.tolist(), model.seconds(code).tolist()):
                t["turn"], t["turn_minutes"] = TURNS[c], sec / 60.0


def first(doc: dict, net, config=None):
    """The first violation verify names; a forgery the plan reader already refuses (its JSON Schema check,
    plan.schema.json) comes back as kind "damaged file" with the reader's message."""
    from types import SimpleNamespace

    from crewcut.solve.errors import InputError

    try:
        plan = plan_from_dict(copy.deepcopy(doc))
    except InputError as exc:
        return SimpleNamespace(kind="damaged file", where="", message=exc.message)
    found = verify_plan(plan, net, config).violations
    assert found, "verify called a forged plan valid"
    return found[0]


# ----------------------------------------------------------------------------- the genuine plan
def test_the_genuine_plan_is_valid_with_and_without_the_config(genuine):
    doc, net, config, _ = genuine
    own = verify_plan(plan_from_dict(doc), net)
    assert own.valid and own.profile_from == "plan"
    full = verify_plan(plan_from_dict(doc), net, config)
    assert full.valid and full.profile_from == "config"


def test_the_command_says_which_settings_it_checked_against(genuine, capsys):
    doc, _, _, folder = genuine
    plan, town, cfg = folder / "p" / "plan.json", folder / "tallowmere.geojson", folder / "tallowmere.toml"
    assert main(["verify", str(plan), str(town)]) == 0
    assert "the plan's own recorded settings" in capsys.readouterr().out
    assert main(["verify", str(plan), str(town), "--config", str(cfg)]) == 0
    assert f"checked against {cfg}" in " ".join(capsys.readouterr().out.split())
    forged = copy.deepcopy(doc)
    forged["summary"]["lower_bound_min"] = forged["summary"]["longest_min"]
    forged["summary"]["gap"] = 0.0
    bad = folder / "forged.json"
    bad.write_text(json.dumps(forged))
    before = bad.read_bytes()
    assert main(["verify", str(bad), str(town), "--config", str(cfg)]) == 2
    err = capsys.readouterr().err
    assert "lower_bound_min" in err and "Traceback" not in err
    assert bad.read_bytes() == before  # the input is never modified


# ----------------------------------------------------------------------------- the forgeries
def test_1_everything_deferred_in_a_plan_never_rebalanced(genuine):
    doc, net, config, _ = genuine
    d = copy.deepcopy(doc)
    segs = d["network"]["segments"]
    d["deferred"] = [{"segment": s, "source_id": segs[s]["source_id"], "name": segs[s]["name"],
                      "class": segs[s]["class"], "priority": config.priority_for(segs[s]["class"]),
                      "crew": c["id"], "work_min": segs[s]["service_min"] * sum(segs[s]["passes"].values()),
                      "length_m": segs[s]["length_m"]}
                     for c in d["crews"] for s in c["territory"]]
    for c in d["crews"]:
        c["territory"] = []
        for r in c["routes"]:
            r["traversals"] = []
    retotal(d)
    d["summary"].update(deferred_segments=len(d["deferred"]), deferred_min=sum(x["work_min"] for x in d["deferred"]))
    v = first(d, net)
    assert v.kind == "deferred" and "only a replan" in v.message and "generation None" in v.message


def test_2_one_way_rule_switched_off_and_driven_against(genuine):
    doc, net, config, _ = genuine
    d = copy.deepcopy(doc)
    d["settings"]["profile"]["ignore_oneway"] = True
    crew = d["crews"][0]
    trs = crew["routes"][0]["traversals"]
    # a one-way street the route drives forwards: come back along it against its direction, then go on
    i = next(i for i, t in enumerate(trs) if net.seg_oneway[t["segment"]] and t["from"] != t["to"])
    t = trs[i]
    seg = d["network"]["segments"][t["segment"]]
    back = dict(t, **{"from": t["to"], "to": t["from"], "mode": "deadhead", "minutes": seg["deadhead_min"]})
    again = dict(t, mode="deadhead", minutes=seg["deadhead_min"])
    trs[i + 1:i + 1] = [back, again]
    # the passes the forged profile would need, written in so the network section agrees with it
    prof = dataclasses.replace(config, ignore_oneway=True)
    p = required_passes(net, prof)
    for s, rec in enumerate(d["network"]["segments"]):
        rec["passes"] = {"forward": int(p.forward[s]), "backward": int(p.backward[s]), "either": int(p.either[s])}
    relabel_turns(d, net, prof)
    retotal(d)
    v = first(d, net, config)
    assert v.kind == "profile" and "ignore_oneway: plan true, config false" in v.message


def test_3_service_speeds_raised_to_200(genuine):
    doc, net, config, _ = genuine
    d = copy.deepcopy(doc)
    fast = {k: 200.0 for k in d["settings"]["profile"]["service_speed_kmh"]}
    d["settings"]["profile"]["service_speed_kmh"] = fast
    smin = service_minutes(net, dataclasses.replace(config, service_speed_kmh=fast))
    for s, rec in enumerate(d["network"]["segments"]):
        rec["service_min"] = float(smin[s])
    for c in d["crews"]:
        for t in c["routes"][0]["traversals"]:
            if t["mode"] == "service":
                t["minutes"] = float(smin[t["segment"]])
    retotal(d)
    v = first(d, net, config)
    assert v.kind == "profile" and "service_speed_kmh: plan {default: 200" in v.message


def test_4_every_coordinate_moved(genuine):
    doc, net, _, _ = genuine
    d = copy.deepcopy(doc)
    rng = np.random.default_rng(4)
    dlon, dlat = rng.uniform(0.3, 0.5, 2)
    for n in d["network"]["nodes"]:
        n["lon"], n["lat"] = n["lon"] + dlon, n["lat"] + dlat
    for s in d["network"]["segments"]:
        s["coords"] = [[x + dlon, y + dlat] for x, y in s["coords"]]
    v = first(d, net)
    assert v.kind == "coordinates" and v.where == "node 0" and f"({len(d['network']['nodes'])} node(s) moved)" \
        in v.message


def test_5_one_drawn_line_replaced_by_a_detour(genuine):
    doc, net, _, _ = genuine
    d = copy.deepcopy(doc)
    s = 17
    line = d["network"]["segments"][s]["coords"]
    (x0, y0), (x1, y1) = line[0], line[-1]
    d["network"]["segments"][s]["coords"] = [[x0, y0], [x0 + 0.003, y0 + 0.003], [x1 + 0.003, y1 + 0.003], [x1, y1]]
    v = first(d, net)
    assert v.kind == "drawn line" and v.where.startswith(f"segment {s} ")


def test_6_every_street_renamed(genuine):
    doc, net, _, _ = genuine
    d = copy.deepcopy(doc)
    for i, s in enumerate(d["network"]["segments"]):
        s["name"] = f"Forged Lane {i}"
    v = first(d, net)
    assert v.kind == "name" and v.where == "segment 0" and "'Forged Lane 0' in the plan" in v.message


def test_7_a_turn_that_gives_back_two_hours(genuine):
    doc, net, _, _ = genuine
    d = copy.deepcopy(doc)
    t = d["crews"][2]["routes"][0]["traversals"][5]
    t["turn_minutes"] = -120.0
    retotal(d)
    v = first(d, net)
    # refused when read: the crew's shift went negative (the schema's minimum), or named by verify
    assert (v.kind == "damaged file" and "$.crews[2]" in v.message) or \
        (v.kind == "turn" and v.where == "crew 'sweeper-3' route-1 step 6" and "turn_minutes -120" in v.message)


def test_8_every_turn_relabelled_straight_and_free(genuine):
    doc, net, _, _ = genuine
    d = copy.deepcopy(doc)
    for c in d["crews"]:
        for t in c["routes"][0]["traversals"]:
            t["turn"], t["turn_minutes"] = "straight", 0.0
    retotal(d)
    v = first(d, net)
    assert v.kind == "turn" and v.where == "crew 'sweeper-1' route-1 step 1" and "no incoming turn" in v.message
    # and past the first step: a relabelled turn is named with the kind the geometry gives
    for c in d["crews"]:
        c["routes"][0]["traversals"][0]["turn"] = "start"
    v = first(d, net)
    assert v.kind == "turn" and "turn 'straight', but the headings" in v.message


def test_9_a_depot_moved(genuine):
    doc, net, config, _ = genuine
    d = copy.deepcopy(doc)
    crew = d["crews"][0]
    trs = crew["routes"][0]["traversals"]
    # the route turned round to start and end at another node on it, recorded as the new depot everywhere
    j = next(j for j, t in enumerate(trs) if t["from"] != crew["depot_node"])
    crew["routes"][0]["traversals"] = trs[j:] + trs[:j]
    crew["depot_node"] = trs[j]["from"]
    for o in d["settings"]["crews"]:
        if o["id"] == crew["id"]:
            o["depot_node"] = crew["depot_node"]
    relabel_turns(d, net, config)
    retotal(d)
    v = first(d, net, config)
    assert v.kind == "depot" and v.where == f"crew '{crew['id']}'" and "from the config" in v.message


@pytest.mark.parametrize("limit, kind, text", [(1.0, "over limit", "against a limit of 1"),
                                               (-5.0, "shift limit", "greater than zero")])
def test_10_shift_limit_nobody_is_over(genuine, limit, kind, text):
    doc, net, _, _ = genuine
    d = copy.deepcopy(doc)
    for c in d["crews"]:
        c["shift_limit_min"] = limit
    for o in d["settings"]["crews"]:
        o["shift_limit_min"] = limit
    assert d["summary"]["over_limit"] == []
    v = first(d, net)
    assert (v.kind == kind and text in v.message) or \
        (limit <= 0 and v.kind == "damaged file" and "shift_limit_min" in v.message)


def test_11_lower_bound_set_to_the_longest_route(genuine):
    doc, net, _, _ = genuine
    d = copy.deepcopy(doc)
    d["summary"]["lower_bound_min"] = d["summary"]["longest_min"]
    d["summary"]["gap"] = 0.0
    v = first(d, net)
    assert v.kind == "lower bound" and "exceeds the lower bound recomputed" in v.message
    assert f"{doc['summary']['lower_bound_min']:.4f}" in v.message  # the figure the planner recorded honestly


def test_a_defer_list_against_the_policy(genuine):
    # A forged history (verify cannot tell it from a true one, see the README) makes the defer list
    # admissible; the policy itself still holds: the replanner defers the lowest priority first
    # (crewcut.fleet.replan, step 8), so a crew may not defer a street of priority 3 while it still
    # serves one of priority 1 (the config's [priority] table: primary/secondary 3, residential 1).
    doc, net, config, _ = genuine
    d = copy.deepcopy(doc)
    segs = d["network"]["segments"]
    prio = {s: config.priority_for(rec["class"]) for s, rec in enumerate(segs)}
    crew = next(c for c in d["crews"] if {prio[s] for s in c["territory"]} >= {1, 3})
    p = next(s for s in crew["territory"] if prio[s] == 3)
    crew["territory"].remove(p)
    for t in crew["routes"][0]["traversals"]:
        if t["segment"] == p and t["mode"] == "service":
            t["mode"], t["minutes"] = "deadhead", segs[p]["deadhead_min"]
    d["deferred"] = [{"segment": p, "source_id": segs[p]["source_id"], "name": segs[p]["name"],
                      "class": segs[p]["class"], "priority": 3, "crew": crew["id"],
                      "work_min": segs[p]["service_min"] * sum(segs[p]["passes"].values()),
                      "length_m": segs[p]["length_m"]}]
    d["history"] = {"parent": "0" * 64, "parent_path": None, "parent_fingerprint": d["network"]["fingerprint"],
                    "generation": 1, "lineage": ["0" * 64],
                    "changes": [{"kind": "shift_limit", "crew": crew["id"], "from_min": 480.0, "to_min": 480.0}],
                    "stability": 1.0, "overflow": "defer"}
    retotal(d)
    d["summary"].update(deferred_segments=1, deferred_min=d["deferred"][0]["work_min"])
    v = first(d, net, config)
    assert v.kind == "deferred" and f"deferred segment {p} (priority 3)" in v.message
    assert "the lowest priority waits first" in v.message


def test_a_one_crew_plan_with_its_bound_raised_to_its_total(genuine, tmp_path):
    # one crew serving the whole town (crewcut route): the genuine plan passes against the config; its
    # bound, recomputed (the fleet bound for one crew, then the route engine's own proof), is not below
    # the recorded one; set to the route's total (a claimed gap of 0 %), it is refused
    _, net, config, folder = genuine
    town, cfg = folder / "tallowmere.geojson", folder / "tallowmere.toml"
    assert main(["route", str(town), "--config", str(cfg), "--out", str(tmp_path / "r")]) == 0
    doc = json.loads((tmp_path / "r" / "plan.json").read_text())
    assert verify_plan(plan_from_dict(doc), net, config).valid
    d = copy.deepcopy(doc)
    d["summary"]["lower_bound_min"] = d["summary"]["total_min"]
    d["summary"]["gap"] = 0.0
    v = first(d, net, config)
    assert v.kind == "lower bound" and f"{doc['summary']['lower_bound_min']:.4f}" in v.message


@pytest.mark.parametrize("edit, where", [
    (lambda d: d["summary"].__setitem__("gap", "none"), "gap"),
    (lambda d: d["crews"][0]["routes"][0].__setitem__("lower_bound_min", None), "lower_bound_min"),
    (lambda d: d.update(deferred=[], history={"parent": None, "generation": "two", "changes": []}),
     "generation"),
    (lambda d: d["settings"]["crews"][0].__setitem__("shift_limit_min", "long"), "shift_limit_min"),
])
def test_values_the_reader_lets_through_are_named_not_crashes(genuine, edit, where):
    # the project's bad-input rule: a clear message naming the record, never another exception
    doc, net, config, _ = genuine
    d = copy.deepcopy(doc)
    edit(d)
    assert where in str(first(d, net, config))


def test_a_recorded_profile_that_no_config_could_hold_is_refused_when_read(genuine):
    from crewcut.solve.errors import InputError

    doc = copy.deepcopy(genuine[0])
    doc["settings"]["profile"]["service_speed_kmh"] = "fast"
    with pytest.raises(InputError, match="the recorded profile is not a valid work profile: settings: "
                                         "'service_speed_kmh' must be a table"):
        plan_from_dict(doc, "plan.json")
