"""Trips: capacities, intermediate facilities, and the split of a route into trips.

Outside checks:
* the split's dynamic programme against exhaustive enumeration of every set of cut
  points and every facility choice on small sequences (brute force written here);
* planned routes on generated networks against a small independent checker written
  here (closed walk from the depot over existing segments in legal directions, every
  required pass once, loads re-added from lengths and rates, never over a limit, empty at
  the end where required, every stop at a facility node inside its opening hours);
* the CARPTIF reader against numbers read from the instance file itself with plain
  string operations (Willemse and Joubert 2016; format in
  /work/shared/benchmarks/arc-routing/SOURCES.md section 4);
* bad input through the command line: a located message, exit status 2, nothing written.
"""
from __future__ import annotations

import itertools
import json
import math
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings, strategies as st

from crewcut.cli.main import main
from crewcut.fleet.planner import plan_fleet
from crewcut.plans.planfile import plan_from_dict, plan_to_dict
from crewcut.plans.verify import verify_plan
from crewcut.solve.costs import required_passes
from crewcut.solve.errors import InputError
from crewcut.solve.profile import Crew, Profile, profile_from_dict
from crewcut.solve.route import plan_route
from crewcut.solve.trips.config import capacities_from_config, facilities_from_config
from crewcut.solve.trips.place import place_facilities
from crewcut.solve.trips.split import CutOption, split_sequence
from crewcut.solve.trips.tripsplit import split_route

from helpers.geojson import grid, write
from helpers.nets import grid_network

CARPTIF = Path("/work/shared/benchmarks/arc-routing/carptif")


# ------------------------------------------------------------------ the split against brute force
def _brute(demand, limits, end_mask, gap, leave, options, fmin, fopen, fclose):
    """Least added minutes over every cut set and option choice (exhaustive; independent code)."""
    m, n_cap = demand.shape
    best = math.inf
    choices = [[None] + list(range(len(options[k]))) for k in range(m)]
    for pick in itertools.product(*choices):
        load = np.array(demand[0], float)
        if (load > limits + 1e-9).any():
            return math.inf
        extra_clock, cost, ok = 0.0, 0.0, True
        for k in range(m):
            j = pick[k]
            if j is not None:
                o = options[k][j]
                t = leave[k] + extra_clock
                t0 = t
                for q, f in enumerate(o.facilities):
                    t += o.legs[q]
                    t = max(t, fopen[f]) + fmin[f]
                    if t + o.slack > fclose[f] + 1e-9:
                        ok = False
                t += o.legs[-1]
                delta = (t - t0) - gap[k]
                cost += delta
                extra_clock += delta + o.slack
                for c in range(n_cap):
                    if o.mask >> c & 1:
                        load[c] = 0.0
            if k + 1 < m:
                load = load + demand[k + 1]
                if (load > limits + 1e-9).any():
                    ok = False
            elif any(load[c] > 1e-9 for c in range(n_cap) if end_mask >> c & 1):
                ok = False
            if not ok:
                break
        if ok:
            best = min(best, cost)
    return best


@settings(max_examples=60, deadline=None)
@given(st.integers(0, 10_000))
def test_split_equals_brute_force(seed):
    rng = np.random.default_rng(seed)
    m = int(rng.integers(1, 6))
    n_cap = int(rng.integers(1, 3))
    n_fac = int(rng.integers(1, 3))
    demand = rng.integers(0, 5, (m, n_cap)).astype(float)
    limits = np.maximum(demand.max(axis=0), rng.integers(1, 9, n_cap).astype(float))
    end_mask = int(rng.integers(0, 1 << n_cap))
    gap = rng.integers(0, 6, m).astype(float)
    leave = np.cumsum(rng.integers(1, 10, m)).astype(float)
    masks = [int(rng.integers(1, 1 << n_cap)) for _ in range(n_fac)]
    masks[0] = (1 << n_cap) - 1 if rng.random() < 0.5 else masks[0]
    fmin = rng.integers(0, 5, n_fac).astype(float)
    fopen = rng.integers(0, 20, n_fac).astype(float)
    fclose = fopen + rng.integers(5, 80, n_fac)
    options = []
    for _k in range(m):
        row = [CutOption((f,), (float(rng.integers(0, 8)), float(rng.integers(0, 8))), masks[f], float(rng.integers(0, 2)))
               for f in range(n_fac)]
        if n_fac == 2:
            row.append(CutOption((0, 1), tuple(float(x) for x in rng.integers(0, 8, 3)), masks[0] | masks[1], 0.0))
        options.append(row)
    want = _brute(demand, limits, end_mask, gap, leave, options, fmin, fopen, fclose)
    got = split_sequence(demand, limits, end_mask, gap, leave, options, fmin, fopen, fclose)
    if math.isinf(want):
        assert got is None
    else:
        assert got is not None and got.added_min == pytest.approx(want, abs=1e-9)


