"""OpenStreetMap turn restrictions: reading, routing around them, verify, and bad relations.

Sources: the OpenStreetMap wiki's Relation:restriction page (from memory): a
``type=restriction`` relation has one ``from`` way, one ``via`` node (or ways) and
one ``to`` way, both ways starting or ending at the via node; ``no_*`` forbids
the from -> to manoeuvre, ``only_*`` forbids every other one after arriving along
``from``; ``restriction:<vehicle>`` binds one class of vehicle, ``except=`` exempts
the classes it lists (``;``-separated, Key:except). The small .osm files are
written in each test (invented streets near lon -30.5, lat 45.2; no real place).
The property test checks routes with a tiny checker written here
(:func:`helpers.checks.forbidden_turns_made`), never with the route engine's own.
"""
from __future__ import annotations

import dataclasses
import hashlib
import json

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from helpers.checks import forbidden_turns_made, nx_servable_directions
from helpers.geojson import offset
from helpers.nets import repaired_grid
from crewcut.cli.main import main
from crewcut.solve.costs import required_passes
from crewcut.solve.errors import InputError
from crewcut.solve.network.scope import scope_network
from crewcut.solve.profile import Profile
from crewcut.solve.readers import read_network
from crewcut.solve.route import plan_route
from crewcut.solve.vehicle import Vehicle

LIGHT = Profile()  # a motor vehicle, not heavy
HEAVY = dataclasses.replace(Profile(), vehicle=Vehicle(kind="motor", heavy=True))
WALKER = dataclasses.replace(Profile(), vehicle=Vehicle(kind="foot"), ignore_oneway=True)

# A crossroads: centre node 1; arms west (way 10, drawn W -> C), east (11, C -> E),
# north (12, C -> N), south (13, C -> S), each 100 m; every way two-way residential.
CROSS_NODES = {1: (0, 0), 2: (-100, 0), 3: (100, 0), 4: (0, 100), 5: (0, -100)}
CROSS_WAYS = {10: ([2, 1], {}), 11: ([1, 3], {}), 12: ([1, 4], {}), 13: ([1, 5], {})}


def osm_xml(nodes: dict, ways: dict, relations: list[tuple[int, dict, list]]) -> str:
    """An .osm document: nodes {id: (east m, north m)}, ways {id: (node ids, tags)}, relations (id, tags, members)."""
    out = ['<?xml version="1.0" encoding="UTF-8"?>', '<osm version="0.6" generator="hand">']
    for nid, (x, y) in nodes.items():
        lon, lat = offset(x, y)
        out.append(f' <node id="{nid}" version="1" lat="{lat:.7f}" lon="{lon:.7f}"/>')
    for wid, (refs, tags) in ways.items():
        tags = {"highway": "residential", **tags}
        out.append(f' <way id="{wid}" version="1">' + "".join(f'<nd ref="{r}"/>' for r in refs)
                   + "".join(f'<tag k="{k}" v="{v}"/>' for k, v in tags.items()) + "</way>")
    for rid, tags, members in relations:
        out.append(f' <relation id="{rid}" version="1">'
                   + "".join(f'<member type="{t}" ref="{r}" role="{role}"/>' for t, r, role in members)
                   + "".join(f'<tag k="{k}" v="{v}"/>' for k, v in {"type": "restriction", **tags}.items())
                   + "</relation>")
    out.append("</osm>")
    return "\n".join(out) + "\n"


def write(tmp_path, relations, nodes=CROSS_NODES, ways=CROSS_WAYS, name="cross.osm"):
    path = tmp_path / name
    path.write_text(osm_xml(nodes, ways, relations), encoding="utf-8")
    return path


def restriction(rid, kind, frm, to, via=1, **extra):
    return (rid, {"restriction": kind, **extra}, [("way", frm, "from"), ("node", via, "via"), ("way", to, "to")])


def seg_of(net, way: int) -> int:
    (s,) = [i for i, src in enumerate(net.seg_source) if src == f"way/{way}"]
    return s


def centre(net) -> int:
    return net.node_label.index("node/1")


def rows(net) -> set:
    return {tuple(map(int, r)) for r in net.turn_bans}


def arrival(net, way, node):
    """(segment, forward) of arriving at ``node`` along the one segment of ``way``."""
    s = seg_of(net, way)
    return s, int(net.seg_v[s] == node)


