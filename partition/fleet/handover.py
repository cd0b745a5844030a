"""Handing streets on after a replan's changes: released pieces, extra crews' first streets, the hand-over flow.

Problem: the streets of an absent crew (and pieces cut off by closures) must go
to crews that are at work, moving as few streets as possible while every crew
stays within reach of its shift limit.

Method: each neighbour's share of the pool comes from a min-cost flow (OR-tools)
over the territory border graph with the pool as one more node
(:func:`pool_quotas`); the pool is then grown into the neighbours by those shares
(:func:`grow_pool`), and any remaining excess moves across borders by the same
flow (:func:`transfers`). An extra crew first grows a territory of its own around
its depot (:func:`grow_extra`). The quotas are estimates in service minutes; the
balancer that follows works on routed shifts.
"""
from __future__ import annotations

import heapq

import numpy as np

from crewcut.fleet.balancer import FleetState
from crewcut.fleet.streets import StreetGraph
from crewcut.fleet.territories import pieces, territories_of

# The transfer step aims a little inside the balancer's tolerance (estimates are not routes); tuned on
# tests/bench_rebalance.py.
BAND = 0.9


def _centres(sg: StreetGraph, owner: np.ndarray, k: int) -> np.ndarray:
    out = np.zeros((k, 2))
    for c, segs in enumerate(territories_of(owner, k)):
        if segs.size:
            w = sg.work[segs] + 1e-9
            out[c] = np.average(sg.mid_x[segs], weights=w), np.average(sg.mid_y[segs], weights=w)
    return out


def release_pieces(sg: StreetGraph, owner: np.ndarray, k: int) -> int:
    """Pieces cut off a territory (all but the one with most work) go back to the pool; returns how many."""
    released = 0
    for c, segs in enumerate(territories_of(owner, k)):
        if segs.size < 2:
            continue
        parts = pieces(sg, segs)
        if len(parts) > 1:
            keep = int(np.argmax([float(sg.work[p].sum()) for p in parts]))
            for i, p in enumerate(parts):
                if i != keep:
                    owner[p] = -1
                    released += 1
    return released


def grow_extra(sg: StreetGraph, owner: np.ndarray, c: int, rt_c: np.ndarray, eligible_c: np.ndarray,
                target: float, est: np.ndarray) -> None:
    """Give crew ``c`` a territory: from the street nearest its depot, nearest streets first, up to ``target``."""
    cand = np.flatnonzero(sg.required & eligible_c)
    seed = int(cand[np.lexsort((cand, rt_c[cand]))[0]])
    heap = [(float(rt_c[seed]), seed)]
    seen = {seed}
    load = 0.0
    while heap and load < target:
        _, s = heapq.heappop(heap)
        owner[s] = c
        load += float(est[s])
        for t in sg.neighbours(s).tolist():
            if t not in seen and eligible_c[t] and owner[t] != c:
                seen.add(t)
                heapq.heappush(heap, (float(rt_c[t]), t))


