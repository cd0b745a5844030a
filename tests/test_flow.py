"""Directed Eulerization (minimum-cost flow) against networkx's network simplex.

Reference: ``nx.network_simplex`` on the deadhead digraph with node demands
``out - in`` of the required arcs (Edmonds and Johnson 1973's flow formulation),
computed independently of crewcut.solve.postman.flow, on integer lengths so it is exact.
"""
from __future__ import annotations

import networkx as nx
import numpy as np
import pytest

from crewcut.solve.network.model import SERVICE_NONE, SERVICE_ONE_PASS
from helpers.checks import assert_valid
from helpers.nets import make_network, metre_profile, random_strong
from crewcut.solve.errors import InputError
from crewcut.solve.postman.eulerize import eulerize
from crewcut.solve.postman.flow import min_cost_flow
from crewcut.solve.postman.tasks import build_deadhead, build_tasks


def nx_balance_cost(n, u, v, w, req_tail, req_head) -> float:
    g = nx.DiGraph()
    for x in range(n):
        g.add_node(x, demand=0)
    for a, b, c in zip(u.tolist(), v.tolist(), w.tolist()):
        if a != b and (not g.has_edge(a, b) or g[a][b]["weight"] > c):
            g.add_edge(a, b, weight=int(c))
    for a, b in zip(req_tail.tolist(), req_head.tolist()):
        g.nodes[a]["demand"] += 1  # a required arc leaving a: a needs one more arriving copy
        g.nodes[b]["demand"] -= 1
    cost, _ = nx.network_simplex(g)
    return float(cost)


def test_two_hundred_random_digraphs_match_network_simplex():
    rng = np.random.default_rng(1973)
    for trial in range(200):
        n = int(rng.integers(2, 60))
        u, v = random_strong(rng, n, extra=float(rng.uniform(0.2, 2.0)))
        length = rng.integers(1, 1000, u.size).astype(float)
        svc = np.where(rng.random(u.size) < 0.8, 2, 1).astype(np.int8)  # both_sides: 2 passes on one-ways
        net = make_network(n, u, v, length, oneway=np.ones(u.size, bool), service=svc)
        prof = metre_profile()
        tasks, arcs = build_tasks(net, prof), build_deadhead(net, prof)
        depot = int(rng.integers(0, n))
        aug = eulerize(tasks, arcs, depot, n)
        ref = nx_balance_cost(n, u, v, length, tasks.tail, tasks.head)
        assert aug.exact and "flow" in aug.method
        assert aug.cost == pytest.approx(ref, abs=1e-6), trial
        assert aug.lower_bound == pytest.approx(ref, abs=1e-3)
        assert_valid(tasks, arcs, aug, depot)


def test_rural_directed_stays_valid_and_bounded():
    rng = np.random.default_rng(5)
    for _ in range(40):
        n = int(rng.integers(4, 30))
        u, v = random_strong(rng, n)
        length = rng.integers(1, 100, u.size).astype(float)
        svc = np.where(rng.random(u.size) < 0.3, SERVICE_ONE_PASS, SERVICE_NONE).astype(np.int8)
        net = make_network(n, u, v, length, oneway=np.ones(u.size, bool), service=svc)
        prof = metre_profile()
        tasks, arcs = build_tasks(net, prof), build_deadhead(net, prof)
        depot = int(rng.integers(0, n))
        aug = eulerize(tasks, arcs, depot, n)
        assert_valid(tasks, arcs, aug, depot)
        # the bound is the balancing optimum without connection (networkx), never more than the cost
        ref = nx_balance_cost(n, u, v, length, tasks.tail, tasks.head) if len(tasks) else 0.0
        assert aug.lower_bound == pytest.approx(min(ref, aug.cost), abs=1e-3)
        if "rural" in aug.method:
            assert not aug.exact


def test_one_way_trap_is_reported():
    # 0 -> 1 -> 2 -> 0 is a loop; 2 -> 3 leads into a dead end with no way back.
    net = make_network(4, [0, 1, 2, 2], [1, 2, 0, 3], [10, 10, 10, 10], oneway=[True] * 4)
    prof = metre_profile()
    tasks, arcs = build_tasks(net, prof), build_deadhead(net, prof)
    with pytest.raises(InputError, match="segment 3"):
        eulerize(tasks, arcs, 0, 4)


def test_flow_infeasible_is_reported():
    from crewcut.solve.postman.flow import InfeasibleFlow
    with pytest.raises(InfeasibleFlow):
        min_cost_flow([0], [1], [1.0], np.array([-1, 1]))  # needs 1 -> 0, only 0 -> 1 exists
