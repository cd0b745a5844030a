"""Lower bounds: one crew and the min-max bound for k crews (Ahr and Reinelt 2006).

References: networkx shortest paths and min-weight matching for the round trips
and the undirected augmentation; hand counts on small drawings.
"""
from __future__ import annotations

import networkx as nx
import numpy as np
import pytest

from crewcut.solve.network.model import SERVICE_BOTH_SIDES, SERVICE_NONE, SERVICE_ONE_PASS
from helpers.nets import make_network, metre_profile, random_connected
from crewcut.solve.postman.bounds import fleet_lower_bound, single_crew_lower_bound
from crewcut.solve.errors import InputError
from crewcut.solve.postman.eulerize import eulerize
from crewcut.solve.postman.tasks import build_deadhead, build_tasks
from test_tjoin import nx_tjoin_cost


def test_undirected_fleet_bound_matches_networkx():
    rng = np.random.default_rng(2006)
    prof = metre_profile()
    for _ in range(30):
        n = int(rng.integers(3, 25))
        u, v = random_connected(rng, n)
        length = rng.integers(1, 200, u.size).astype(float)
        net = make_network(n, u, v, length)
        depots = sorted(set(rng.integers(0, n, int(rng.integers(1, 4))).tolist()))
        k = int(rng.integers(1, 6))
        g = nx.Graph()
        for a, b, c in zip(u.tolist(), v.tolist(), length.tolist()):
            if not g.has_edge(a, b) or g[a][b]["weight"] > c:
                g.add_edge(a, b, weight=c)
        dist = {d: nx.single_source_dijkstra_path_length(g, d) for d in depots}
        service = 2.0 * length  # 2 minutes per metre at service speed
        odd = np.flatnonzero(np.bincount(np.r_[u, v], minlength=n) % 2)
        total = service.sum() + nx_tjoin_cost(n, u, v, length, odd)
        trip = max(min(dist[d][a] + dist[d][b] for d in depots) + s
                   for a, b, s in zip(u.tolist(), v.tolist(), service.tolist()))
        want = max(total / k, trip)
        # bounds floor costs to a microminute: equal up to that resolution
        assert fleet_lower_bound(net, prof, depots, k) == pytest.approx(want, abs=1e-4)
        assert single_crew_lower_bound(net, prof) == pytest.approx(total, abs=1e-4)


def test_single_crew_bound_below_any_route():
    rng = np.random.default_rng(8)
    for _ in range(30):
        n = int(rng.integers(3, 15))
        u, v = random_connected(rng, n)
        m = u.size
        net = make_network(n, u, v, rng.integers(1, 100, m).astype(float), oneway=rng.random(m) < 0.3,
                           service=rng.choice([SERVICE_ONE_PASS, SERVICE_BOTH_SIDES], m))
        prof = metre_profile()
        tasks, arcs = build_tasks(net, prof), build_deadhead(net, prof)
        try:
            aug = eulerize(tasks, arcs, 0, n, time_limit_s=1.0)
        except InputError:
            continue
        from crewcut.solve.postman.bounds import turn_lower_bound
        from crewcut.solve.route import plan_route

        # the driving part against this Eulerization; the whole bound against a whole route
        turns = turn_lower_bound(net, prof, 1)
        assert single_crew_lower_bound(net, prof) - turns <= tasks.minutes.sum() + aug.cost + 1e-6
        total = plan_route(net, prof, 0, time_limit_s=1.0).totals.total_min
        assert single_crew_lower_bound(net, prof) <= total + 1e-6
        assert fleet_lower_bound(net, prof, [0], 1) <= total + 1e-6


def test_two_depots_do_not_charge_the_link_between_them():
    # Two 10 m squares joined by a 500 m street that needs no service; one depot
    # in each square, two crews. Each crew sweeps its own square once around
    # (4 x 10 m at 2 min/m = 80 min) and never drives the link, so the best
    # longest route is 80 min (hand count). A bound that charged the link (one
    # connected walk) would exceed it.
    u = [0, 1, 2, 3, 4, 5, 6, 7, 1]
    v = [1, 2, 3, 0, 5, 6, 7, 4, 4]
    svc = [SERVICE_ONE_PASS] * 8 + [SERVICE_NONE]
    net = make_network(8, u, v, [10.0] * 8 + [500.0], service=svc)
    prof = metre_profile()
    lb = fleet_lower_bound(net, prof, [0, 6], 2)
    assert lb <= 80.0 + 1e-9
    assert lb == pytest.approx(80.0)  # = total 160 / 2; a round trip is at most 20 + 20 + 10
    # with only the left depot the far square must be reached: round trip to serve 5-6 is
    # 10 + 500 + 10 (to 5) + 20 (serve) + 10 + 10 + 500 + 10 (back) = 1070 min
    assert fleet_lower_bound(net, prof, [0], 2) == pytest.approx(1070.0)


