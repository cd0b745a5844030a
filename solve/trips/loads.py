"""Loads and clock times along a route with facility visits.

The rule (the planner, ``verify`` and the sheets all use it): a route starts at its
clock start; each traversal waits its ``wait_minutes``, turns, then drives; a visit
with ``after = i`` happens when traversal ``i - 1`` has ended: the vehicle waits
``wait_min`` for the facility to open, then stays ``minutes``. The amount of each
capacity used since its last reset rises by ``per_km x length`` on every service
traversal (one pass) and falls to zero at a visit that resets it.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from crewcut.solve.network.model import Network
from crewcut.solve.result import Traversal, Visit
from crewcut.solve.trips.config import Capacity


def pass_demand(net: Network, capacities: tuple[Capacity, ...], segments: np.ndarray) -> np.ndarray:
    """(len(segments), C): the amount one service pass of each segment uses of each capacity."""
    seg = np.asarray(segments, np.int64)
    out = np.zeros((seg.size, len(capacities)))
    km = net.seg_length[seg] / 1000.0
    for c, cap in enumerate(capacities):
        rate = np.array([cap.rate(str(net.seg_class[s])) for s in seg.tolist()], float)
        out[:, c] = rate * km
    return out


@dataclass(frozen=True)
class LoadTrace:
    """``after[i, c]``: amount of capacity ``c`` used since its last reset once traversal ``i`` is driven;
    ``at_visit[j, c]``: just before visit ``j``; ``end``: at the route's end (after any last visit);
    ``peak``: the largest amount per capacity."""

    after: np.ndarray
    at_visit: np.ndarray
    end: np.ndarray
    peak: np.ndarray


def load_trace(net: Network, capacities: tuple[Capacity, ...], traversals, visits) -> LoadTrace:
    """The loads along a route (the module's rule); visits must be in order of ``after``."""
    n, n_cap = len(traversals), len(capacities)
    seg = np.array([t.segment for t in traversals], np.int64)
    d = pass_demand(net, capacities, seg) if n else np.zeros((0, n_cap))
    d[~np.array([t.service for t in traversals], bool)] = 0.0
    names = [c.name for c in capacities]
    cur = np.zeros(n_cap)
    after = np.zeros((n, n_cap))
    at_visit = np.zeros((len(visits), n_cap))
    peak = np.zeros(n_cap)
    vi = 0
    for i in range(n + 1):
        while vi < len(visits) and visits[vi].after == i:
            at_visit[vi] = cur
            for r in visits[vi].resets:
                if r in names:
                    cur[names.index(r)] = 0.0
            vi += 1
        if i < n:
            cur = cur + d[i]
            after[i] = cur
            peak = np.maximum(peak, cur)
    return LoadTrace(after, at_visit, cur.copy(), peak)


def visit_clock(traversals: list[Traversal] | tuple[Traversal, ...], visits: list[Visit] | tuple[Visit, ...],
                start_min: float) -> tuple[np.ndarray, np.ndarray]:
    """(arrival clock of each visit, drive-start clock of each traversal) under the module's rule,
    with each visit's recorded wait and stay."""
    arrive = np.zeros(len(visits))
    drive_start = np.zeros(len(traversals))
    t = float(start_min)
    vi = 0
    for i in range(len(traversals) + 1):
        while vi < len(visits) and visits[vi].after == i:
            arrive[vi] = t
            t += visits[vi].wait_min + visits[vi].minutes
            vi += 1
        if i < len(traversals):
            x = traversals[i]
            t += x.wait_minutes + x.turn_minutes
            drive_start[i] = t
            t += x.minutes
    return arrive, drive_start