def departure(net, way, node):
    s = seg_of(net, way)
    return s, int(net.seg_u[s] == node)


# ------------------------------------------------------------------ reading
def test_no_left_turn_bans_exactly_that_turn(tmp_path):
    net = read_network(write(tmp_path, [restriction(7, "no_left_turn", 10, 12)]), LIGHT)
    c = centre(net)
    # arriving eastbound along the west arm and leaving north is the left turn the relation names
    assert rows(net) == {arrival(net, 10, c) + departure(net, 12, c)}
    assert net.turn_ban_source == ("relation/7",)
    (note,) = net.restrictions
    assert (note.source, note.kind, note.applied, note.bans) == ("relation/7", "no_left_turn", True, 1)


def test_only_straight_on_bans_every_other_way_out(tmp_path):
    net = read_network(write(tmp_path, [restriction(8, "only_straight_on", 10, 11)]), LIGHT)
    c = centre(net)
    a = arrival(net, 10, c)
    # every departure from the centre but the east arm: north, south and back west (a U-turn)
    assert rows(net) == {a + departure(net, w, c) for w in (12, 13, 10)}
    assert all(src == "relation/8" for src in net.turn_ban_source)


@pytest.mark.parametrize("tags,profile,applies", [
    ({"except": "hgv"}, HEAVY, False),
    ({"except": "hgv"}, LIGHT, True),
    ({"except": "bus;hgv"}, HEAVY, False),
    ({"except": "bicycle"}, HEAVY, True),
    ({"except": "motor_vehicle"}, LIGHT, False),
    ({}, WALKER, False),  # a plain restriction binds vehicles, not walkers
])
def test_except_lists_the_classes_it_spares(tmp_path, tags, profile, applies):
    net = read_network(write(tmp_path, [restriction(9, "no_left_turn", 10, 12, **tags)]), profile)
    (note,) = net.restrictions
    assert note.applied is applies and bool(net.turn_bans.size) is applies
    if not applies:
        assert note.reason == "not_for_vehicle"


@pytest.mark.parametrize("key,profile,applies", [
    ("restriction:hgv", HEAVY, True), ("restriction:hgv", LIGHT, False), ("restriction:bus", HEAVY, False),
    ("restriction:motor_vehicle", LIGHT, True), ("restriction:foot", WALKER, True)])
def test_restriction_for_one_class_of_vehicle(tmp_path, key, profile, applies):
    rel = (11, {key: "no_right_turn"}, [("way", 10, "from"), ("node", 1, "via"), ("way", 13, "to")])
    net = read_network(write(tmp_path, [rel]), profile)
    (note,) = net.restrictions
    assert note.applied is applies


def test_a_member_way_missing_from_the_extract_is_reported_not_guessed(tmp_path, capsys, monkeypatch):
    path = write(tmp_path, [restriction(21, "no_left_turn", 10, 999), restriction(22, "no_u_turn", 10, 10)])
    net = read_network(path, LIGHT)
    miss, uturn = net.restrictions
    assert (miss.applied, miss.reason) == (False, "way_missing") and "way/999" in miss.detail
    c = centre(net)
    assert uturn.applied and rows(net) == {arrival(net, 10, c) + departure(net, 10, c)}
    monkeypatch.setenv("COLUMNS", "200")
    assert main(["check", str(path)]) == 0
    out = " ".join(capsys.readouterr().out.split())
    assert "Turn restrictions: 2 read" in out and "way_missing" in out and "relation/21" in out


def test_via_ways_and_time_windows_are_reported_not_applied(tmp_path):
    nodes = {**CROSS_NODES, 6: (200, 0)}
    ways = {**CROSS_WAYS, 14: ([3, 6], {})}
    rels = [(31, {"restriction": "no_u_turn"}, [("way", 10, "from"), ("way", 11, "via"), ("way", 14, "to")]),
            (32, {"restriction:conditional": "no_left_turn @ (Mo-Fr 07:00-09:00)"},
             [("way", 10, "from"), ("node", 1, "via"), ("way", 12, "to")])]
    net = read_network(write(tmp_path, rels, nodes, ways), LIGHT)
    assert [(n.source, n.applied, n.reason) for n in net.restrictions] == [
        ("relation/31", False, "via_way"), ("relation/32", False, "conditional")]
    assert net.turn_bans.size == 0


