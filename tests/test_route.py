"""One crew's route (crewcut.solve.route.plan_route) and ``crewcut route``, checked from outside.

Every route is checked from the network arrays and networkx alone
(``helpers.checks.assert_closed_walk``), and the passes it serves are counted against
the trade's rules (design.md section 2: a two-way street swept on both curbs needs
one pass each way, a one-way street two passes in its direction; common practice).
"""
from __future__ import annotations

import json
from collections import Counter

import networkx as nx
import numpy as np
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from helpers.checks import assert_closed_walk, forbidden_turns_made, nx_servable_directions
from helpers.nets import ORIGIN, grid_network, make_network
from crewcut.solve.errors import InputError
from crewcut.solve.network.model import SERVICE_BOTH_SIDES, SERVICE_EACH_DIRECTION, SERVICE_NONE, SERVICE_ONE_PASS
from crewcut.solve.profile import Profile
from crewcut.solve.route import plan_route


def walk_arrays(net, route):
    t = route.traversals
    seg = np.array([x.segment for x in t], np.int64)
    tail = np.array([x.from_node for x in t], np.int64)
    head = np.array([x.to_node for x in t], np.int64)
    fwd = (tail == net.seg_u[seg]) & (head == net.seg_v[seg])
    return tail, head, seg, fwd


def expected_passes(net, profile, segments=None):
    """Required service traversals per (segment, direction), from the trade's rules.

    Written out here from design.md section 2 and the network arrays, not from
    crewcut.solve.costs. Keys: (seg, "fwd"|"bwd"|"any").
    """
    want = Counter()
    segs = range(net.n_segments) if segments is None else segments
    for s in segs:
        if net.seg_closed[s]:
            continue
        svc = int(net.seg_service[s])
        ow = bool(net.seg_oneway[s]) and not profile.ignore_oneway
        if svc == SERVICE_ONE_PASS:
            want[(s, "fwd" if ow else "any")] += 1
        elif svc == SERVICE_BOTH_SIDES:
            if ow:
                want[(s, "fwd")] += 2
            elif profile.ignore_oneway:
                want[(s, "any")] += 2
            else:
                want[(s, "fwd")] += 1
                want[(s, "bwd")] += 1
        elif svc == SERVICE_EACH_DIRECTION:
            want[(s, "fwd")] += 1
            if not ow:
                want[(s, "bwd")] += 1
    return want


def assert_valid_route(net, profile, route, depot, segments=None):
    tail, head, seg, fwd = walk_arrays(net, route)
    assert_closed_walk(net, tail, head, seg, fwd, depot, ignore_oneway=profile.ignore_oneway)
    service = np.array([x.service for x in route.traversals])
    got = Counter()
    for s, f in zip(seg[service].tolist(), fwd[service].tolist()):
        got[(s, "fwd" if f else "bwd")] += 1
    want = expected_passes(net, profile, segments)
    # an "either way" pass may be served in either direction
    for (s, kind), k in sorted(want.items()):
        if kind == "any":
            served = got.pop((s, "fwd"), 0) + got.pop((s, "bwd"), 0)
            assert served == k, f"segment {s}: {served} service traversals, {k} required"
    for (s, kind), k in sorted(want.items()):
        if kind != "any":
            assert got.pop((s, kind), 0) == k, f"segment {s} {kind}"
    assert not got, f"service traversals nobody asked for: {dict(got)}"
    # metres are the segments' lengths; totals add up; the bound holds
    metres = np.array([x.metres for x in route.traversals])
    assert metres == pytest.approx(net.seg_length[seg])
    tot = route.totals
    assert tot.total_min == pytest.approx(sum(x.minutes + x.turn_minutes for x in route.traversals))
    assert route.lower_bound_min <= tot.total_min + 1e-6
    assert route.traversals[0].turn == "start"


PROFILE = Profile()


# ------------------------------------------------------------ worked examples
def test_k4_unit_weights_from_memory():
    # Undirected Chinese postman on the complete graph K4 with unit edge weights: all four
    # vertices are odd, the best pairing adds two disjoint edges, so the optimum tour has
    # 6 + 2 = 8 edge lengths (a textbook exercise, from memory). Checked again with
    # networkx's exact matching: shortest paths between odd nodes + min_weight_matching.
    lonlat = [[-30.5, 45.2], [-30.4990, 45.2], [-30.4995, 45.2008], [-30.4995, 45.2003]]
    segs = [(a, b, False, SERVICE_ONE_PASS) for a in range(4) for b in range(a + 1, 4)]
    net = make_network(lonlat, segs, lengths=[100.0] * 6)
    route = plan_route(net, PROFILE, 0)
    assert_valid_route(net, PROFILE, route, 0)
    assert route.totals.deadhead_km * 1000 == pytest.approx(200.0)
    g = nx.Graph()
    g.add_weighted_edges_from((int(net.seg_u[s]), int(net.seg_v[s]), float(net.seg_length[s]))
                              for s in range(net.n_segments))
    odd = [v for v in g if g.degree(v) % 2]
    dist = dict(nx.all_pairs_dijkstra_path_length(g))
    k = nx.Graph()
    k.add_weighted_edges_from((a, b, dist[a][b]) for i, a in enumerate(odd) for b in odd[i + 1:])
    match = nx.min_weight_matching(k)
    assert route.totals.deadhead_km * 1000 == pytest.approx(sum(dist[a][b] for a, b in match))


