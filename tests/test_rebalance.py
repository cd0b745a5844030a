"""``crewcut rebalance``: new plans for absent or extra crews, closed or new streets, shorter shifts.

Every rebalanced plan is checked from outside the rebalancer: ``crewcut verify``
(crewcut.cli.commands.verify through crewcut.cli.main.main) against the network
file, the independent plan checker of tests/helpers/checks.py (plain counting and
networkx), connected territories (networkx), and the longest shift against the
min-max lower bound recomputed with networkx for the crews at work
(``helpers.checks.nx_lower_bound``: Ahr and Reinelt 2006, from memory).

Bad input must give exit status 2, a message naming what is wrong, no
traceback, no output written and the input files untouched (helper brief, "Bad
input").
"""
from __future__ import annotations

import dataclasses
import hashlib
import json
import math
from pathlib import Path

import networkx as nx
import numpy as np
import pytest

from helpers.checks import check_plan_independently, nx_lower_bound, territory_connected
from helpers.geojson import write_geojson
from helpers.nets import grid_lines
from crewcut.cli.main import main
from crewcut.solve.network.model import RawLine

DEPOT = "-30.5,45.2"


def _run(capsys, *argv) -> tuple[int, str, str]:
    code = main([str(a) for a in argv])
    cap = capsys.readouterr()
    return code, cap.out, cap.err


def _digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def _lines():
    return grid_lines(10, 7, 5)


@pytest.fixture(scope="module")
def planned(tmp_path_factory):
    """A 4-crew plan of an invented 10 x 7 grid town (one shared depot), made by 'crewcut plan'."""
    root = tmp_path_factory.mktemp("rebalance")
    town = root / "town.geojson"
    write_geojson(town, _lines())
    code = main(["plan", str(town), "--crews", "4", "--depot", DEPOT, "--workers", "1", "--out", str(root / "base")])
    assert code == 0
    return town, root / "base" / "plan.json"


def _load(path: Path) -> dict:
    return json.loads(path.read_text())


def _check_valid(capsys, plan_path: Path, network: Path) -> dict:
    """crewcut verify, the independent checker, connected territories, the networkx lower bound."""
    code, out, err = _run(capsys, "verify", plan_path, network)
    assert code == 0, err
    plan = _load(plan_path)
    check_plan_independently(plan)
    for i in range(len(plan["crews"])):
        assert territory_connected(plan, i), plan["crews"][i]["id"]
    assert plan["summary"]["longest_min"] >= nx_lower_bound(plan) - 1e-6
    assert plan["summary"]["longest_min"] >= plan["summary"]["lower_bound_min"] - 1e-6
    return plan


def _rebalance(capsys, tmp_path, plan_path, *args, out="new") -> tuple[dict, str]:
    code, stdout, err = _run(capsys, "rebalance", plan_path, "--workers", 1, "--out", tmp_path / out, *args)
    assert code == 0, err
    return _load(tmp_path / out / "plan.json"), stdout


# ----------------------------------------------------------------------------- absent and extra crews
def test_absent_crew(tmp_path, planned, capsys):
    town, base = planned
    before = _digest(base)
    parent = _load(base)
    new, stdout = _rebalance(capsys, tmp_path, base, "--absent", "crew-2")
    plan = _check_valid(capsys, tmp_path / "new" / "plan.json", town)
    assert [c["id"] for c in plan["crews"]] == ["crew-1", "crew-3", "crew-4"]
    assert _digest(base) == before  # the input plan is untouched
    # history: the parent's SHA-256 (hashlib over the file's bytes) and what changed
    assert new["history"]["parent"] == before
    assert {"kind": "absent", "crew": "crew-2"} in new["history"]["changes"]
    # changing hands, counted here from the two files: every segment of the absent crew must move,
    # and the others move only as far as balancing needs (a sensible bound: at most as many again)
    old = {s: c["id"] for c in parent["crews"] for s in c["territory"]}
    now = {s: c["id"] for c in new["crews"] for s in c["territory"]}
    absent = [s for s, c in old.items() if c == "crew-2"]
    changed = [s for s in old if now[s] != old[s]]
    assert set(absent) <= set(changed)
    assert len(changed) <= 2 * len(absent)
    assert "changed hands" in stdout and "Workload per crew" in stdout and "Changes per crew" in stdout


