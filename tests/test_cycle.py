"""Sweeping cycles: one route per crew and working day, posted days and windows, verify.

The checks here do not trust the project's own clock or day logic: the plan file
is read back as JSON and checked by the small independent checker below (closed
walks, legal directions, each required pass once per cycle, clock arithmetic
with waits, posted day and window). A small case is solved exactly with
OR-tools' CP-SAT (a model written here from the textbook min-max postman
formulation: traversal counts per day, flow balance, one day per street, cut
constraints tying every served street to the depot; Frederickson, Hecht and
Kim 1978 for the problem, Ahr and Reinelt 2006 for the min-max k-CPP) and
compared with the heuristic and its bound. Invented test networks.
"""
from __future__ import annotations

import dataclasses
import itertools
import json
import math

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings, strategies as st

from crewcut.cycle.planner import pinned_days, plan_cycle
from crewcut.plans.planfile import plan_from_dict, plan_to_dict, plan_to_json
from crewcut.plans.verify import verify_plan
from crewcut.solve.calendar.cycle import make_cycle
from crewcut.solve.calendar.postings import Posting, parse_conditional, parse_posting
from crewcut.solve.costs import deadhead_minutes, required_passes, service_minutes
from crewcut.solve.errors import InputError
from crewcut.solve.network.model import SERVICE_ONE_PASS
from crewcut.solve.profile import Crew, Profile

from helpers.nets import grid_network, repaired_grid

WEEK = make_cycle("mon,tue,wed", "06:00")


def _crews(net, k: int, days_off=()) -> list[Crew]:
    return [Crew(f"c{i + 1}", 480.0, None, 0, tuple(days_off) if i == 0 else ()) for i in range(k)]


def check_cycle_plan(doc: dict, postings: dict[int, Posting]) -> None:
    """Independent checks of a cycle plan document (AssertionError on the first failure).

    Clock rule (fact of the schedule, stated in the plan's schema): a route starts at
    ``start_min``; each traversal waits, turns, then drives; a posted pass starts no
    earlier than its window opens and ends no later than it closes.
    """
    segs = doc["network"]["segments"]
    days = doc["settings"]["cycle"]["days"]
    start = int(doc["settings"]["cycle"]["shift_start"][:2]) * 60 + int(doc["settings"]["cycle"]["shift_start"][3:])
    served: dict[int, list[tuple[bool, str]]] = {}
    for crew in doc["crews"]:
        seen_days = set()
        for route in crew["routes"]:
            day = route["day"]
            assert day in days and day not in seen_days
            seen_days.add(day)
            assert route["start_min"] == start
            trs = route["traversals"]
            assert trs[0]["from"] == crew["depot_node"] and trs[-1]["to"] == crew["depot_node"]
            t = float(start)
            total = 0.0
            for a, b in zip(trs, trs[1:]):
                assert a["to"] == b["from"]
            for x in trs:
                seg = segs[x["segment"]]
                assert {x["from"], x["to"]} == {seg["from"], seg["to"]} and not seg["closed"]
                fwd = (x["from"], x["to"]) == (seg["from"], seg["to"])
                assert fwd or not seg["oneway"]
                t += x.get("wait_minutes", 0.0) + x["turn_minutes"]
                begin = t
                t += x["minutes"]
                total += x.get("wait_minutes", 0.0) + x["turn_minutes"] + x["minutes"]
                if x["mode"] == "service":
                    served.setdefault(x["segment"], []).append((fwd, day))
                    p = postings.get(x["segment"])
                    if p is not None:
                        assert day == p.day, (x["segment"], day, p.day)
                        if p.open_min is not None:
                            assert begin >= p.open_min - 0.01 and t <= p.close_min + 0.01, (x["segment"], begin, t)
            assert math.isclose(total, route["totals"]["total_min"], rel_tol=1e-6, abs_tol=1e-3)
            assert route["totals"]["total_min"] <= crew["shift_limit_min"] + 1e-6 or any(
                o["crew"] == crew["id"] and o["day"] == day for o in doc["summary"]["over_limit"])
    for s in segs:
        need = s["passes"]["forward"] + s["passes"]["backward"] + s["passes"]["either"]
        got = served.get(s["id"], [])
        assert len(got) == need, (s["id"], need, got)
        assert sum(f for f, _ in got) >= s["passes"]["forward"]
        assert sum(not f for f, _ in got) >= s["passes"]["backward"]