def test_only_turn_onto_a_way_the_vehicle_may_not_use_forbids_every_way_out(tmp_path):
    ways = {**CROSS_WAYS, 11: ([1, 3], {"hgv": "no"})}
    net = read_network(write(tmp_path, [restriction(41, "only_straight_on", 10, 11)], ways=ways), HEAVY)
    c = centre(net)
    assert rows(net) == {arrival(net, 10, c) + departure(net, w, c) for w in (12, 13, 10)}
    (note,) = net.restrictions
    assert note.applied and "way/11" in note.detail


# ------------------------------------------------------------------ broken relations: exit 2, nothing written
BROKEN = [
    ("no 'to'", (51, {"restriction": "no_left_turn"}, [("way", 10, "from"), ("node", 1, "via")]), "no 'to' member"),
    ("to off the via", (52, {"restriction": "no_left_turn"}, [("way", 10, "from"), ("node", 1, "via"),
                                                              ("way", 15, "to")]), "does not pass node/1"),
    ("via in the middle", (53, {"restriction": "no_left_turn"}, [("way", 16, "from"), ("node", 1, "via"),
                                                                 ("way", 12, "to")]), "in its middle"),
    ("two via nodes", (54, {"restriction": "no_left_turn"}, [("way", 10, "from"), ("node", 1, "via"),
                                                             ("node", 2, "via"), ("way", 12, "to")]), "2 'via' nodes"),
    ("from is a node", (55, {"restriction": "no_left_turn"}, [("node", 2, "from"), ("node", 1, "via"),
                                                              ("way", 12, "to")]), "is not a way"),
]


@pytest.mark.parametrize("label,rel,words", BROKEN, ids=[b[0] for b in BROKEN])
@pytest.mark.parametrize("command", ["check", "plan"])
def test_a_broken_relation_stops_the_run_with_its_id(tmp_path, capsys, label, rel, words, command):
    nodes = {**CROSS_NODES, 6: (-100, 300), 7: (100, 300)}
    ways = {**CROSS_WAYS, 15: ([6, 7], {}), 16: ([2, 1, 3], {}), 17: ([4, 6], {})}
    ways.pop(10) if label == "via in the middle" else None
    ways.pop(11) if label == "via in the middle" else None
    path = write(tmp_path, [rel], nodes, ways)
    before = hashlib.sha256(path.read_bytes()).hexdigest()
    out = tmp_path / "out"
    args = [command, str(path)] + (["--crews", "1", "--depot", ",".join(map(str, offset(0, 100))),
                                    "--out", str(out)] if command == "plan" else [])
    assert main(args) == 2
    err = " ".join(capsys.readouterr().err.split())
    assert f"relation/{rel[0]}" in err and words in err and "Traceback" not in err
    assert "remove the relation from the extract" in err  # what would fix it
    assert not out.exists()
    assert hashlib.sha256(path.read_bytes()).hexdigest() == before


# ------------------------------------------------------------------ routes, verify, tamper
# A one-way triangle 0 -> 1 -> 2 -> 0 (ways 60, 61, 62) with a drive-through spur 1 - 3 (way 63,
# highway=service: no service under the curb-sweeping profile). Arriving at 1 along way 60 and turning
# left into way 61 is forbidden; every pass into 1 must be followed by that turn, so the route has
# to go round by the spur (straight on, turn at its end, come back, turn right).
RING_NODES = {100: (0, 0), 101: (150, 0), 102: (150, 150), 103: (300, 0)}
RING_WAYS = {60: ([100, 101], {"oneway": "yes"}), 61: ([101, 102], {"oneway": "yes"}),
             62: ([102, 100], {"oneway": "yes"}), 63: ([101, 103], {"highway": "service"})}