def test_extra_crew(tmp_path, planned, capsys):
    town, base = planned
    new, stdout = _rebalance(capsys, tmp_path, base, "--add-crew", "relief@-30.503,45.201")
    plan = _check_valid(capsys, tmp_path / "new" / "plan.json", town)
    assert [c["id"] for c in plan["crews"]][-1] == "relief"
    relief = plan["crews"][-1]
    assert relief["territory"] and relief["shift_min"] > 0
    # the extra crew's depot is the node nearest its lon/lat among the nodes of open streets, by the
    # equirectangular approximation (longitude scaled by cos(latitude); common practice, no source)
    nodes = plan["network"]["nodes"]
    used = {n for s in plan["network"]["segments"] if not s["closed"] for n in (s["from"], s["to"])}
    kx = math.cos(math.radians(45.201))
    near = min(used, key=lambda i: ((nodes[i]["lon"] + 30.503) * kx) ** 2 + (nodes[i]["lat"] - 45.201) ** 2)
    assert relief["depot_node"] == near


def test_stability_weight_keeps_streets_with_their_crews(tmp_path, planned, capsys):
    town, base = planned
    parent = _load(base)
    old = {s: c["id"] for c in parent["crews"] for s in c["territory"]}

    def changed(plan):
        now = {s: c["id"] for c in plan["crews"] for s in c["territory"]}
        return sum(now[s] != old[s] for s in old)

    free, _ = _rebalance(capsys, tmp_path, base, "--absent", "crew-2", "--stability", 0, out="w0")
    firm, _ = _rebalance(capsys, tmp_path, base, "--absent", "crew-2", "--stability", 1000, out="w1000")
    absent = sum(1 for c in old.values() if c == "crew-2")
    assert absent <= changed(firm) < changed(free)
    _check_valid(capsys, tmp_path / "w1000" / "plan.json", town)
    # the price of keeping streets: the free plan is at least as balanced
    assert free["summary"]["longest_over_mean"] <= firm["summary"]["longest_over_mean"]


def test_same_input_same_bytes(tmp_path, planned, capsys):
    town, base = planned
    a = tmp_path / "a"
    b = tmp_path / "b"
    assert _run(capsys, "rebalance", base, "--absent", "crew-3", "--workers", 1, "--out", a)[0] == 0
    assert _run(capsys, "rebalance", base, "--absent", "crew-3", "--workers", 2, "--out", b)[0] == 0
    assert (a / "plan.json").read_bytes() == (b / "plan.json").read_bytes()


def test_default_output_folder_never_the_input(tmp_path, planned, capsys):
    town, base = planned
    plan_path = tmp_path / "plan.json"
    plan_path.write_bytes(base.read_bytes())
    before = _digest(plan_path)
    for i in (1, 2):
        code, _, err = _run(capsys, "rebalance", plan_path, "--network", town, "--absent", "crew-1", "--workers", 1)
        assert code == 0, err
        assert (tmp_path / f"rebalanced-{i}" / "plan.json").is_file()
    assert _digest(plan_path) == before


# ----------------------------------------------------------------------------- closed and added streets
def _territory_cut_point(plan: dict) -> tuple[int, int] | None:
    """A (crew index, segment) whose closure splits that territory but cuts no street off (networkx)."""
    segs = plan["network"]["segments"]
    depot = plan["crews"][0]["depot_node"]
    for ci, crew in enumerate(plan["crews"]):
        terr = set(crew["territory"])
        for s in sorted(terr):
            if segs[s]["oneway"]:
                continue
            rest = terr - {s}
            if not rest:
                continue
            g = nx.MultiGraph()
            for t in segs:
                through = not t["closed"] and t["service"] == "none"
                if t["id"] != s and (through or t["id"] in rest):
                    g.add_edge(t["from"], t["to"])
            comp = nx.node_connected_component(g, segs[min(rest)]["from"])
            if all(segs[t]["from"] in comp for t in rest):
                continue  # still one piece
            # the territory falls apart; check that every street stays reachable and leavable
            d = nx.DiGraph()
            for t in segs:
                if t["closed"] or t["id"] == s:
                    continue
                d.add_edge(t["from"], t["to"])
                if not t["oneway"]:
                    d.add_edge(t["to"], t["from"])
            scc = next(c for c in nx.strongly_connected_components(d) if depot in c)
            need = [t for t in segs if t["service"] != "none" and not t["closed"] and t["id"] != s]
            if all(t["from"] in scc and t["to"] in scc for t in need):
                return ci, s
    return None


