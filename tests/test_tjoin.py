"""Undirected Eulerization (minimum T-join) against networkx's exact algorithms.

Reference: networkx shortest paths between the odd nodes, then
``nx.min_weight_matching`` on their complete graph (Edmonds and Johnson 1973's
reduction), computed independently of crewcut.solve.postman.tjoin.
"""
from __future__ import annotations

import networkx as nx
import numpy as np
import pytest

from helpers.checks import assert_valid
from helpers.nets import make_network, metre_profile, random_connected
from crewcut.solve.postman.eulerize import eulerize
from crewcut.solve.postman.tasks import build_deadhead, build_tasks
from crewcut.solve.postman.tjoin import min_tjoin


def nx_tjoin_cost(n, u, v, w, t_nodes) -> float:
    """networkx reference: Dijkstra between T nodes, min-weight perfect matching."""
    g = nx.Graph()
    g.add_nodes_from(range(n))
    for a, b, c in zip(u.tolist(), v.tolist(), w.tolist()):
        if a != b and (not g.has_edge(a, b) or g[a][b]["weight"] > c):
            g.add_edge(a, b, weight=c)
    t = sorted(int(x) for x in t_nodes)
    if not t:
        return 0.0
    dist = {a: nx.single_source_dijkstra_path_length(g, a) for a in t}
    k = nx.Graph()
    k.add_weighted_edges_from((a, b, dist[a][b]) for i, a in enumerate(t) for b in t[i + 1:])
    return float(sum(dist[a][b] for a, b in nx.min_weight_matching(k)))


def test_two_hundred_random_networks_match_networkx():
    rng = np.random.default_rng(20240601)
    most_odd = 0
    for trial in range(200):
        n = 3 + int(127 * rng.random() ** 3)  # mostly small, a few with about 60 odd nodes
        u, v = random_connected(rng, n, extra=float(rng.uniform(0.1, 0.8)))
        length = rng.integers(1, 50_000, u.size) / 100.0  # centimetre lengths up to 500 m
        net = make_network(n, u, v, length)
        prof = metre_profile()
        tasks, arcs = build_tasks(net, prof), build_deadhead(net, prof)
        depot = int(rng.integers(0, n))
        aug = eulerize(tasks, arcs, depot, n)
        deg = np.bincount(np.r_[u, v], minlength=n)
        odd = np.flatnonzero(deg % 2)
        most_odd = max(most_odd, odd.size)
        ref = nx_tjoin_cost(n, u, v, length, odd)  # metres == deadhead minutes here
        assert aug.exact and "T-join" in aug.method
        assert abs(aug.cost - ref) < 1e-6 * max(1.0, ref), (trial, aug.cost, ref)  # to the metre and better
        assert ref - 1e-6 <= aug.lower_bound + 1.0 and aug.lower_bound <= ref + 1e-6
        assert_valid(tasks, arcs, aug, depot)
        # undirected view passes networkx's test as well
        g = nx.MultiGraph()
        g.add_edges_from(zip(np.r_[tasks.tail, arcs.tail[aug.arcs]].tolist(),
                             np.r_[tasks.head, arcs.head[aug.arcs]].tolist()))
        assert nx.is_eulerian(g)
    assert most_odd >= 50  # the sample reaches about 60 odd nodes


def test_arbitrary_t_sets_and_zero_costs():
    rng = np.random.default_rng(7)
    for _ in range(60):
        n = int(rng.integers(2, 60))
        u, v = random_connected(rng, n)
        w = rng.integers(0, 1000, u.size).astype(float)
        w[rng.random(u.size) < 0.2] = 0.0  # zero-cost edges (PyMatching accepts them)
        t = rng.choice(n, size=2 * int(rng.integers(0, n // 2 + 1)), replace=False)
        r = min_tjoin(u, v, w, t, n)
        parity = np.bincount(np.r_[u[r.edges], v[r.edges]], minlength=n) % 2
        want = np.zeros(n, int)
        want[t] = 1
        assert np.array_equal(parity, want)
        assert abs(r.cost - nx_tjoin_cost(n, u, v, w, t)) < 1e-9


def test_large_weights_do_not_stall_pymatching():
    # A long path whose total is far beyond 2**31 in any fixed integer scale that
    # keeps single edges fine: PyMatching 2.4 loops on such sums unless rescaled.
    n = 3001
    u = np.arange(n - 1)
    v = u + 1
    w = np.full(n - 1, 8_400_000.0)
    r = min_tjoin(u, v, w, [0, n - 1], n)
    assert r.edges.size == n - 1 and r.cost == pytest.approx(w.sum())


def test_koenigsberg_bridges():
    # Euler (1736): the four land masses of Koenigsberg and its seven bridges; all
    # four have odd degree (5, 3, 3, 3). The island A touches 5 bridges. With one
    # unit per bridge the shortest closed walk over every bridge repeats two of them:
    # 7 + 2 = 9 crossings (from memory).
    a, b, c, d = 0, 1, 2, 3
    u = [a, a, a, a, a, b, c]
    v = [b, b, c, c, d, d, d]
    net = make_network(4, u, v, [1.0] * 7)
    prof = metre_profile()
    tasks, arcs = build_tasks(net, prof), build_deadhead(net, prof)
    aug = eulerize(tasks, arcs, a, 4)
    assert aug.exact and aug.arcs.size == 2 and aug.cost == pytest.approx(2.0)
    assert len(tasks) + aug.arcs.size == 9
    assert_valid(tasks, arcs, aug, a)


def test_complete_graph_k4():
    # K4 with unit edges: every node has degree 3, the best pairing adds 2 edges,
    # so the postman walks 6 + 2 = 8 (a standard textbook exercise; from memory).
    u = [0, 0, 0, 1, 1, 2]
    v = [1, 2, 3, 2, 3, 3]
    net = make_network(4, u, v, [1.0] * 6)
    prof = metre_profile()
    tasks, arcs = build_tasks(net, prof), build_deadhead(net, prof)
    aug = eulerize(tasks, arcs, 0, 4)
    assert aug.cost == pytest.approx(2.0) and aug.exact