def test_bad_arguments():
    net = make_network(2, [0], [1], [1.0])
    prof = metre_profile()
    with pytest.raises(InputError, match="crews"):
        fleet_lower_bound(net, prof, [0], 0)
    with pytest.raises(InputError, match="depot"):
        fleet_lower_bound(net, prof, [5], 1)


# ----------------------------------------------------------------------------- turns
def _geo_network(rng, n_nodes: int, oneway_share: float = 0.25):
    """A small invented network with straight-line geometry near Tallowmere."""
    from helpers.nets import ORIGIN, make_network as make_geo

    u, v = random_connected(rng, n_nodes, extra=0.8)
    lonlat = np.array(ORIGIN) + rng.uniform(-0.003, 0.003, (n_nodes, 2))
    rows = [(int(a), int(b), bool(rng.random() < oneway_share),
             int(rng.choice([SERVICE_NONE, SERVICE_ONE_PASS, SERVICE_BOTH_SIDES], p=[0.15, 0.35, 0.5])))
            for a, b in zip(u.tolist(), v.tolist())]
    return make_geo(lonlat, rows)


def _passes(net, ignore_oneway: bool) -> list[tuple[int, str]]:
    """Required passes written out from the service codes (the trade's rule, as in helpers.checks.passes_needed)."""
    out = []
    for s in range(net.n_segments):
        ow = bool(net.seg_oneway[s]) and not ignore_oneway
        svc = int(net.seg_service[s])
        if svc == SERVICE_ONE_PASS:
            out.append((s, "f" if ow else "e"))
        elif svc == SERVICE_BOTH_SIDES:
            out += [(s, "f"), (s, "f")] if ow else [(s, "f"), (s, "b")]
    return out


def _brute_force(net, prof, depot: int, weight_turns_only: bool,
                 passes: list[tuple[int, str]] | None = None) -> tuple[float, float] | None:
    """Exhaustive search (Dijkstra over walk states) for the best closed walk from ``depot``.

    State: node, the traversal just driven (segment, direction) and the passes
    still to serve. Moves: drive any legal direction of an open segment, as
    deadhead or serving one matching pass. Returns (objective, turn minutes of
    that walk) for the least total minutes, or the least turn minutes when
    ``weight_turns_only``; None when no closed walk serves everything.
    ``passes``: the passes to serve (default: every required pass).
    Exhaustive search is common practice, no source; turn kinds come from
    crewcut.solve.circuits.turns, the same rule the routes are charged by.
    """
    import heapq

    from crewcut.solve.costs import deadhead_minutes, service_minutes
    from crewcut.solve.circuits.turns import TurnModel

    model = TurnModel.from_network(net, prof)
    tail, head, seg, fwd = net.arcs(prof.ignore_oneway)
    dm, sm = deadhead_minutes(net, prof), service_minutes(net, prof)
    passes = _passes(net, prof.ignore_oneway) if passes is None else passes
    kinds = sorted(set(passes))
    need = tuple(passes.count(x) for x in kinds)
    out_of: dict[int, list[int]] = {}
    for i, t in enumerate(tail.tolist()):
        out_of.setdefault(t, []).append(i)
    turn_min = {}
    for i in range(tail.size):
        for j in out_of.get(int(head[i]), []):
            turn_min[i, j] = float(model.pair_seconds([seg[i]], [fwd[i]], [seg[j]], [fwd[j]])[0]) / 60.0
    start = (depot, -1, need)
    best = {start: 0.0}
    heap = [(0.0, 0.0, start)]
    while heap:
        cost, tm, state = heapq.heappop(heap)
        if cost > best.get(state, np.inf) + 1e-12:
            continue
        node, last, left = state
        if node == depot and not any(left):
            return cost, tm
        for j in out_of.get(node, []):
            t = 0.0 if last < 0 else turn_min[last, j]
            s, f = int(seg[j]), bool(fwd[j])
            options = [(float(dm[s]), left)]
            for kind in (("f" if f else "b"), "e"):
                if (s, kind) in kinds:
                    x = kinds.index((s, kind))
                    if left[x]:
                        options.append((float(sm[s]), left[:x] + (left[x] - 1,) + left[x + 1:]))
            for drive, nl in options:
                nxt = (int(head[j]), j, nl)
                c = cost + t + (0.0 if weight_turns_only else drive)
                if c < best.get(nxt, np.inf) - 1e-12:
                    best[nxt] = c
                    heapq.heappush(heap, (c, tm + t, nxt))
    return None