def test_closure_that_cuts_a_territory_is_repaired(tmp_path, planned, capsys):
    town, base = planned
    parent = _load(base)
    found = _territory_cut_point(parent)
    for sd in (1, 2, 3, 4, 5):  # compact territories may have no such street: plan with other seeds
        if found is not None:
            break
        base = tmp_path / f"seed-{sd}" / "plan.json"
        assert main(["plan", str(town), "--crews", "4", "--depot", DEPOT, "--workers", "1", "--seed", str(sd),
                     "--out", str(base.parent)]) == 0
        parent = _load(base)
        found = _territory_cut_point(parent)
    assert found is not None, "the test town has no street whose closure splits a territory"
    ci, seg = found
    sid = parent["network"]["segments"][seg]["source_id"]
    # the day's network file: the same streets with this one marked closed (the reader keeps ids)
    closed_town = tmp_path / "closed.geojson"
    write_geojson(closed_town, [dataclasses.replace(ln, closed=ln.source_id == sid) for ln in _lines()])
    new, stdout = _rebalance(capsys, tmp_path, base, "--network", closed_town, "--close", sid)
    plan = _check_valid(capsys, tmp_path / "new" / "plan.json", closed_town)
    assert all(seg not in c["territory"] for c in plan["crews"])
    assert plan["network"]["segments"][seg]["closed"]
    assert {"kind": "closed", "segments": [seg], "features": [sid]} in plan["history"]["changes"]


def test_closure_given_by_id_on_the_unchanged_network(tmp_path, planned, capsys):
    """--close on the plan's own network file: the plan is made on that network with the street closed."""
    town, base = planned
    parent = _load(base)
    seg = next(s["id"] for s in parent["network"]["segments"] if s["service"] == "none" and not s["closed"])
    new, _ = _rebalance(capsys, tmp_path, base, "--close", seg)
    check_plan_independently(new)
    assert new["network"]["segments"][seg]["closed"]
    assert all(t["segment"] != seg for c in new["crews"] for r in c["routes"] for t in r["traversals"])
    assert new["summary"]["longest_min"] >= nx_lower_bound(new) - 1e-6


def test_added_streets(tmp_path, planned, capsys):
    """A new cul-de-sac pair of streets from the town's south-west corner, given with --open."""
    town, base = planned
    lines = _lines()
    corner = min((tuple(ln.coords[0]) for ln in lines), key=lambda p: (p[1], p[0]))
    a = np.array(corner)
    b, c = a + [-0.0010, -0.0006], a + [-0.0020, -0.0006]
    new_lines = [RawLine("estate-1", np.array([a, b]), name="Flax Close", road_class="residential",
                         service="both_sides"),
                 RawLine("estate-2", np.array([b, c]), name="Flax Close", road_class="residential",
                         service="both_sides")]
    added = tmp_path / "estate.geojson"
    write_geojson(added, new_lines)
    new, stdout = _rebalance(capsys, tmp_path, base, "--open", added)
    segs = new["network"]["segments"]
    assert [s["source_id"] for s in segs[-2:]] == ["estate-1", "estate-2"]
    owners = {s for c in new["crews"] for s in c["territory"]}
    assert {segs[-2]["id"], segs[-1]["id"]} <= owners
    # the network file of the day: the old streets, then the new ones (the reader numbers segments in file order)
    both = tmp_path / "town-and-estate.geojson"
    write_geojson(both, lines + new_lines)
    _check_valid(capsys, tmp_path / "new" / "plan.json", both)
    # that file is also accepted as --network together with --open
    again, _ = _rebalance(capsys, tmp_path, base, "--network", both, "--open", added, out="again")
    assert again["crews"] == new["crews"]


# ----------------------------------------------------------------------------- work that does not fit
def _priority_town(tmp_path) -> tuple[Path, Path]:
    """The grid town with its column streets as class 'primary' (priority 3), rows 'residential' (priority 1)."""
    lines = [dataclasses.replace(ln, road_class="primary" if "Rise" in ln.name else "residential") for ln in _lines()]
    town = tmp_path / "classes.geojson"
    write_geojson(town, lines)
    cfg = tmp_path / "prio.toml"
    cfg.write_text("[priority]\ndefault = 2\nprimary = 3\nresidential = 1\n")
    return town, cfg