def test_the_route_goes_round_a_forbidden_turn_and_verify_catches_a_forged_one(tmp_path, capsys, monkeypatch):
    from helpers.plans import retotal

    monkeypatch.setenv("COLUMNS", "200")
    path = write(tmp_path, [restriction(70, "no_left_turn", 60, 61, via=101)], RING_NODES, RING_WAYS, "ring.osm")
    out = tmp_path / "out"
    assert main(["plan", str(path), "--crews", "1", "--depot", ",".join(map(str, offset(0, 0))),
                 "--out", str(out)]) == 0
    assert "Turn restrictions: 1 read" in " ".join(capsys.readouterr().out.split())
    doc = json.loads((out / "plan.json").read_text(encoding="utf-8"))
    segs = doc["network"]["segments"]
    by_way = {s["source_id"]: s["id"] for s in segs}
    trs = doc["crews"][0]["routes"][0]["traversals"]
    steps = [(t["segment"], int(t["from"] == segs[t["segment"]]["from"]), t["from"]) for t in trs]
    ban = [(by_way["way/60"], 1, by_way["way/61"], 1)]
    assert forbidden_turns_made(steps, ban, doc["crews"][0]["depot_node"]) == []
    served = [t["segment"] for t in trs if t["mode"] == "service"]
    assert sorted(served) == sorted([by_way["way/60"], by_way["way/61"], by_way["way/62"]] * 2)  # both curbs
    spur = by_way["way/63"]
    assert sum(t["segment"] == spur for t in trs) == 4  # two passes into node 1, each goes round by the spur
    assert main(["verify", str(out / "plan.json"), str(path)]) == 0
    capsys.readouterr()
    # forge: cut every trip round the spur out (closed deadhead loops, so the walk stays closed and
    # every pass is still served once); totals made consistent again, so only the forbidden turns remain
    cut = [t for t in trs if t["segment"] != spur]
    doc["crews"][0]["routes"][0]["traversals"] = cut
    retotal(doc)
    forged = tmp_path / "forged.json"
    forged.write_text(json.dumps(doc), encoding="utf-8")
    assert main(["verify", str(forged), str(path)]) != 0
    text = " ".join("".join(capsys.readouterr()).split())
    assert "relation/70 forbids" in text and "step" in text

    from crewcut.plans.planfile import read_plan
    from crewcut.plans.verify import verify_plan

    from crewcut.solve.profile import builtin_profile

    verdict = verify_plan(read_plan(forged), read_network(path, builtin_profile("curb-sweeping")))
    assert verdict.violations[0].kind == "forbidden turn"


# ------------------------------------------------------------------ property: random bans on grids
def random_bans(net, rng, share: float) -> np.ndarray:
    """A random share of all turns between legal directions at every node (U-turns included)."""
    tail, head, seg, fwd = net.arcs()
    out = []
    for v in range(net.n_nodes):
        for a in np.flatnonzero(head == v).tolist():
            for d in np.flatnonzero(tail == v).tolist():
                if rng.random() < share:
                    out.append((int(seg[a]), int(fwd[a]), int(seg[d]), int(fwd[d])))
    return np.array(sorted(set(out)), np.int64).reshape(-1, 4)


@settings(max_examples=25, deadline=None, derandomize=True, database=None,
          suppress_health_check=[HealthCheck.too_slow])
@given(seed=st.integers(0, 10_000), share=st.sampled_from([0.05, 0.15, 0.3]), cols=st.integers(3, 6),
       rows=st.integers(3, 5), turn_aware=st.booleans())