# ------------------------------------------------------------------ an independent checker of planned routes
def check_trip_route(net, profile, route, start_min: float) -> None:
    """AssertionError on the first broken rule (written from the rules, not from crewcut's code)."""
    tr = route.traversals
    assert tr[0].from_node == route.depot and tr[-1].to_node == route.depot
    for a, b in zip(tr, tr[1:]):
        assert a.to_node == b.from_node
    for t in tr:
        u, v = int(net.seg_u[t.segment]), int(net.seg_v[t.segment])
        assert (t.from_node, t.to_node) in ((u, v), (v, u))
        if net.seg_oneway[t.segment] and not profile.ignore_oneway:
            assert (t.from_node, t.to_node) == (u, v)
    facs = {f.id: f for f in profile.facilities}
    nodes = {p.facility.id: p.node for p in place_facilities(net, profile)}
    caps = profile.capacities
    load = {c.name: 0.0 for c in caps}
    clock = start_min
    by_after: dict[int, list] = {}
    for v in route.visits:
        by_after.setdefault(v.after, []).append(v)
    for i in range(len(tr) + 1):
        for v in by_after.get(i, []):
            f = facs[v.facility]
            here = route.depot if i == 0 else tr[i - 1].to_node
            assert here == nodes[f.id]
            assert abs(v.arrive_min - clock) < 1e-3  # plan files round clock times to 1e-4 min
            clock = max(clock, f.open_min) + f.minutes
            assert clock <= f.close_min + 1e-6
            for r in f.resets:
                load[r] = 0.0
        if i < len(tr):
            t = tr[i]
            clock += t.wait_minutes + t.turn_minutes + t.minutes
            if t.service:
                for c in caps:
                    rate = dict(c.per_km).get(str(net.seg_class[t.segment]), dict(c.per_km)["default"])
                    load[c.name] += rate * net.seg_length[t.segment] / 1000
                    assert load[c.name] <= c.limit * (1 + 1e-9) + 1e-9
    for c in caps:
        if c.end_empty:
            assert load[c.name] <= 1e-9
    assert route.totals.total_min == pytest.approx(clock - start_min, abs=1e-3)


def _trip_profile(limit: float, hours=("00:00-24:00", "00:00-24:00"), two=False) -> Profile:
    data = {"capacity": {"hopper": {"limit": limit, "per_km": {"default": 1.0}, "end_empty": True}},
            "facilities": [{"id": "tip", "kind": "dump_site", "node": 0, "minutes": 10, "resets": ["hopper"],
                            "hours": hours[0]}]}
    if two:
        data["capacity"]["water"] = {"limit": limit * 1.5, "per_km": {"default": 0.8}}
        data["facilities"][0]["resets"] = ["hopper", "water"]
        data["facilities"].append({"id": "tap", "kind": "water_point", "node": 3, "minutes": 4,
                                   "resets": ["water"], "hours": hours[1]})
    base = profile_from_dict(data, "test")
    return replace(Profile(), capacities=base.capacities, facilities=base.facilities)


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(rows=st.integers(2, 4), cols=st.integers(2, 5), depot=st.integers(0, 19),
       limit=st.floats(0.25, 2.0), two=st.booleans(), late_open=st.booleans())
def test_planned_trips_obey_the_rules(rows, cols, depot, limit, two, late_open):
    net = grid_network(rows, cols)
    hours = ("06:30-23:00", "00:00-24:00") if late_open else ("00:00-24:00", "05:00-23:00")
    prof = _trip_profile(limit, hours, two=two and rows * cols > 3)
    depot = depot % net.n_nodes
    route = plan_route(net, prof, depot)
    out = split_route(net, prof, route, place_facilities(net, prof), 360.0)
    check_trip_route(net, prof, out, 360.0)
    p = required_passes(net, prof)
    served = {}
    for t in out.traversals:
        if t.service:
            served[t.segment] = served.get(t.segment, 0) + 1
    assert served == {s: int(n) for s, n in enumerate(p.total) if n}
    # the split never lowers the route below the uncut one without visits, and keeps its bound honest
    assert out.stats["trip_lower_bound_min"] <= out.totals.total_min + 1e-6