def test_turn_bound_below_brute_force_optimum():
    from crewcut.solve.postman.bounds import turn_lower_bound

    rng = np.random.default_rng(1978)
    checked = 0
    for _ in range(60):
        net = _geo_network(rng, int(rng.integers(3, 6)))
        if not 1 <= len(_passes(net, False)) <= 6:
            continue
        prof = metre_profile()
        depot = int(rng.integers(0, net.n_nodes))
        least_turns = _brute_force(net, prof, depot, weight_turns_only=True)
        if least_turns is None:
            continue
        least_total = _brute_force(net, prof, depot, weight_turns_only=False)
        assert turn_lower_bound(net, prof, 1) <= least_turns[0] + 1e-9
        assert single_crew_lower_bound(net, prof) <= least_total[0] + 1e-6
        assert fleet_lower_bound(net, prof, [depot], 1) <= least_total[0] + 1e-6
        checked += 1
    assert checked >= 15


def test_two_crew_bound_below_brute_force_optimum():
    """The min-max bound for two crews from one depot never exceeds the true optimum.

    The optimum is found exhaustively: every split of the required passes in two,
    each part served by the best closed walk (exhaustive search, common practice,
    no source). This checks the node-matching turn rule, where the two routes'
    last arrivals at the depot need no successor.
    """
    import itertools

    rng = np.random.default_rng(2006)
    checked = 0
    for _ in range(80):
        net = _geo_network(rng, int(rng.integers(3, 6)))
        passes = _passes(net, False)
        if not 2 <= len(passes) <= 5:
            continue
        prof = metre_profile()
        depot = int(rng.integers(0, net.n_nodes))
        best = np.inf
        for r in range(len(passes) + 1):
            for part in itertools.combinations(range(len(passes)), r):
                a = [passes[i] for i in part]
                b = [passes[i] for i in range(len(passes)) if i not in part]
                ra = _brute_force(net, prof, depot, False, a) if a else (0.0, 0.0)
                rb = _brute_force(net, prof, depot, False, b) if b else (0.0, 0.0)
                if ra is None or rb is None:
                    continue
                best = min(best, max(ra[0], rb[0]))
        if not np.isfinite(best):
            continue
        assert fleet_lower_bound(net, prof, [depot], 2) <= best + 1e-6
        checked += 1
    assert checked >= 15


def test_turn_bound_below_actual_routes():
    from crewcut.solve.postman.bounds import turn_lower_bound
    from crewcut.solve.profile import Profile
    from crewcut.solve.route import plan_route

    rng = np.random.default_rng(73)
    checked = 0
    for _ in range(40):
        net = _geo_network(rng, int(rng.integers(4, 14)))
        prof = Profile(ignore_oneway=bool(rng.random() < 0.3))
        depot = int(rng.integers(0, net.n_nodes))
        for aware in (True, False):
            try:
                route = plan_route(net, prof, depot, turn_aware=aware, time_limit_s=2.0)
            except InputError:
                break
            if not route.traversals:
                break
            assert turn_lower_bound(net, prof, 1) <= route.totals.turn_min + 1e-9
            assert route.lower_bound_min <= route.totals.total_min + 1e-6
            assert fleet_lower_bound(net, prof, [depot], 1) <= route.totals.total_min + 1e-6
            checked += 1
    assert checked >= 30


def test_dead_end_forces_a_u_turn():
    # A T (hand reading, right-hand traffic): the stem 0-1 is swept on both curbs,
    # the crossbar 2-1-3 needs no service. Arriving at the dead end 0 forces a U-turn
    # (90 s); arriving at 1 up the stem forces a turn, at best right (with traffic,
    # 8 s). Each route's last arrival is exempt: one crew leaves 8 s, two leave none.
    from helpers.nets import ORIGIN, make_network as make_geo
    from crewcut.solve.postman.bounds import turn_lower_bound

    d = 0.001
    lonlat = np.array(ORIGIN) + np.array([[0, -d], [0, 0], [-d, 0], [d, 0]])
    net = make_geo(lonlat, [(0, 1, False, SERVICE_BOTH_SIDES), (1, 2, False, SERVICE_NONE),
                            (1, 3, False, SERVICE_NONE)])
    from crewcut.solve.profile import Profile

    prof = Profile()
    # two passes: 0->1 arrives on the stem at 1 (a turn, 8 s with traffic), 1->0 arrives at the dead end (90 s)
    assert turn_lower_bound(net, prof, 1) == pytest.approx(8.0 / 60.0)
    assert turn_lower_bound(net, prof, 2) == 0.0
    no_turns = Profile(turn_penalty_s={"u_turn": 0.0, "across_traffic": 0.0, "with_traffic": 0.0, "straight": 0.0})
    assert turn_lower_bound(net, no_turns, 1) == 0.0