def test_random_bans_routes_are_closed_serve_once_and_turn_legally(seed, share, cols, rows, turn_aware):
    net = repaired_grid(cols, rows, seed)
    rng = np.random.default_rng(seed)
    bans = random_bans(net, rng, share)
    net = dataclasses.replace(net, turn_bans=bans, turn_ban_source=tuple(f"relation/{i}" for i in range(len(bans))))
    prof = Profile()
    depot = int(rng.integers(net.n_nodes))
    try:
        scope = scope_network(net, prof, [depot])
    except InputError:  # the bans leave the depot nothing it can serve: said, not planned
        return
    route = plan_route(scope.network, prof, depot, turn_aware=turn_aware)
    trs = route.traversals
    # a closed walk from the depot, step after step (plain Python)
    assert trs[0].from_node == depot and trs[-1].to_node == depot
    assert all(p.to_node == q.from_node for p, q in zip(trs, trs[1:]))
    fwd = [int((t.from_node, t.to_node) == (int(net.seg_u[t.segment]), int(net.seg_v[t.segment]))) for t in trs]
    assert all(f or not net.seg_oneway[t.segment] for t, f in zip(trs, fwd))
    # every required pass of the scoped network exactly once
    p = required_passes(scope.network, prof)
    got_f = np.bincount([t.segment for t, f in zip(trs, fwd) if t.service and f], minlength=net.n_segments)
    got_b = np.bincount([t.segment for t, f in zip(trs, fwd) if t.service and not f], minlength=net.n_segments)
    assert (got_f >= p.forward).all() and (got_b >= p.backward).all()
    assert ((got_f + got_b) == p.total).all()
    # never a forbidden turn, except in the depot's own yard (the documented rule), and those are counted
    steps = [(t.segment, f, t.from_node) for t, f in zip(trs, fwd)]
    assert forbidden_turns_made(steps, bans, depot) == []
    assert len(forbidden_turns_made(steps, bans, -1)) == route.stats.get("yard_turns", 0)  # none without bans
    # every street left out is one networkx's line graph says no closed walk can serve
    ok = nx_servable_directions(net, depot, bans)
    full = required_passes(net, prof)
    for s in (x.segment for x in scope.left_out if x.reason != "closed"):
        assert not ((full.forward[s] == 0 or (s, 1) in ok) and (full.backward[s] == 0 or (s, 0) in ok)
                    and (full.either[s] == 0 or (s, 1) in ok or (s, 0) in ok))
    # the bound computed without bans is a relaxation: it never exceeds the route with its detours
    assert route.lower_bound_min <= route.totals.total_min + 1e-6


def test_fleet_plan_with_bans_verifies(tmp_path):
    """Three crews on a grid with random bans: verify (which reads the bans itself) accepts the plan."""
    import crewcut

    net = repaired_grid(7, 5, 3)
    bans = random_bans(net, np.random.default_rng(3), 0.1)
    net = dataclasses.replace(net, turn_bans=bans, turn_ban_source=tuple(f"relation/{i}" for i in range(len(bans))))
    lon, lat = float(np.nanmedian(net.node_lon)), float(np.nanmedian(net.node_lat))
    plan = crewcut.plan(net, profile=Profile(), k=3, depot=(lon, lat), workers=1, seed=1)
    assert crewcut.verify(plan, net, None) == []
    for crew in plan.crews:
        for r in crew.routes:
            steps = [(t.segment, int(t.from_node == net.seg_u[t.segment]), t.from_node) for t in r.traversals]
            assert forbidden_turns_made(steps, bans, crew.depot_node) == []


def test_no_exit_with_two_to_ways_bans_both(tmp_path):
    rel = (81, {"restriction": "no_exit"}, [("way", 10, "from"), ("node", 1, "via"), ("way", 12, "to"),
                                            ("way", 13, "to")])
    net = read_network(write(tmp_path, [rel]), LIGHT)
    c = centre(net)
    assert rows(net) == {arrival(net, 10, c) + departure(net, w, c) for w in (12, 13)}


# ------------------------------------------------------------------ hostile relations: a message, never a crash
MEMBER = st.tuples(st.sampled_from(["node", "way", "relation"]), st.sampled_from([1, 2, 3, 10, 11, 12, 13, 999]),
                   st.sampled_from(["from", "to", "via", "", "location_hint"]))