def test_fleet_plan_with_trips_verifies_and_survives_the_file(tmp_path):
    net = grid_network(4, 5)
    prof = _trip_profile(0.6)
    crews = [Crew("a", 480.0, None, 0), Crew("b", 480.0, None, 19)]
    plan = plan_fleet(net, prof, crews, seed=1, workers=1)
    assert any(r.visits for c in plan.crews for r in c.routes)
    verdict = verify_plan(plan, net, prof)
    assert not verdict.violations, verdict.violations
    doc = plan_to_dict(plan)
    again = plan_from_dict(doc)
    assert plan_to_dict(again) == doc
    # a forged visit (moved to another node) is caught
    r = doc["crews"][0]["routes"][0]
    r["visits"][0]["after"] = max(0, r["visits"][0]["after"] - 1)
    forged = plan_from_dict(doc)
    assert verify_plan(forged, net, prof).violations
    for c in plan.crews:
        for route in c.routes:
            check_trip_route(net, prof, route, 360.0)
            assert route.totals.visit_min > 0 and route.totals.total_min == pytest.approx(
                route.totals.service_min + route.totals.deadhead_min + route.totals.turn_min
                + route.totals.wait_min + route.totals.visit_min)


# ------------------------------------------------------------------ the CARPTIF reader
def test_carptif_reader_matches_the_file():
    from helpers.carptif import read_instance, to_crewcut

    path = CARPTIF / "Lpr_IF" / "Lpr_IF-a-01.txt"
    if not path.exists():
        pytest.skip(f"benchmark file {path} not present")
    text = path.read_text()
    lines = text.splitlines()
    head = {ln.split(":")[0].strip(): ln.split(":")[1].strip() for ln in lines if ":" in ln and "(" not in ln}
    inst = read_instance(path)
    assert inst.header["NODES"] == int(head["NODES"]) and inst.header["CAPACITY"] == int(head["CAPACITY"])
    assert len(inst.required) == int(head["REQ_ARCS"]) + int(head["REQ_EDGES"])
    assert len(inst.other) == int(head["NOREQ_ARCS"]) + int(head["NOREQ_EDGES"])
    assert inst.labels[inst.depot] == int(head["DEPOT"])
    assert tuple(inst.labels[d] for d in inst.dumps) == tuple(int(x) for x in head["DUMPING_SITES"].split(","))
    demand = sum(int(ln.split("demand")[1]) for ln in lines if "demand" in ln)
    assert sum(r[5] for r in inst.required) == demand
    net, prof, depot = to_crewcut(inst)
    route = plan_route(net, prof, depot)
    # service minutes are the file's serv_cost sums (one pass of every required arc)
    serv = sum(int(ln.split("serv_cost")[1].split()[0]) for ln in lines if "serv_cost" in ln)
    assert route.totals.service_min == pytest.approx(serv, rel=1e-9)
    out = split_route(net, prof, route, place_facilities(net, prof), 0.0)
    check_trip_route(net, prof, out, 0.0)
    assert out.stats["trips"] >= math.ceil(demand / inst.header["CAPACITY"])


# ------------------------------------------------------------------ bad input through the command line
def _town(tmp_path, extra: str) -> tuple[Path, Path]:
    net = write(tmp_path / "town.geojson", grid(4, 4, 200.0))
    doc = json.loads(net.read_text())
    lon, lat = doc["features"][0]["geometry"]["coordinates"][0]
    cfg = tmp_path / "cfg.toml"
    cfg.write_text(f"[[crews]]\nid = \"a\"\ndepot = [{lon}, {lat}]\n" + extra.replace("LON", str(lon)).replace("LAT", str(lat)))
    return net, cfg


CAP = '[capacity.hopper]\nlimit = {limit}\nper_km = {{ default = 1.0 }}\nend_empty = true\n'
FAC = '[[facilities]]\nid = "tip"\nkind = "dump_site"\nlocation = [{loc}]\nhours = "{hours}"\nminutes = 10\nresets = ["hopper"]\n'