def pool_quotas(sg: StreetGraph, owner: np.ndarray, limits: np.ndarray, rate: np.ndarray, band: float,
                 stability: float) -> np.ndarray | None:
    """How much of the pool (service minutes) each neighbouring territory should take.

    The same minimum-cost flow as :func:`transfers`, with the pool as one more
    node: it sends its work to the territories it borders at no cost (those
    segments change hands whatever happens), and work handed on between crews
    costs as there. So a neighbour with room beyond it takes more, and one
    hemmed in by full territories takes less, and less work has to be handed
    on afterwards. ``None`` when there is no pool or no neighbour.
    """
    from ortools.graph.python import min_cost_flow

    from crewcut.fleet.balancer import crew_pairs

    k = limits.size
    pool = sg.required & (owner < 0)
    if not pool.any() or k < 1:
        return None
    row_of = np.repeat(np.arange(sg.nb_ptr.size - 1), np.diff(sg.nb_ptr))
    nb = sg.nb_idx
    touch = pool[row_of] & (owner[nb] >= 0)
    near = sorted(set(owner[nb[touch]].tolist()))
    if not near:
        return None
    scale = 10.0  # tenths of a minute
    held = owner >= 0
    work = np.bincount(owner[held], weights=sg.work[held], minlength=k)
    pool_work = float(sg.work[pool].sum())
    total_work = float(work.sum()) + pool_work
    # the cap on each crew's estimated minutes, in its service minutes
    cap = (1.0 + band) * limits * float((work * rate).sum() + pool_work * rate.mean()) / float(limits.sum()) / rate
    excess = np.floor(np.maximum(0.0, work - cap) * scale).astype(np.int64)
    room = np.floor(np.maximum(0.0, cap - work) * scale).astype(np.int64)
    supply = int(np.floor(pool_work * scale))
    total = supply + int(excess.sum())
    per_seg = total_work / max(1, int(np.count_nonzero(sg.required)))
    hop = max(1, int(round(1000 * stability / per_seg)))
    f = min_cost_flow.SimpleMinCostFlow()
    src, dst, pnode = k, k + 1, k + 2
    f.add_arc_with_capacity_and_unit_cost(src, dst, total, 1000 + 1000 * hop)  # left over: worse than any route
    f.add_arc_with_capacity_and_unit_cost(src, pnode, supply, 0)
    taken = {}
    for c in near:
        taken[c] = f.add_arc_with_capacity_and_unit_cost(pnode, c, supply, 0)
    _crew_arcs(f, src, dst, excess, room, crew_pairs(owner, row_of, nb), total, hop, set())
    f.set_node_supply(src, total)
    f.set_node_supply(dst, -total)
    if f.solve_max_flow_with_min_cost() != f.OPTIMAL:
        return None
    quota = np.zeros(k)
    for c, a in taken.items():
        quota[c] = f.flow(a) / scale
    return quota


def _crew_arcs(f, src: int, dst: int, excess: np.ndarray, room: np.ndarray, pairs: dict[int, set[int]],
               total: int, hop: int, blocked: set[tuple[int, int]]) -> list[tuple[int, int, int]]:
    """Arcs of the hand-on flow: excess in, room out, ``hop`` per unit across each open border.

    Returns ``(crew, neighbour, arc)`` for every border arc.
    """
    arcs = []
    for c in range(excess.size):
        if excess[c]:
            f.add_arc_with_capacity_and_unit_cost(src, c, int(excess[c]), 0)
        if room[c]:
            f.add_arc_with_capacity_and_unit_cost(c, dst, int(room[c]), 0)
        for n in sorted(pairs.get(c, ())):
            if (c, n) not in blocked:
                arcs.append((c, n, f.add_arc_with_capacity_and_unit_cost(c, n, total, hop)))
    return arcs


def grow_pool(sg: StreetGraph, owner: np.ndarray, eligible: np.ndarray, load: np.ndarray, limits: np.ndarray,
               est: np.ndarray, quota: np.ndarray | None = None) -> None:
    """Hand the pool (required, owner -1) to neighbouring territories, least loaded crew first.

    ``quota``: service minutes of the pool each crew should take at most
    (:func:`pool_quotas`); once every crew has its share, whatever is left
    of the pool is handed out without them.
    """
    if quota is not None:
        _grow_pool_once(sg, owner, eligible, load, limits, est, quota.copy())
    _grow_pool_once(sg, owner, eligible, load, limits, est, None)


def _grow_pool_once(sg: StreetGraph, owner: np.ndarray, eligible: np.ndarray, load: np.ndarray,
                    limits: np.ndarray, est: np.ndarray, quota: np.ndarray | None) -> None:
    k = limits.size
    centres = _centres(sg, owner, k)
    fronts: list[list] = [[] for _ in range(k)]

    def push(c: int, s: int) -> None:
        for t in sg.neighbours(s).tolist():
            if owner[t] < 0 and sg.required[t] and eligible[c, t]:
                d = float(np.hypot(sg.mid_x[t] - centres[c, 0], sg.mid_y[t] - centres[c, 1]))
                heapq.heappush(fronts[c], (d, t))

    pool = np.flatnonzero(sg.required & (owner < 0))
    if pool.size == 0:
        return
    border = set()
    for s in pool.tolist():
        for t in sg.neighbours(s).tolist():
            if owner[t] >= 0:
                border.add(int(t))
    for t in sorted(border):
        push(int(owner[t]), t)
    turn = [(load[c] / limits[c], c) for c in range(k) if fronts[c] and (quota is None or quota[c] > 0)]
    heapq.heapify(turn)
    while turn:
        _, c = heapq.heappop(turn)
        got = -1
        while fronts[c]:
            _, s = heapq.heappop(fronts[c])
            if owner[s] < 0:
                got = s
                break
        if got < 0:
            continue
        owner[got] = c
        load[c] += est[got]
        if quota is not None:
            quota[c] -= sg.work[got]
            if quota[c] <= 0:
                continue  # this crew has its share of the pool: it stops here
        push(c, got)
        heapq.heappush(turn, (load[c] / limits[c], c))


