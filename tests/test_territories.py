"""Crews, seeds and territory growth: coverage, connectivity, and bad input.

Connectivity is checked with networkx (``nx.is_connected`` on the line graph of
each territory's streets, plus the planner's drive-through links, each of which is
checked first to be a real path over open streets that need no service), not with
the planner's own helper.
"""
from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from helpers.nets import grid_lines, repaired_grid
from crewcut.fleet.crews import resolve_crews
from crewcut.fleet.planner import plan_fleet
from crewcut.fleet.seeding import seed_territories
from crewcut.fleet.streets import build_street_graph, depot_travel, round_trips
from crewcut.fleet.territories import grow_territories, territories_of
from crewcut.solve.errors import InputError
from crewcut.solve.network.model import RawLine
from crewcut.solve.profile import Crew, Profile
from crewcut.solve.network.repair import build_network


def _grow(net, profile, crews, seed=0):
    sg = build_street_graph(net, profile)
    depots = [c.depot_node for c in crews]
    uniq = sorted(set(depots))
    out, back = depot_travel(net, profile, uniq)
    rt = round_trips(net, sg, out, back)[[uniq.index(d) for d in depots]]
    el = np.isfinite(rt)
    xy = np.stack([net.node_x[depots], net.node_y[depots]], axis=1)
    centres, seeds = seed_territories(sg, xy, el, seed=seed)
    owner = grow_territories(net, sg, centres, seeds, el, np.zeros(len(crews)))
    return sg, owner


def _nx_connected(net, sg, segs) -> bool:
    """Segments sharing a node, or joined by a drive-through link, form one piece (networkx)."""
    g = nx.Graph()
    g.add_nodes_from(segs)
    by_node: dict[int, list[int]] = {}
    for s in segs:
        for n in (int(net.seg_u[s]), int(net.seg_v[s])):
            by_node.setdefault(n, []).append(s)
    for group in by_node.values():
        nx.add_path(g, group)
    members = set(segs)
    # open streets that need no service, for checking the planner's links on their own
    through = nx.Graph()
    free = np.flatnonzero(~net.seg_closed & ~sg.required)
    through.add_edges_from(zip(net.seg_u[free].tolist(), net.seg_v[free].tolist()))
    for s in segs:  # links between groups that only drive-through streets join
        for t in sg.neighbours(s).tolist():
            if t in members:
                ends_s = {int(net.seg_u[s]), int(net.seg_v[s])}
                ends_t = {int(net.seg_u[t]), int(net.seg_v[t])}
                assert ends_s & ends_t or any(
                    a in through and b in through and nx.has_path(through, a, b) for a in ends_s for b in ends_t), \
                    f"segments {s} and {t} are linked, but no drive-through street joins them"
                g.add_edge(s, t)
    return len(segs) > 0 and nx.is_connected(g)