def test_defer_list_lowest_priority_first(tmp_path, capsys):
    town, cfg = _priority_town(tmp_path)
    assert _run(capsys, "plan", town, "--config", cfg, "--crews", 3, "--depot", DEPOT, "--workers", 1,
                "--out", tmp_path / "base")[0] == 0
    base = tmp_path / "base" / "plan.json"
    parent = _load(base)
    limit = 0.8 * max(c["shift_min"] for c in parent["crews"])  # two crews cannot do three crews' work
    new, stdout = _rebalance(capsys, tmp_path, base, "--absent", "crew-1", "--shift-limit", f"crew-2={limit:.0f}",
                             "--shift-limit", f"crew-3={limit:.0f}", "--defer")
    deferred = new["deferred"]
    assert deferred and "deferred" in stdout
    for c in new["crews"]:
        assert c["shift_min"] <= c["shift_limit_min"] + 1e-6
    # the config says which streets can wait: within each crew, nothing kept has a lower priority
    # than anything deferred (priorities from the config above, class from the plan's segments)
    prio = {"primary": 3, "residential": 1}
    segs = new["network"]["segments"]
    for c in new["crews"]:
        mine = [d for d in deferred if d["crew"] == c["id"]]
        if mine and c["territory"]:
            assert max(prio[segs[d["segment"]]["class"]] for d in mine) <= min(
                prio[segs[s]["class"]] for s in c["territory"])
    # the rest of the plan is valid once the deferred streets are taken as needing no service today
    today = json.loads(json.dumps(new))
    for d in deferred:
        today["network"]["segments"][d["segment"]]["service"] = "none"
    check_plan_independently(today)
    served = {s for c in new["crews"] for s in c["territory"]}
    assert not served & {d["segment"] for d in deferred}
    # crewcut verify reads the defer list: the deferred streets need no service today
    code, _, err = _run(capsys, "verify", tmp_path / "new" / "plan.json", town, "--config", cfg)
    assert code == 0, err
    # ...and a deferred street that a crew also holds is a violation
    bad = json.loads(json.dumps(new))
    bad["deferred"].append(dict(bad["deferred"][0], segment=bad["crews"][0]["territory"][0], crew=bad["crews"][0]["id"]))
    (tmp_path / "bad.json").write_text(json.dumps(bad))
    code, _, err = _run(capsys, "verify", tmp_path / "bad.json", town, "--config", cfg)
    assert code == 2 and "deferred" in err


def test_overtime_report(tmp_path, planned, capsys):
    town, base = planned
    parent = _load(base)
    limit = max(c["shift_min"] for c in parent["crews"])  # three crews cannot do four crews' work in it
    limits = [x for i in (1, 2, 3) for x in ("--shift-limit", f"crew-{i}={limit:.0f}")]
    code, stdout, err = _run(capsys, "rebalance", base, "--absent", "crew-4", *limits, "--overtime", "--workers", 1,
                             "--out", tmp_path / "ot")
    assert code == 0, err
    plan = _check_valid(capsys, tmp_path / "ot" / "plan.json", town)  # all the work stays in the plan
    over = {c["id"]: c["shift_min"] - c["shift_limit_min"] for c in plan["crews"]
            if c["shift_min"] > c["shift_limit_min"]}
    assert over and "overtime needed" in stdout
    for cid in over:
        assert cid in stdout


# ----------------------------------------------------------------------------- bad input
def _bad(capsys, tmp_path, plan: Path, network: Path, *args, expect: str) -> None:
    before = [_digest(p) for p in (plan, network)]
    listing = sorted(p.name for p in plan.parent.iterdir())
    out = tmp_path / "never"
    code, stdout, err = _run(capsys, "rebalance", plan, "--network", network, *args, "--workers", 1, "--out", out)
    assert code == 2
    assert expect in err, err
    assert "Traceback" not in err
    assert not out.exists()
    assert [_digest(p) for p in (plan, network)] == before
    assert sorted(p.name for p in plan.parent.iterdir()) == listing


def test_bad_unknown_crew(tmp_path, planned, capsys):
    town, base = planned
    _bad(capsys, tmp_path, base, town, "--absent", "crew-9", expect="unknown crew id 'crew-9' (--absent)")