def test_route_on_grid_with_one_way_streets_and_subset_far_from_depot():
    net = grid_network(5, 6, oneway=[0, 6, 13, 30, 40])
    route = plan_route(net, PROFILE, 0)
    assert_valid_route(net, PROFILE, route, 0)
    # only a corner far from the depot: the route drives out and back
    far = [s for s in range(net.n_segments) if min(net.seg_u[s], net.seg_v[s]) >= 22]
    route2 = plan_route(net, PROFILE, 0, segments=far)
    assert_valid_route(net, PROFILE, route2, 0, segments=far)
    assert route2.totals.deadhead_km > 0


def test_turn_aware_never_more_turn_time_than_plain_on_same_augmentation():
    net = grid_network(7, 7, oneway=[1, 8, 15, 50, 60, 70])
    aware = plan_route(net, PROFILE, 3)
    plain = plan_route(net, PROFILE, 3, turn_aware=False)
    for r in (aware, plain):
        assert_valid_route(net, PROFILE, r, 3)
    # same augmentation (deterministic), the circuit alone differs
    assert aware.totals.deadhead_min == pytest.approx(plain.totals.deadhead_min)
    assert aware.totals.turn_min <= plain.totals.turn_min
    assert aware.stats["plain_u_turns"] == plain.totals.u_turns
    assert aware.totals.u_turns <= plain.totals.u_turns


def test_walkers_may_go_against_one_way():
    prof = Profile(ignore_oneway=True)
    net = grid_network(3, 4, oneway=[0, 1, 2])
    route = plan_route(net, prof, 5)
    assert_valid_route(net, prof, route, 5)


def test_nothing_to_serve_gives_an_empty_route():
    net = grid_network(2, 3, service={s: SERVICE_NONE for s in range(7)})
    route = plan_route(net, PROFILE, 0)
    assert route.traversals == () and route.totals.total_min == 0


def test_deterministic():
    net = grid_network(6, 6, oneway=[2, 9])
    a = plan_route(net, PROFILE, 4, seed=3)
    b = plan_route(net, PROFILE, 4, seed=3)
    assert a.to_dict() == b.to_dict()


# ------------------------------------------------------------------ bad input
@pytest.mark.parametrize("kw,match", [
    ({"depot": 99}, "depot node 99 does not exist"),
    ({"depot": -1}, "depot node -1 does not exist"),
    ({"depot": 1.5}, "must be a node id"),
    ({"depot": 0, "segments": [0, 500]}, "segment ids do not exist: 500"),
    ({"depot": 0, "segments": [3]}, r"closed segments cannot be served: 3 \('s3'\)"),
    ({"depot": 0, "time_limit_s": 0}, "time_limit_s"),
    ({"depot": 0, "seed": -2}, "seed"),
])
def test_bad_parameters_raise_input_error(kw, match):
    net = grid_network(3, 3, closed=[3])
    depot = kw.pop("depot")
    with pytest.raises(InputError, match=match):
        plan_route(net, PROFILE, depot, **kw)


def test_depot_on_closed_streets_only():
    net = grid_network(2, 2, closed=[0, 2])  # node 0 touches segments 0 and 2 only
    with pytest.raises(InputError, match="touches no usable street"):
        plan_route(net, PROFILE, 0)


# -------------------------------------------------------------- properties
@st.composite
def mixed_grids(draw):
    rows = draw(st.integers(2, 4))
    cols = draw(st.integers(2, 4))
    m = rows * (cols - 1) + (rows - 1) * cols
    oneway = draw(st.sets(st.integers(0, m - 1), max_size=m // 3))
    kinds = st.sampled_from([SERVICE_NONE, SERVICE_ONE_PASS, SERVICE_BOTH_SIDES, SERVICE_EACH_DIRECTION])
    service = dict(enumerate(draw(st.lists(kinds, min_size=m, max_size=m))))
    net = grid_network(rows, cols, oneway=sorted(oneway), service=service)
    depot = draw(st.integers(0, rows * cols - 1))
    return net, depot


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.filter_too_much])
@given(mixed_grids(), st.booleans())
def test_property_routes_on_mixed_networks(case, turn_aware):
    net, depot = case
    g = net.to_networkx()
    assume(nx.is_strongly_connected(g))  # otherwise no closed route exists (tested elsewhere)
    route = plan_route(net, PROFILE, depot, turn_aware=turn_aware)
    if not expected_passes(net, PROFILE):
        assert route.traversals == ()
        return
    assert_valid_route(net, PROFILE, route, depot)
    assert route.totals.turn_min * 60 <= route.stats["plain_turn_s"] + 1e-9