@settings(max_examples=15, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(seed=st.integers(0, 10_000), k=st.integers(1, 6), cols=st.integers(4, 11), rows=st.integers(3, 8))
def test_every_required_segment_in_exactly_one_connected_territory(seed, k, cols, rows):
    profile = Profile()
    net = repaired_grid(cols, rows, seed)
    n_req = int((build_street_graph(net, profile).required).sum())
    k = min(k, n_req)
    crews = resolve_crews(net, profile, k=k, depot_lonlat=(-30.5, 45.2))
    sg, owner = _grow(net, profile, crews, seed)
    # exactly one crew per required segment, none for drive-through segments
    assert np.all((owner >= 0) == sg.required)
    for segs in territories_of(owner, k):
        assert segs.size > 0
        assert _nx_connected(net, sg, segs.tolist())
    # the drive-through links only ever join required segments
    for s in np.flatnonzero(sg.required):
        assert sg.required[sg.neighbours(s)].all()


def test_same_seed_same_territories():
    profile = Profile()
    net = repaired_grid(10, 7, 5)
    crews = resolve_crews(net, profile, k=4, depot_lonlat=(-30.5, 45.2))
    a = _grow(net, profile, crews, seed=3)[1]
    b = _grow(net, profile, crews, seed=3)[1]
    assert np.array_equal(a, b)


def test_territories_span_drive_through_streets():
    # Two blocks of required streets joined only by a drive-through street: the link
    # lets one territory hold both (Mehlhorn's spanning tree joins them).
    lines = grid_lines(5, 4, 1, drop=0.0, none_share=0.0, one_pass_share=0.0, oneway_rows=False)
    far = [RawLine(f"far-{i}", ln.coords + np.array([0.02, 0.0]), name=ln.name, road_class="residential",
                   service="both_sides") for i, ln in enumerate(lines)]
    link = RawLine("link", np.array([lines[0].coords[0], far[0].coords[0]]), road_class="residential",
                   service="none")
    profile = Profile()
    net = build_network(lines + far + [link], profile)
    crews = resolve_crews(net, profile, k=1, depot_lonlat=(-30.5, 45.2))
    sg, owner = _grow(net, profile, crews)
    assert np.all(owner[sg.required] == 0)
    assert _nx_connected(net, sg, np.flatnonzero(sg.required).tolist())


def test_several_depots_anchor_their_territories():
    profile = Profile(crews=(Crew("west", 480.0, depot_lonlat=(-30.506, 45.2)),
                             Crew("east", 480.0, depot_lonlat=(-30.494, 45.2))))
    net = repaired_grid(12, 5, 2)
    crews = resolve_crews(net, profile)
    assert crews[0].depot_node != crews[1].depot_node
    sg, owner = _grow(net, profile, crews)
    xw = sg.mid_x[owner == 0].mean()
    xe = sg.mid_x[owner == 1].mean()
    assert xw < xe  # the west crew's territory lies west of the east crew's


# ----------------------------------------------------------------------------- bad input
def test_island_behind_closed_bridge_names_the_segments():
    lines = grid_lines(4, 3, 2, drop=0.0, none_share=0.0, oneway_rows=False)
    island = [RawLine(f"isle-{i}", ln.coords + np.array([0.01, 0.0]), road_class="residential",
                      service="both_sides") for i, ln in enumerate(lines)]
    bridge = RawLine("bridge", np.array([lines[-1].coords[1], island[0].coords[0]]), road_class="residential",
                     service="none", closed=True)
    profile = Profile()
    net = build_network(lines + island + [bridge], profile)
    crews = resolve_crews(net, profile, k=2, depot_lonlat=(-30.5, 45.2))
    with pytest.raises(InputError) as exc:
        plan_fleet(net, profile, crews, workers=1, unservable="refuse")
    assert "isle-" in exc.value.message and "no closed route" in exc.value.message
    assert exc.value.param == "unservable"
    # left out instead: every island street listed, none served (the island has no depot; a fact of
    # graph connectivity, no source needed)
    plan = plan_fleet(net, profile, crews, workers=1, unservable="leave_out")
    isle = {s for s in range(net.n_segments) if net.seg_source[s].startswith("isle-")}
    assert {x.segment for x in plan.left_out} == isle
    assert {x.reason for x in plan.left_out} == {"outside_depot_reach"}
    served = {t.segment for c in plan.crews for r in c.routes for t in r.traversals}
    assert not served & isle


@pytest.mark.parametrize("k", [0, -1])
def test_zero_crews(k):
    net = repaired_grid(4, 3, 0)
    with pytest.raises(InputError, match="at least one crew"):
        resolve_crews(net, Profile(), k=k, depot_lonlat=(-30.5, 45.2))


def test_more_crews_than_required_segments():
    net = repaired_grid(3, 2, 0, drop=0.0)
    with pytest.raises(InputError, match="segments need service"):
        resolve_crews(net, Profile(), k=500, depot_lonlat=(-30.5, 45.2))


def test_unknown_crew_id():
    profile = Profile(crews=(Crew("north", 480.0, depot_lonlat=(-30.5, 45.2)),))
    net = repaired_grid(4, 3, 0)
    with pytest.raises(InputError, match="unknown crew id 'south'"):
        resolve_crews(net, profile, only=["south"])


def test_depot_far_from_streets():
    net = repaired_grid(4, 3, 0)
    with pytest.raises(InputError, match="from the nearest usable street"):
        resolve_crews(net, Profile(), k=2, depot_lonlat=(-30.0, 45.2))


def test_shift_limit_no_route_can_meet():
    net = repaired_grid(6, 4, 0)
    profile = Profile(shift_limit_min=0.5)
    crews = resolve_crews(net, profile, k=2, depot_lonlat=(-30.5, 45.2))
    with pytest.raises(InputError, match="no route can meet the shift limit"):
        plan_fleet(net, profile, crews, workers=1)


# ----------------------------------------------------------------------------- border polish
def _brute_pairing(m: np.ndarray) -> float:
    """Least-cost pairing of arrivals with departures by trying every assignment (brute force)."""
    import itertools

    r, c = m.shape
    if r == 0 or c == 0:
        return 0.0
    if r <= c:
        return min(sum(m[i, p[i]] for i in range(r)) for p in itertools.permutations(range(c), r))
    return min(sum(m[p[j], j] for j in range(c)) for p in itertools.permutations(range(r), c))


def _border_total(bt, owner, k) -> float:
    """Sum over territories and nodes of the brute-force pairing of each territory's own passes."""
    tot = 0.0
    for x, m in bt.cost.items():
        for c in range(k):
            ra = owner[bt.arr_seg[x]] == c
            cd = owner[bt.dep_seg[x]] == c
            tot += _brute_pairing(m[np.ix_(ra, cd)])
    return tot


@pytest.mark.parametrize("seed,k", [(3, 3), (11, 4)])
def test_polish_borders_keeps_territories_and_cuts_border_turns(seed, k):
    from crewcut.fleet.territories import BorderTurns, polish_borders, street_runs
    from crewcut.solve.circuits.turns import TurnModel

    profile = Profile(shift_limit_min=1440.0)
    net = repaired_grid(9, 7, seed)
    crews = resolve_crews(net, profile, k=k, depot_lonlat=(-30.5, 45.2))
    sg, owner = _grow(net, profile, crews, seed)
    depots = [c.depot_node for c in crews]
    out, back = depot_travel(net, profile, sorted(set(depots)))
    el = np.isfinite(round_trips(net, sg, out, back))[[0] * k]
    model = TurnModel.from_network(net, profile)
    bt = BorderTurns(net, sg, model)
    before = owner.copy()
    for x in list(bt.cost)[:30]:  # the assignment equals brute force (itertools), per node and territory
        for c in range(k):
            ra = owner[bt.arr_seg[x]] == c
            cd = owner[bt.dep_seg[x]] == c
            assert bt.at(owner, c, x) == pytest.approx(_brute_pairing(bt.cost[x][np.ix_(ra, cd)]))
    polish_borders(net, sg, owner, el, bt)
    # every required segment still has exactly one crew; territories connected (networkx)
    assert np.array_equal(owner >= 0, sg.required)
    for c in range(k):
        assert _nx_connected(net, sg, np.flatnonzero(owner == c))
    # moves only ever lower the estimate (recomputed by brute force)
    assert _border_total(bt, owner, k) <= _border_total(bt, before, k) + 1e-9
    # street runs: a partition of the required segments; inside a run, nodes join exactly two
    # required segments (counted here from the network arrays)
    runs = street_runs(net, sg)
    flat = sorted(s for r in runs for s in r)
    assert flat == np.flatnonzero(sg.required).tolist()
    req = np.flatnonzero(sg.required)
    deg = np.bincount(np.r_[net.seg_u[req], net.seg_v[req]], minlength=net.n_nodes)
    for r in runs:
        g = nx.MultiGraph()
        g.add_edges_from((int(net.seg_u[s]), int(net.seg_v[s])) for s in r)
        assert nx.is_connected(g)
        if len(r) > 1:
            inner = [x for x in g.nodes if g.degree(x) == 2]
            assert all(deg[x] == 2 for x in inner)


@pytest.mark.parametrize("seed", [2, 5, 9])
def test_tidy_handover_only_lowers_border_turns_and_moves_only_the_giver(seed):
    """A border batch, tidied, forces no more turns than as grown (brute-force pairing, itertools)."""
    from crewcut.fleet.territories import BorderTurns, tidy_handover
    from crewcut.solve.circuits.turns import TurnModel

    profile = Profile(shift_limit_min=1440.0)
    net = repaired_grid(9, 7, seed)
    crews = resolve_crews(net, profile, k=2, depot_lonlat=(-30.5, 45.2))
    sg, owner = _grow(net, profile, crews, seed)
    bt = BorderTurns(net, sg, TurnModel.from_network(net, profile))
    el = np.ones((2, net.n_segments), bool)
    # the batch: crew 0's segments that touch a node of crew 1 (its whole border, as the balancer starts)
    nodes1 = set(net.seg_u[owner == 1].tolist()) | set(net.seg_v[owner == 1].tolist())
    batch = [s for s in np.flatnonzero(owner == 0).tolist()
             if int(net.seg_u[s]) in nodes1 or int(net.seg_v[s]) in nodes1]
    assert batch
    tidied = tidy_handover(sg, owner, el, 0, 1, batch, bt)
    # only crew 0's segments are handed over, and the input owner array is untouched
    assert set(tidied) <= set(np.flatnonzero(owner == 0).tolist())
    grown, tidy = owner.copy(), owner.copy()
    grown[batch] = 1
    tidy[tidied] = 1
    assert _border_total(bt, tidy, 2) <= _border_total(bt, grown, 2) + 1e-9
    # a segment crew 1 cannot serve never joins
    el[1, batch[0]] = False
    assert batch[0] not in tidy_handover(sg, owner, el, 0, 1, batch[1:], bt) or batch[0] in batch[1:]