def test_bad_every_crew_absent(tmp_path, planned, capsys):
    town, base = planned
    args = [x for i in range(1, 5) for x in ("--absent", f"crew-{i}")]
    _bad(capsys, tmp_path, base, town, *args, expect="every crew of the plan is absent")


def test_bad_closed_segment_does_not_exist(tmp_path, planned, capsys):
    town, base = planned
    _bad(capsys, tmp_path, base, town, "--close", "99999", expect="closed segment 99999 does not exist")
    _bad(capsys, tmp_path, base, town, "--close", "no-such-street", expect="'no-such-street' does not exist")


def test_bad_closure_cuts_the_depot_off(tmp_path, planned, capsys):
    town, base = planned
    plan = _load(base)
    depot = plan["crews"][0]["depot_node"]
    at = [s["id"] for s in plan["network"]["segments"] if depot in (s["from"], s["to"])]
    ids = tmp_path / "closures.txt"
    ids.write_text("# streets around the yard\n" + "\n".join(map(str, at)) + "\n")
    _bad(capsys, tmp_path, base, town, "--close", ids, expect="cut the depot of crew 'crew-1'")


def test_bad_closure_cuts_streets_off_every_depot(tmp_path, capsys):
    # an island of streets joined by one bridge; closing the bridge leaves the island out of reach
    lines = grid_lines(4, 3, 2, drop=0.0, none_share=0.0, oneway_rows=False)
    island = [RawLine(f"isle-{i}", ln.coords + np.array([0.01, 0.0]), road_class="residential",
                      service="both_sides") for i, ln in enumerate(lines)]
    bridge = RawLine("bridge", np.array([lines[-1].coords[1], island[0].coords[0]]), road_class="residential",
                     service="none")
    town = tmp_path / "island.geojson"
    write_geojson(town, lines + island + [bridge])
    assert _run(capsys, "plan", town, "--crews", 2, "--depot", DEPOT, "--workers", 1,
                "--out", tmp_path / "base")[0] == 0
    _bad(capsys, tmp_path, tmp_path / "base" / "plan.json", town, "--close", "bridge",
         expect="cut off from every depot: ")
    code, _, err = _run(capsys, "rebalance", tmp_path / "base" / "plan.json", "--network", town, "--close", "bridge",
                        "--out", tmp_path / "never")
    assert "isle-" in err  # the cut-off streets are named by their feature ids


def test_bad_not_a_plan(tmp_path, planned, capsys):
    town, _ = planned
    junk = tmp_path / "junk.json"
    junk.write_text(json.dumps({"type": "FeatureCollection", "features": []}))
    _bad(capsys, tmp_path, junk, town, expect="not a crewcut plan file")


def test_bad_plan_version(tmp_path, planned, capsys):
    town, base = planned
    plan = _load(base)
    plan["version"] = 99
    old = tmp_path / "old.json"
    old.write_text(json.dumps(plan))
    _bad(capsys, tmp_path, old, town, expect="version 99 is not supported")


def test_bad_network_does_not_match(tmp_path, planned, capsys):
    town, base = planned
    other = tmp_path / "other.geojson"
    write_geojson(other, grid_lines(10, 7, 6))
    _bad(capsys, tmp_path, base, other, expect="not the network the plan was made on")


def test_bad_street_closed_in_the_file_but_not_named(tmp_path, planned, capsys):
    town, base = planned
    lines = _lines()
    sid = lines[3].source_id
    closed_town = tmp_path / "closed.geojson"
    write_geojson(closed_town, [dataclasses.replace(ln, closed=ln.source_id == sid) for ln in lines])
    _bad(capsys, tmp_path, base, closed_town, expect="closed in the file but not named with --close")


def test_bad_recorded_network_gone(tmp_path, planned, capsys):
    town, base = planned
    plan = _load(base)
    plan["network"]["source"] = str(tmp_path / "moved-away.geojson")
    moved = tmp_path / "moved.json"
    moved.write_text(json.dumps(plan))
    out = tmp_path / "never"
    code, _, err = _run(capsys, "rebalance", moved, "--absent", "crew-1", "--out", out)
    assert code == 2 and "give the street network with --network FILE" in err and "Traceback" not in err
    assert not out.exists()