@pytest.mark.parametrize("extra, words", [
    (CAP.format(limit=0.05) + FAC.format(loc="LON, LAT", hours="05:00-22:00"), ["capacity.hopper", "one pass"]),
    (CAP.format(limit=2) + FAC.format(loc="LON, LAT", hours="15:00-16:00"), ["tip", "15:00-16:00"]),
    (CAP.format(limit=2) + FAC.format(loc="10.0, 10.0", hours="05:00-22:00"), ["facility 'tip'"]),
    (CAP.format(limit=2), ["capacity.hopper", "no facility resets it"]),
    (CAP.format(limit=2) + FAC.format(loc="LON, LAT", hours="22:00-05:00"), ["tip", "closes before it opens"]),
])
def test_bad_trip_settings_are_refused(tmp_path, capsys, extra, words):
    net, cfg = _town(tmp_path, extra)
    before = cfg.read_bytes()
    out = tmp_path / "out"
    code = main(["plan", str(net), "--config", str(cfg), "--out", str(out), "--workers", "1"])
    err = capsys.readouterr().err
    assert code == 2, err
    assert "Traceback" not in err
    for w in words:
        assert w in err
    assert not out.exists() or not any(out.iterdir())
    assert cfg.read_bytes() == before


def test_unreachable_facility_is_refused(tmp_path, capsys):
    # a facility on a one-way spur that can be entered and never left
    net_path = write(tmp_path / "town.geojson", grid(3, 3, 200.0))
    doc = json.loads(net_path.read_text())
    a = doc["features"][0]["geometry"]["coordinates"][0]
    b = [a[0] - 0.01, a[1] - 0.01]
    doc["features"].append({"type": "Feature", "geometry": {"type": "LineString", "coordinates": [a, b]},
                            "properties": {"id": "spur", "oneway": "yes", "service": "none"}})
    net_path.write_text(json.dumps(doc))
    cfg = tmp_path / "cfg.toml"
    cfg.write_text(f"[[crews]]\nid = \"a\"\ndepot = [{a[0]}, {a[1]}]\n" + CAP.format(limit=2)
                   + FAC.format(loc=f"{b[0]}, {b[1]}", hours="05:00-22:00"))
    out = tmp_path / "out"
    code = main(["plan", str(net_path), "--config", str(cfg), "--out", str(out), "--workers", "1"])
    err = capsys.readouterr().err
    assert code == 2, err
    assert "tip" in err and "reached" in err
    assert not out.exists() or not any(out.iterdir())


def test_trips_settings_refuse_unknown_keys():
    with pytest.raises(InputError, match="unknown key 'size'"):
        capacities_from_config({"hopper": {"limit": 1, "per_km": {"default": 1}, "size": 3}}, "t")
    caps = capacities_from_config({"hopper": {"limit": 1, "per_km": {"default": 1}}}, "t")
    with pytest.raises(InputError, match="not a capacity"):
        facilities_from_config([{"id": "x", "kind": "dump_site", "node": 0, "resets": ["salt"]}], caps, "t")


def test_route_command_splits_and_verify_accepts(tmp_path, capsys):
    net, cfg = _town(tmp_path, CAP.format(limit=1.5) + FAC.format(loc="LON, LAT", hours="05:00-22:00"))
    out = tmp_path / "out"
    assert main(["route", str(net), "--config", str(cfg), "--out", str(out)]) == 0
    doc = json.loads((out / "plan.json").read_text())
    route = doc["crews"][0]["routes"][0]
    assert route["visits"] and route["totals"]["visit_min"] == pytest.approx(10 * len(route["visits"]))
    capsys.readouterr()
    assert main(["verify", str(out / "plan.json"), str(net), "--config", str(cfg)]) == 0
    # a forged load: the same plan checked against a smaller hopper fails, naming the capacity
    cfg.write_text(cfg.read_text().replace("limit = 1.5", "limit = 1.0"))
    assert main(["verify", str(out / "plan.json"), str(net), "--config", str(cfg)]) == 2
    assert "hopper" in capsys.readouterr().err


def test_cycle_day_routes_get_trips_from_their_clock_start():
    from crewcut.cycle.planner import plan_cycle
    from crewcut.solve.calendar.cycle import make_cycle

    net = grid_network(4, 5)
    cyc = make_cycle("mon,tue", "07:00")
    prof = replace(_trip_profile(0.6), cycle=cyc)
    crews = [Crew("a", 480.0, None, 0), Crew("b", 480.0, None, 19)]
    plan = plan_cycle(net, prof, crews, cyc, seed=1, workers=1)
    routes = [r for c in plan.crews for r in c.routes]
    assert all(r.start_min == 420.0 for r in routes) and all(r.visits for r in routes)
    assert not verify_plan(plan, net, prof).violations
    for r in routes:
        check_trip_route(net, prof, r, r.start_min)