# ------------------------------------------------------------------ invariants on generated towns
@settings(max_examples=6, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(seed=st.integers(0, 10_000), k=st.integers(1, 2), posted_share=st.sampled_from([0.0, 0.1, 0.3]))
def test_cycle_plans_serve_every_pass_once_on_its_day_inside_its_window(seed, k, posted_share):
    profile = Profile()
    net = repaired_grid(6, 5, seed, profile)
    rng = np.random.default_rng(seed)
    need = np.flatnonzero(required_passes(net, profile).total > 0)
    post: list = [None] * net.n_segments
    chosen = rng.choice(need, size=int(posted_share * need.size), replace=False)
    for s in chosen.tolist():
        day = WEEK.days[int(rng.integers(0, 3))]
        post[s] = Posting(day, 8 * 60, 12 * 60) if rng.random() < 0.5 else Posting(day)
    net = dataclasses.replace(net, seg_posting=tuple(post))
    plan = plan_cycle(net, profile, _crews(net, k), WEEK, seed=seed, workers=1, max_iterations=30)
    doc = json.loads(plan_to_json(plan))
    check_cycle_plan(doc, {s: p for s, p in enumerate(post) if p is not None})
    assert verify_plan(plan, net, profile).valid
    assert doc["summary"]["window_misses"] == 0
    assert doc["summary"]["lower_bound_min"] <= doc["summary"]["longest_min"] + 1e-6


def test_days_are_even_and_a_day_off_gets_no_route():
    profile = Profile()
    net = repaired_grid(12, 10, 3, profile)
    cyc = make_cycle("mon,tue,wed,thu")
    plan = plan_cycle(net, profile, _crews(net, 2, days_off=("wed",)), cyc, seed=1, workers=1)
    days = {c.id: [r.day for r in c.routes] for c in plan.crews}
    assert "wed" not in days["c1"] and len(days["c1"]) == 3 and len(days["c2"]) == 4, days
    # the target for days of one crew (longest / mean day <= 1.05)
    assert plan.summary.day_balance <= 1.05, plan.summary.day_balance
    assert verify_plan(plan, net, profile).valid


def test_tampered_cycle_plans_are_refused():
    profile = Profile()
    net = repaired_grid(6, 5, 7, profile)
    need = np.flatnonzero(required_passes(net, profile).total > 0)
    post = [None] * net.n_segments
    post[int(need[0])] = Posting("tue", 8 * 60, 9 * 60)
    net = dataclasses.replace(net, seg_posting=tuple(post))
    plan = plan_cycle(net, profile, _crews(net, 1), WEEK, seed=0, workers=1)
    doc = plan_to_dict(plan)
    assert verify_plan(plan, net, profile).valid
    # a later clock start: the posted pass no longer fits its window (or the start is not the cycle's)
    bad = json.loads(json.dumps(doc))
    bad["crews"][0]["routes"][0]["start_min"] += 30
    kinds = {v.kind for v in verify_plan(plan_from_dict(bad), net, profile, first_only=False).violations}
    assert "clock" in kinds
    # the posted street's route said to run on another day
    bad = json.loads(json.dumps(doc))
    for r in bad["crews"][0]["routes"]:
        if r["day"] == "tue":
            r["day"] = "mon" if all(x["day"] != "mon" for x in bad["crews"][0]["routes"]) else "wed"
    found = verify_plan(plan_from_dict(bad), net, profile, first_only=False).violations
    assert {v.kind for v in found} & {"window", "day"}, found


# ------------------------------------------------------------------ bad input
def test_postings_that_cannot_be_planned_are_refused_with_the_street_named():
    profile = Profile()
    net = repaired_grid(5, 4, 2, profile)
    need = np.flatnonzero(required_passes(net, profile).total > 0)
    s = int(need[0])
    post = [None] * net.n_segments
    post[s] = Posting("sat")
    with pytest.raises(InputError, match=rf"segment {s} .*not in the cycle"):
        pinned_days(dataclasses.replace(net, seg_posting=tuple(post)), profile, WEEK)
    post[s] = Posting("mon", 480, 481)  # one minute; a pass at 1 km/h takes several
    slow = Profile(service_speed_kmh={"default": 1.0})
    with pytest.raises(InputError, match=rf"segment {s} .*lasts 1 min"):
        pinned_days(dataclasses.replace(net, seg_posting=tuple(post)), slow, WEEK)
    post = [Posting("mon") if i in set(need.tolist()) else None for i in range(net.n_segments)]
    tight = dataclasses.replace(net, seg_posting=tuple(post))
    crews = [Crew("c1", 30.0, None, 0)]
    with pytest.raises(InputError, match="posted for mon need"):
        plan_cycle(tight, profile, crews, WEEK, workers=1)
    for text in ("tue 10:00-08:00", "tue 8-10", "no day", "tue 25:00-26:00", ""):
        with pytest.raises(InputError):
            parse_posting(text, "feature f1")
    with pytest.raises(InputError, match="more than one condition"):
        parse_conditional("no_parking @ (Tu 08:00-10:00); no_stopping @ (Fr 09:00-10:00)", "way/1")
    with pytest.raises(InputError, match="matches 2 days"):
        make_cycle("mon1,tue1,mon2,tue2").day_of(Posting("tue"), "segment 3")


# ------------------------------------------------------------------ exact small case (CP-SAT)
def _exact_min_max_days(net, profile, depot: int, days: int, scale: int = 100) -> float:
    """The least possible longest day (minutes, no turn penalties) by CP-SAT, for one-pass streets."""
    from ortools.sat.python import cp_model

    need = required_passes(net, profile).total > 0
    svc = service_minutes(net, profile)
    dh = deadhead_minutes(net, profile)
    m, n = net.n_segments, net.n_nodes
    arcs = [(int(net.seg_u[s]), int(net.seg_v[s]), s) for s in range(m)] + \
           [(int(net.seg_v[s]), int(net.seg_u[s]), s) for s in range(m)]
    md = cp_model.CpModel()
    x = {(d, a): md.NewIntVar(0, 4, f"x{d}_{a}") for d in range(days) for a in range(len(arcs))}
    y = {(d, s): md.NewBoolVar(f"y{d}_{s}") for d in range(days) for s in range(m) if need[s]}
    longest = md.NewIntVar(0, 10 ** 9, "longest")
    for s in range(m):
        if need[s]:
            md.Add(sum(y[d, s] for d in range(days)) == 1)
    others = [v for v in range(n) if v != depot]
    for d in range(days):
        for v in range(n):
            md.Add(sum(x[d, a] for a, (t, h, _) in enumerate(arcs) if t == v)
                   == sum(x[d, a] for a, (t, h, _) in enumerate(arcs) if h == v))
        for s in range(m):
            if need[s]:
                md.Add(x[d, s] + x[d, s + m] >= y[d, s])
        for r in range(1, len(others) + 1):
            for sub in itertools.combinations(others, r):
                inside = set(sub)
                out = [x[d, a] for a, (t, h, _) in enumerate(arcs) if t in inside and h not in inside]
                for s in range(m):
                    if need[s] and (int(net.seg_u[s]) in inside or int(net.seg_v[s]) in inside):
                        md.Add(sum(out) >= y[d, s])
        cost = sum(int(round(dh[s] * scale)) * x[d, a] for a, (_, _, s) in enumerate(arcs)) + \
            sum(int(round((svc[s] - dh[s]) * scale)) * y[d, s] for s in range(m) if need[s])
        md.Add(cost <= longest)
    md.Minimize(longest)
    solver = cp_model.CpSolver()
    solver.parameters.num_workers = 1
    solver.parameters.random_seed = 0
    solver.parameters.max_time_in_seconds = 60.0
    assert solver.Solve(md) == cp_model.OPTIMAL
    return solver.Value(longest) / scale


def test_a_small_cycle_against_the_exact_cp_sat_optimum():
    # 2 x 4 grid (8 nodes, 10 streets), one-pass service, no turn penalties: the cost of a day is
    # service plus deadhead minutes, which CP-SAT minimises exactly for the longest of two days
    no_turns = {"u_turn": 0.0, "across_traffic": 0.0, "with_traffic": 0.0, "straight": 0.0}
    profile = Profile(turn_penalty_s=no_turns, service_speed_kmh={"default": 6.0},
                      deadhead_speed_kmh={"default": 30.0})
    net = grid_network(2, 4, service={i: SERVICE_ONE_PASS for i in range(10)})
    exact = _exact_min_max_days(net, profile, depot=0, days=2)
    cyc = make_cycle("mon,tue")
    plan = plan_cycle(net, profile, [Crew("c1", 480.0, None, 0)], cyc, seed=0, workers=1)
    longest = plan.summary.longest_min
    assert plan.summary.lower_bound_min <= exact + 1e-3  # the bound never exceeds the optimum
    assert longest >= exact - 1e-3  # and no plan beats it
    assert longest <= 1.35 * exact, (longest, exact)  # the heuristic stays near it on this case


# ------------------------------------------------------------------ bad input at the command line
@pytest.mark.parametrize("props, feature_id, words", [
    ({"posted": "sat 08:00-10:00"}, "e0_0", "not in the cycle"),
    ({"posted": "mon 08:00-08:01"}, "e0_0", "lasts 1 min"),
    ({"posted": "mon 10:00-08:00"}, "e0_0", "ends before it starts"),
    ({"posted": "tue 8 to 10"}, "e0_0", "cannot be read"),
])
def test_plan_refuses_postings_it_cannot_honour(tmp_path, capsys, monkeypatch, props, feature_id, words):
    from crewcut.cli.main import main
    from helpers.geojson import grid, offset, write

    monkeypatch.setenv("COLUMNS", "200")
    doc = grid(4, 3, spacing=300.0)
    for f in doc["features"]:
        if f["properties"]["id"] == feature_id:
            f["properties"].update(props)
    net = write(tmp_path / "town.geojson", doc)
    before = net.read_bytes()
    out = tmp_path / "out"
    lon, lat = offset(0, 0)
    code = main(["plan", str(net), "--crews", "1", "--depot", f"{lon},{lat}", "--days", "mon,tue,wed",
                 "--out", str(out)])
    err = capsys.readouterr().err
    assert code == 2 and words in err and feature_id in err and "Traceback" not in err, err
    assert not out.exists() or not any(out.iterdir())  # nothing written
    assert net.read_bytes() == before  # the input is never modified


def test_plan_refuses_more_posted_work_on_a_day_than_its_crews_hold(tmp_path, capsys):
    from crewcut.cli.main import main
    from helpers.geojson import grid, offset, write

    doc = grid(6, 5, spacing=400.0, posted="tue 08:00-09:00")
    net = write(tmp_path / "town.geojson", doc)
    lon, lat = offset(0, 0)
    code = main(["plan", str(net), "--crews", "1", "--depot", f"{lon},{lat}", "--days", "mon,tue",
                 "--out", str(tmp_path / "out")])
    err = capsys.readouterr().err
    assert code == 2 and "posted for tue" in err and "fix:" in err, err
    assert not (tmp_path / "out" / "plan.json").exists()


def test_plan_a_cycle_from_the_command_line_and_verify_it(tmp_path, capsys):
    from crewcut.cli.main import main
    from helpers.geojson import grid, offset, write

    doc = grid(5, 4, spacing=200.0)
    doc["features"][0]["properties"]["posted:left"] = "tue 08:00-12:00"
    doc["features"][0]["properties"]["posted:right"] = "wed"
    net = write(tmp_path / "town.geojson", doc)
    lon, lat = offset(0, 0)
    out = tmp_path / "out"
    assert main(["plan", str(net), "--crews", "2", "--depot", f"{lon},{lat}", "--days", "mon,tue,wed",
                 "--shift-start", "07:00", "--out", str(out)]) == 0
    assert main(["verify", str(out / "plan.json"), str(net)]) == 0
    doc_plan = json.loads((out / "plan.json").read_text())
    post = {}
    segs = doc_plan["network"]["segments"]
    for s in segs:
        if s.get("posted"):
            w = s["posted"].get("window", "")
            lo = hi = None
            if w:
                lo, hi = (int(t[:2]) * 60 + int(t[3:]) for t in w.split("-"))
            post[s["id"]] = Posting(s["posted"]["day"], lo, hi)
    assert len(post) == 2  # the street became two curb segments, each with its own posting
    check_cycle_plan(doc_plan, post)
    rows = (out / "signage.csv").read_text().splitlines()
    assert rows[0] == "street,feature,side,day,window,crew,basis"
    assert any(",left,tue,08:00-12:00," in r and r.endswith(",posted") for r in rows), rows[:5]
    capsys.readouterr()


# ------------------------------------------------------------------ rebalance by day
def test_a_crew_absent_on_one_day_changes_that_day_only():
    from crewcut.cycle.replan_day import replan_day
    from crewcut.fleet.changes import Changes

    profile = Profile()
    net = repaired_grid(8, 6, 11, profile)
    need = np.flatnonzero(required_passes(net, profile).total > 0)
    post = [None] * net.n_segments
    for s in need[::7].tolist():
        post[s] = Posting("tue", 8 * 60, 12 * 60)
    net = dataclasses.replace(net, seg_posting=tuple(post))
    plan = plan_cycle(net, profile, _crews(net, 3), WEEK, seed=2, workers=1, max_iterations=40)
    new = replan_day(plan, net, Changes(absent=("c2",)), "tue", profile=profile, workers=1)
    for old_c, new_c in zip(plan.crews, new.crews):
        for d in ("mon", "wed"):  # other days keep their routes, step for step
            assert [r for r in old_c.routes if r.day == d] == [r for r in new_c.routes if r.day == d]
    assert all(r.day != "tue" for r in new.crew("c2").routes)
    doc = json.loads(plan_to_json(new))
    check_cycle_plan(doc, {s: p for s, p in enumerate(post) if p is not None})  # posted streets still on tue
    assert verify_plan(new, net, profile).valid
    assert any(ch.kind == "absent" and ch.day == "tue" for ch in new.history.changes)
    # what c2 served on tuesday is now served by the others on tuesday, never on another day
    old_tue = {x.segment for r in plan.crew("c2").routes if r.day == "tue" for x in r.traversals if x.service}
    new_tue = {x.segment for c in new.crews for r in c.routes if r.day == "tue" for x in r.traversals if x.service}
    assert old_tue <= new_tue