@settings(max_examples=40, deadline=None, derandomize=True, database=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(members=st.lists(MEMBER, max_size=5),
       tags=st.dictionaries(st.sampled_from(["restriction", "restriction:hgv", "except", "restriction:conditional"]),
                            st.sampled_from(["no_left_turn", "only_straight_on", "no_entry", "give_way", "hgv",
                                             "no_u_turn @ (22:00-06:00)", ""]), max_size=3))
def test_any_relation_is_read_or_refused_with_its_id(tmp_path_factory, members, tags):
    """Common practice, no source: whatever the members, check exits 0 or 2, with the relation named on 2."""
    import contextlib
    import io

    path = write(tmp_path_factory.mktemp("fuzz"), [(91, tags, members)])
    err = io.StringIO()
    with contextlib.redirect_stderr(err), contextlib.redirect_stdout(io.StringIO()):
        rc = main(["check", str(path)])
    assert rc in (0, 2) and "Traceback" not in err.getvalue()
    if rc == 2:
        assert "relation/91" in err.getvalue()


def test_route_command_counts_its_detours(tmp_path, capsys, monkeypatch):
    """The one-crew command on the triangle above: both passes into node 1 go round by the spur."""
    monkeypatch.setenv("COLUMNS", "200")
    path = write(tmp_path, [restriction(70, "no_left_turn", 60, 61, via=101)], RING_NODES, RING_WAYS, "ring.osm")
    assert main(["route", str(path), "--depot", ",".join(map(str, offset(0, 0))), "--out", str(tmp_path / "o")]) == 0
    out = " ".join(capsys.readouterr().out.split())
    assert "Turn restrictions: 1 read" in out
    assert "detours round forbidden turns │ 2 (" in out and "no (heuristic)" in out


def test_rebalance_keeps_to_legal_turns_and_verifies(tmp_path, capsys):
    """Two crews on the triangle, one absent the next day: the new plan still goes round the forbidden turn."""
    path = write(tmp_path, [restriction(70, "no_left_turn", 60, 61, via=101)], RING_NODES, RING_WAYS, "ring.osm")
    day1, day2 = tmp_path / "day1", tmp_path / "day2"
    assert main(["plan", str(path), "--crews", "2", "--depot", ",".join(map(str, offset(0, 0))),
                 "--out", str(day1)]) == 0
    crew = json.loads((day1 / "plan.json").read_text(encoding="utf-8"))["crews"][1]["id"]
    assert main(["rebalance", str(day1 / "plan.json"), "--network", str(path), "--absent", crew,
                 "--out", str(day2)]) == 0
    doc = json.loads((day2 / "plan.json").read_text(encoding="utf-8"))
    segs = doc["network"]["segments"]
    by_way = {s["source_id"]: s["id"] for s in segs}
    ban = [(by_way["way/60"], 1, by_way["way/61"], 1)]
    for c in doc["crews"]:
        for r in c["routes"]:
            steps = [(t["segment"], int(t["from"] == segs[t["segment"]]["from"]), t["from"]) for t in r["traversals"]]
            assert forbidden_turns_made(steps, ban, c["depot_node"]) == []
    assert main(["verify", str(day2 / "plan.json"), str(path)]) == 0


def test_a_pass_no_closed_route_can_drive_under_the_bans_is_refused_by_name(tmp_path):
    """Library call without the service scope: the triangle with its spur cut off, so the banned turn
    cannot be gone round; the pass into node 1 is named, not a crash."""
    ways = {k: v for k, v in RING_WAYS.items() if k != 63}
    net = read_network(write(tmp_path, [restriction(70, "no_left_turn", 60, 61, via=101)], RING_NODES, ways,
                             "ring.osm"), Profile())
    with pytest.raises(InputError, match=r"way/60"):
        plan_route(net, Profile(), net.node_label.index("node/100"))


def test_route_stats_count_the_detours_turns(tmp_path):
    """The route's turn counts include the turns of its detours (they are driven)."""
    path = write(tmp_path, [restriction(70, "no_left_turn", 60, 61, via=101)], RING_NODES, RING_WAYS, "ring.osm")
    from crewcut.solve.profile import builtin_profile

    prof = builtin_profile("curb-sweeping")
    net = read_network(path, prof)
    route = plan_route(net, prof, net.node_label.index("node/100"))
    assert route.stats["detours"] == 2 and route.stats["yard_turns"] == 0
    assert route.stats["u_turns"] == route.totals.u_turns == sum(t.turn == "u_turn" for t in route.traversals)
    assert route.totals.u_turns >= 2  # each detour turns round at the end of the spur (a dead end)


def test_same_file_same_seed_same_bytes(tmp_path):
    """Common practice, no source: two runs on a file with restrictions write the same plan, byte for byte."""
    path = write(tmp_path, [restriction(70, "no_left_turn", 60, 61, via=101)], RING_NODES, RING_WAYS, "ring.osm")
    outs = []
    for name in ("a", "b"):
        assert main(["plan", str(path), "--crews", "2", "--depot", ",".join(map(str, offset(0, 0))), "--seed", "4",
                     "--out", str(tmp_path / name)]) == 0
        outs.append((tmp_path / name / "plan.json").read_bytes())
    assert outs[0] == outs[1]