# --------------------------------------------------------------- real streets
def test_helsinki_whole_extract(helsinki_pbf):
    # OpenStreetMap data (c) OpenStreetMap contributors, ODbL; see tests/conftest.py
    from crewcut.solve.readers import read_network

    prof = Profile()
    net = read_network(helsinki_pbf, prof)
    assert net.seg_oneway.sum() > 100  # hundreds of one-way ways (design.md section 7)
    # depot at the usable node nearest the middle of the extract
    depot, _ = net.nearest_node(float(np.nanmedian(net.node_lon)), float(np.nanmedian(net.node_lat)))
    # The extract is cut at its border, so some one-way pieces cannot be entered or left:
    # no closed route can serve them. networkx says which streets a closed route from the
    # depot can reach: those inside the depot's strongly connected component.
    # With the extract's turn restrictions (net.turn_bans), networkx on the line graph says which
    # directions lie on a closed walk through the depot; a street is servable when every direction
    # its passes need is one of them (both for a both-sides street, one for a one-way street).
    ok = nx_servable_directions(net, depot, net.turn_bans)
    assert net.turn_bans.size
    servable = [s for s in range(net.n_segments)
                if (s, 1) in ok and (net.seg_oneway[s] or (s, 0) in ok)]
    assert len(servable) > 0.8 * net.n_segments
    route = plan_route(net, prof, depot, servable, time_limit_s=5.0)
    assert_valid_route(net, prof, route, depot, servable)
    steps = [(t.segment, int(t.from_node == net.seg_u[t.segment]), t.from_node) for t in route.traversals]
    assert forbidden_turns_made(steps, net.turn_bans, depot) == []
    assert route.stats["u_turns"] <= route.stats["plain_u_turns"]
    # asking for all of it is bad input, said clearly, not a crash
    if len(servable) < net.n_segments:
        with pytest.raises(InputError):
            plan_route(net, prof, depot, time_limit_s=5.0)


# ----------------------------------------------------------------- command line
def _grid_geojson(path, net):
    feats = [{"type": "Feature", "properties": {"id": f"street-{s}", "name": net.seg_name[s], "class": "residential",
                                                 "oneway": "yes" if net.seg_oneway[s] else "no"},
              "geometry": {"type": "LineString", "coordinates": net.seg_coords[s].tolist()}}
             for s in range(net.n_segments)]
    path.write_text(json.dumps({"type": "FeatureCollection", "features": feats}))
    return path


def test_cli_route_end_to_end(tmp_path):
    from crewcut.cli.main import main

    src = _grid_geojson(tmp_path / "town.geojson", grid_network(4, 5, oneway=[0, 9]))
    before = src.read_bytes()
    out = tmp_path / "out"
    depot = f"--depot={ORIGIN[0]},{ORIGIN[1]}"  # "=": the value starts with a minus sign
    code = main(["route", str(src), depot, "--out", str(out), "-q"])
    assert code == 0
    assert src.read_bytes() == before  # input never modified
    plan = json.loads((out / "plan.json").read_text())
    assert plan["format"] == "crewcut-plan" and len(plan["crews"]) == 1
    crew = plan["crews"][0]
    trav = crew["routes"][0]["traversals"]
    assert trav[0]["from"] == crew["depot_node"] == trav[-1]["to"]
    assert all(a["to"] == b["from"] for a, b in zip(trav, trav[1:]))
    segs = {s["id"]: s for s in plan["network"]["segments"]}
    for x in trav:  # each traversal along its segment, one-way streets forward only
        s = segs[x["segment"]]
        assert (x["from"], x["to"]) in ((s["from"], s["to"]),) + (() if s["oneway"] else ((s["to"], s["from"]),))
    assert sorted(crew["territory"]) == sorted(segs)  # every street of the grid has passes
    # same input, same seed: same bytes
    out2 = tmp_path / "again"
    assert main(["route", str(src), depot, "--out", str(out2), "-q"]) == 0
    assert (out2 / "plan.json").read_bytes() == (out / "plan.json").read_bytes()


@pytest.mark.parametrize("extra,message", [
    (["--depot", "10.0,50.0"], "from the nearest usable street"),
    ([], "no depot"),
    (["--depot", "garbage"], "not LON,LAT"),
])
def test_cli_route_bad_input_exits_2_and_writes_nothing(tmp_path, capsys, extra, message):
    from crewcut.cli.main import main

    src = _grid_geojson(tmp_path / "town.geojson", grid_network(3, 3))
    out = tmp_path / "out"
    assert main(["route", str(src), "--out", str(out), *extra]) == 2
    err = " ".join(capsys.readouterr().err.split())  # rich wraps long lines
    assert message in err and "Traceback" not in err
    assert not out.exists() or not any(out.iterdir())
