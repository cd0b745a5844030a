"""Lower bounds: one crew and the min-max bound for k crews (Ahr and Reinelt 2006).

References: networkx shortest paths and min-weight matching for the round trips
and the undirected augmentation; hand counts on small drawings.
"""
from __future__ import annotations

import networkx as nx
import numpy as np
import pytest

from netfactory import SERVICE_BOTH_SIDES, SERVICE_NONE, SERVICE_ONE_PASS, make_network, metre_profile, random_connected
from solve.bounds import fleet_lower_bound, single_crew_lower_bound
from solve.errors import InputError
from solve.eulerize import eulerize
from solve.tasks import build_deadhead, build_tasks
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
        route = tasks.minutes.sum() + aug.cost
        assert single_crew_lower_bound(net, prof) <= route + 1e-6
        assert fleet_lower_bound(net, prof, [0], 1) <= route + 1e-6


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
