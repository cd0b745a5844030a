"""Minimum-cost flow that balances a digraph: the directed Chinese postman augmentation.

Problem
-------
Given a directed multigraph of required arcs and a set of arcs that may be
repeated (each with a non-negative cost), add copies of least total cost so that
every node has equal in- and out-degree. With ``b(v) = in(v) - out(v)`` over the
required arcs, a node with ``b(v) > 0`` must start ``b(v)`` more copies than it
ends, so the copies form a flow with supply ``b`` and the cheapest copies are a
minimum-cost flow (Edmonds and Johnson 1973; Beltrami and Bodin 1974).

Method
------
OR-tools' ``SimpleMinCostFlow`` (a cost-scaling push-relabel solver) on the
sparse graph itself, with no all-pairs shortest paths. It needs integer costs:
each cost is floored to a multiple of :data:`RESOLUTION_MIN` minutes, so the flow
is exactly optimal for the floored costs, its floored objective is a proven
lower bound on the true optimum, and the true cost of the returned flow exceeds
that bound by less than ``(number of copies) * RESOLUTION_MIN``. Arcs are
uncapacitated in the problem; we cap them at the total supply, which no arc of
some optimal flow exceeds (an optimal flow decomposes into supply paths plus
cycles of cost >= 0 that can be dropped).

References
----------
J. Edmonds and E. L. Johnson, "Matching, Euler tours and the Chinese postman",
Mathematical Programming 5 (1973) 88-124.
E. J. Beltrami and L. D. Bodin, "Networks and vehicle routing for municipal
waste collection", Networks 4 (1974) 65-94.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

SCALE = 1_000_000  # integer cost units per minute
RESOLUTION_MIN = 1.0 / SCALE  # 60 microseconds


@dataclass(frozen=True)
class Flow:
    """An optimal flow: ``flow[i]`` copies of arc ``i``."""

    flow: np.ndarray  # int64 per arc
    cost: float  # true cost of the flow
    lower_bound: float  # proven lower bound on the least flow cost


class InfeasibleFlow(ValueError):
    """The supplies cannot be routed over the given arcs."""


def int_costs(cost: np.ndarray) -> np.ndarray:
    """Costs floored to :data:`RESOLUTION_MIN`, as int64 units."""
    return np.floor(np.asarray(cost, np.float64) * SCALE).astype(np.int64)


def min_cost_flow(tail, head, cost, supply, capacity=None) -> Flow:
    """Least-cost flow over arcs ``tail[i] -> head[i]`` meeting ``supply``.

    Parameters
    ----------
    tail, head : int arrays (parallel arcs and loops allowed).
    cost : float array of non-negative, finite costs (minutes).
    supply : int array, one entry per node, summing to zero: units that must
        leave each node (negative: units that must arrive).
    capacity : optional int array; ``None`` means uncapacitated.

    Raises :class:`InfeasibleFlow` when the supplies cannot be met.
    """
    from ortools.graph.python import min_cost_flow as mcf

    tail = np.asarray(tail, np.int64)
    head = np.asarray(head, np.int64)
    cost = np.asarray(cost, np.float64)
    supply = np.asarray(supply, np.int64)
    if not (tail.shape == head.shape == cost.shape):
        raise ValueError("tail, head and cost must have the same length")
    if cost.size and (not np.all(np.isfinite(cost)) or cost.min() < 0):
        raise ValueError("arc costs must be finite and non-negative")
    if int(supply.sum()) != 0:
        raise ValueError("supplies must sum to zero")
    total = int(supply[supply > 0].sum())
    if total == 0:
        return Flow(np.zeros(tail.size, np.int64), 0.0, 0.0)
    cap = np.full(tail.size, total, np.int64) if capacity is None else \
        np.minimum(np.asarray(capacity, np.int64), total)
    icost = int_costs(cost)
    solver = mcf.SimpleMinCostFlow()
    solver.add_arcs_with_capacity_and_unit_cost(tail, head, cap, icost)
    nodes = np.flatnonzero(supply)
    # Nodes must exist in the solver's graph even if no arc touches them.
    if nodes.size and (tail.size == 0 or nodes.max() > max(tail.max(), head.max())):
        raise InfeasibleFlow("a node with supply touches no arc")
    solver.set_nodes_supplies(nodes, supply[nodes])
    status = solver.solve()
    if status != solver.OPTIMAL:
        names = {solver.INFEASIBLE: "infeasible", solver.UNBALANCED: "unbalanced",
                 solver.BAD_COST_RANGE: "cost range too large"}
        raise InfeasibleFlow(f"min-cost flow failed: {names.get(status, status)}")
    flow = np.asarray(solver.flows(np.arange(tail.size)), np.int64)
    true_cost = float((flow * cost).sum())
    lb = min(solver.optimal_cost() / SCALE, true_cost)
    return Flow(flow, true_cost, lb)