def transfers(sg: StreetGraph, owner: np.ndarray, eligible: np.ndarray, limits: np.ndarray, rate: np.ndarray,
               band: float, stability: float, rounds: int = 4) -> int:
    """Move work between neighbouring territories so that no estimated share exceeds ``(1 + band)`` x the mean.

    Which crew hands how much to which neighbour is a minimum-cost flow on the
    graph of neighbouring territories (OR-tools' min-cost flow, maximum flow at
    least cost): crews above the band send their excess, crews below it take up
    to their room, and the work handed across borders, so the number of segments
    changing hands, is least. The stability weight prices it as the balancer
    does: a minute of work crossing a border moves 1/(minutes per segment)
    segments, each charged ``stability`` minutes, while a minute of excess left
    where it is costs one minute (a linear stand-in for the longest shift); when
    moving costs more than it saves, the excess stays. The
    flows are carried out along the borders with the balancer's batch growth,
    upstream crews first. A border where no batch can be cut (it would split off
    streets the neighbour cannot serve) is left out and the flow solved again,
    for a few rounds. Estimated load: service minutes times each crew's minutes
    per service minute. Returns the number of segments moved.
    """
    from ortools.graph.python import min_cost_flow

    from crewcut.fleet.balancer import crew_pairs, grow_batch

    k = limits.size
    if k < 2:
        return 0
    row_of = np.repeat(np.arange(sg.nb_ptr.size - 1), np.diff(sg.nb_ptr))
    state = FleetState(owner=owner, routes=[None] * k, depots=[0] * k, limits=limits)
    blocked: set[tuple[int, int]] = set()
    moved = 0
    scale = 10.0  # tenths of a minute
    for _round in range(rounds):
        load = np.bincount(owner[owner >= 0], weights=sg.work[owner >= 0], minlength=k) * rate
        cap = (1.0 + band) * limits * float(load.sum()) / float(limits.sum())
        excess = np.floor(np.maximum(0.0, load - cap) * scale).astype(np.int64)
        room = np.floor(np.maximum(0.0, cap - load) * scale).astype(np.int64)
        total = int(excess.sum())
        if total == 0:
            break
        pairs = crew_pairs(owner, row_of, sg.nb_idx)
        f = min_cost_flow.SimpleMinCostFlow()
        src, dst = k, k + 1
        per_seg = float(load.sum()) / max(1, int(np.count_nonzero(owner >= 0)))  # estimated minutes per segment
        hop = max(1, int(round(1000 * stability / per_seg)))  # integer costs: 1000 = one minute of excess kept
        f.add_arc_with_capacity_and_unit_cost(src, dst, total, 1000)
        arcs = _crew_arcs(f, src, dst, excess, room, pairs, total, hop, blocked)
        f.set_node_supply(src, total)  # as much as fits goes from src to dst
        f.set_node_supply(dst, -total)
        if f.solve_max_flow_with_min_cost() != f.OPTIMAL:
            break
        pending = {(c, n): f.flow(a) / scale for c, n, a in arcs if f.flow(a) > 0}
        done = 0
        while pending:  # upstream first: a crew hands work on once what it receives has arrived
            inflow = {n for (_c, n) in pending}
            ready = sorted(e for e in pending if e[0] not in inflow) or sorted(pending)
            c, n = ready[0]
            batch = grow_batch(state, sg, eligible, c, n, pending.pop((c, n)) / rate[c])
            if batch is None or batch.size == 0:
                blocked.add((c, n))
                continue
            owner[batch] = n
            moved += int(batch.size)
            done += 1
        if done == 0:
            break
    return moved
