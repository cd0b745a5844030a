"""Growing connected, compact territories balanced by estimated work.

Problem
-------
Split the segments that need service into k territories, one per crew, so that
each territory is connected (through shared intersections, or through the
drive-through links of :mod:`crewcut.fleet.streets` where only drive-through streets
join two groups of required streets), compact, and carries about the same
estimated working time. Whole segments are assigned: every pass of a segment goes
to the same crew. Segments that need no service belong to no territory; any crew
may drive through them.

Method
------
Simultaneous region growing from one seed segment per crew (a districting
heuristic in the spirit of the multi-source growth used in arc-routing
districting, e.g. Muyldermans, Cattrysse and Van Oudheusden (2002), "Districting
for salt spreading operations", EJOR 139; the details here are our own). At every
step the crew with the least estimated load takes the unassigned neighbouring
segment nearest to its centre, which keeps territories round and loads level.
The estimated load of a crew is its service minutes times a deadhead allowance,
plus the round trip from its depot to its seed. A crew that has no unassigned
neighbour left stops growing. Ties are broken by segment id: the result depends
only on the input and the seeds.
"""
from __future__ import annotations

import heapq
from collections import deque

import numpy as np

from crewcut.solve.errors import InputError
from crewcut.solve.network.model import Network

from crewcut.fleet.streets import StreetGraph

# Expected deadhead as a share of service time before any route is known; the
# balancer replaces it with each territory's measured share. From memory, no source:
# curb sweeping with both curbs per street repeats few streets.
DEADHEAD_ALLOWANCE = 0.15


def grow_territories(net: Network, sg: StreetGraph, centres: np.ndarray, seeds: np.ndarray,
                     eligible: np.ndarray, approach_min: np.ndarray) -> np.ndarray:
    """Owner crew of every segment (-1 for segments that need no service).

    Parameters
    ----------
    centres: (k, 2) centre of each crew's territory (local metres).
    seeds: (k,) seed segment of each crew (-1: the crew gets no seed).
    eligible: (k, m) bool, crew i can serve segment s from its depot and return.
    approach_min: (k,) round-trip minutes from each depot to its seed.
    """
    k = centres.shape[0]
    m = sg.required.size
    owner = np.full(m, -1, np.int64)
    est = sg.work * (1.0 + DEADHEAD_ALLOWANCE)
    load = np.zeros(k)
    fronts: list[list] = [[] for _ in range(k)]
    turn: list = []
    for c in range(k):
        s = int(seeds[c])
        if s < 0:
            continue
        owner[s] = c
        load[c] = approach_min[c] + est[s]
        push_neighbours(sg, s, c, owner, centres, fronts[c])
        heapq.heappush(turn, (load[c], c))
    grow_least_loaded(sg, owner, eligible, fronts, turn, load, est, centres)
    left = np.flatnonzero(sg.required & (owner < 0))
    if left.size:
        attach_leftovers(sg, owner, eligible, left)
        left = np.flatnonzero(sg.required & (owner < 0))
    if left.size:
        names = describe_segment(net, left)
        raise InputError(
            f"{left.size} segment(s) that need service cannot be joined to a connected territory of a crew "
            f"that can reach them: {names}",
            "they are cut off by closed or one-way streets from every territory (e.g. an island behind a "
            "closed bridge); open a street that joins them, set their service to none, or add a crew "
            "with a depot there")
    return owner


def grow_least_loaded(sg: StreetGraph, owner: np.ndarray, eligible: np.ndarray, fronts, turn: list, load, est,
                      centres) -> None:
    """The growth loop territories and days share: the least loaded grower takes its nearest free neighbour.

    ``turn`` is a heap of (load, grower); ``fronts[c]`` a heap of (distance to ``centres[c]``,
    segment); ``load`` and ``centres`` are indexed by grower (arrays or dicts). In place on
    ``owner``, ``load`` and the heaps; a grower stops when its front holds nothing it may take.
    """
    while turn:
        _, c = heapq.heappop(turn)
        front = fronts[c]
        got = -1
        while front:
            _, s = heapq.heappop(front)
            if owner[s] < 0 and eligible[c, s]:
                got = s
                break
        if got < 0:
            continue  # nothing left to take: this grower stops
        owner[got] = c
        load[c] += est[got]
        push_neighbours(sg, got, c, owner, centres, front)
        heapq.heappush(turn, (load[c], c))


def push_neighbours(sg: StreetGraph, s: int, c: int, owner: np.ndarray, centres, front: list) -> None:
    """Push the free neighbours of segment ``s`` on grower ``c``'s front, by distance to its centre."""
    nb = sg.neighbours(s)
    nb = nb[owner[nb] < 0]
    if nb.size == 0:
        return
    d = np.hypot(sg.mid_x[nb] - centres[c][0], sg.mid_y[nb] - centres[c][1])
    for dist, t in zip(d.tolist(), nb.tolist()):
        heapq.heappush(front, (dist, t))


def attach_leftovers(sg: StreetGraph, owner: np.ndarray, eligible: np.ndarray, left: np.ndarray) -> None:
    """Give segments a growing crew could not take (not eligible) to any eligible neighbour territory."""
    changed = True
    todo = set(left.tolist())
    while changed and todo:
        changed = False
        for s in sorted(todo):
            nb = sg.neighbours(s)
            cands = sorted({int(owner[t]) for t in nb if owner[t] >= 0 and eligible[owner[t], s]})
            if cands:
                owner[s] = cands[0]
                todo.discard(s)
                changed = True


def describe_segment(net: Network, segs: np.ndarray, limit: int = 8) -> str:
    shown = [f"{int(s)} ('{net.seg_source[int(s)]}')" for s in segs[:limit]]
    more = f" and {segs.size - limit} more" if segs.size > limit else ""
    return ", ".join(shown) + more


def is_connected(sg: StreetGraph, segs: np.ndarray | list[int]) -> bool:
    """True when the segments form one piece under the neighbour relation."""
    return len(pieces(sg, segs)) <= 1


def pieces(sg: StreetGraph, segs) -> list[list[int]]:
    """Connected pieces of a set of segments, largest first (ties: lowest segment id)."""
    members = set(int(s) for s in segs)
    out = []
    seen: set[int] = set()
    for start in sorted(members):
        if start in seen:
            continue
        comp = [start]
        seen.add(start)
        q = deque([start])
        while q:
            s = q.popleft()
            for t in sg.neighbours(s).tolist():
                if t in members and t not in seen:
                    seen.add(t)
                    comp.append(t)
                    q.append(t)
        out.append(sorted(comp))
    out.sort(key=lambda p: (-len(p), p[0]))
    return out


def territories_of(owner: np.ndarray, k: int) -> list[np.ndarray]:
    """Sorted segment ids of each crew's territory."""
    order = np.argsort(owner, kind="stable")
    o = owner[order]
    return [order[o == c] for c in range(k)]


def smooth_boundaries(net: Network, sg: StreetGraph, owner: np.ndarray, eligible: np.ndarray,
                      rounds: int = 4) -> int:
    """Hand dangling border segments to a neighbour territory; returns the number of moves.

    Where a territory holds only one segment at a node from which streets go on,
    its crew must turn back there (a U-turn, 90 s for a sweeper, or a detour).
    Call such a (territory, node) pair a *dead end* (real dead ends, nodes with a
    single street, do not count). A pendant segment ``s`` of territory A (A has
    no other segment at its end x) moves to a territory B that holds a segment at
    x when that lowers the number of dead ends of A and B at the ends of ``s``.
    Both stay connected: ``s`` hangs off A, and joins B at x. Moves change the
    work slightly; the balancer evens it out afterwards.
    """
    u, v = net.seg_u, net.seg_v
    req = np.flatnonzero(sg.required)
    degree = np.bincount(np.concatenate([u[req], v[req]]), minlength=net.n_nodes)
    moved = 0
    for _ in range(rounds):
        count: dict[tuple[int, int], int] = {}
        for s in req.tolist():
            c = int(owner[s])
            for x in (int(u[s]), int(v[s])):
                count[(c, x)] = count.get((c, x), 0) + 1
        at_node: dict[int, set[int]] = {}
        for (c, x) in count:
            at_node.setdefault(x, set()).add(c)

        def dead(c: int, x: int, delta: int = 0) -> int:
            return int(degree[x] > 1 and count.get((c, x), 0) + delta == 1)

        changed = 0
        for s in req.tolist():
            a = int(owner[s])
            ends = (int(u[s]), int(v[s]))
            if ends[0] == ends[1]:
                continue
            for x, y in (ends, ends[::-1]):
                if count.get((a, x), 0) != 1 or count.get((a, y), 0) < 2:
                    continue
                # a link (not through a shared node) might hold A together: leave those alone
                nb = sg.neighbours(s)
                if np.any((owner[nb] == a) & (u[nb] != x) & (v[nb] != x) & (u[nb] != y) & (v[nb] != y)):
                    continue
                best, gain = -1, 0
                for b in sorted(at_node.get(x, ())):
                    if b == a or not eligible[b, s]:
                        continue
                    before = dead(a, x) + dead(a, y) + dead(b, x) + dead(b, y)
                    after = dead(a, x, -1) + dead(a, y, -1) + dead(b, x, 1) + dead(b, y, 1)
                    if before - after > gain:
                        best, gain = b, before - after
                if best < 0:
                    continue
                owner[s] = best
                for z in ends:
                    count[(a, z)] -= 1
                    count[(best, z)] = count.get((best, z), 0) + 1
                    at_node.setdefault(z, set()).add(best)
                changed += 1
                break
        moved += changed
        if not changed:
            break
    return moved


def tidy_handover(sg: StreetGraph, owner: np.ndarray, eligible: np.ndarray, c: int, n: int,
                  batch: list[int], border: "BorderTurns", rounds: int = 4) -> list[int]:
    """Adjust a batch of ``c``'s segments about to go to ``n`` so that the new border forces fewer turns.

    At the nodes the batch touches, a segment of ``c`` joins the batch, or a batch
    segment stays with ``c``, when that lowers the :class:`BorderTurns` estimate
    of ``c`` and ``n`` at its two ends (a stub left behind costs a U-turn); each
    change lowers the estimate, so the loop ends. Only segments ``n`` can serve
    join. Connectivity is the caller's to check.
    """
    o = owner.copy()
    o[batch] = n
    for _ in range(rounds):
        changed = False
        nodes = sorted(set(sg.seg_u[o != owner].tolist()) | set(sg.seg_v[o != owner].tolist()))
        for x in nodes:
            for s in sg.at(x).tolist():
                a, b = int(sg.seg_u[s]), int(sg.seg_v[s])
                if a == b or owner[s] != c or (o[s] == c and not eligible[n, s]):
                    continue
                ends = (a, b)
                before = sum(border.at(o, c, y) + border.at(o, n, y) for y in ends)
                o[s] = n if o[s] == c else c
                after = sum(border.at(o, c, y) + border.at(o, n, y) for y in ends)
                if after < before - 1e-9:
                    changed = True
                else:
                    o[s] = n if o[s] == c else c
        if not changed:
            break
    return np.flatnonzero((o == n) & (owner == c)).tolist()


class BorderTurns:
    """Estimated turn minutes a territory's own passes force at each node.

    At a node ``x`` a crew pairs each of its arrivals with one of its departures;
    the least total penalty of such a pairing among the passes of territory ``c``
    alone (a small assignment problem, :func:`scipy.optimize.linear_sum_assignment`)
    is the estimate ``cost(c, x)``. Where the whole node belongs to one crew this
    is what its route can reach; where a border splits the node, each side pays
    for the turns it is forced into (a stub forces a U-turn, an L a turn). It is
    an estimate for choosing borders, not a bound (deadhead departures are left
    out, and passes that may be served either way are not counted).
    """

    def __init__(self, net: Network, sg: StreetGraph, model) -> None:
        p = sg.passes
        seg = np.concatenate([np.repeat(np.arange(p.forward.size), p.forward),
                              np.repeat(np.arange(p.backward.size), p.backward)]).astype(np.int64)
        fwd = np.concatenate([np.ones(int(p.forward.sum()), bool), np.zeros(int(p.backward.sum()), bool)])
        tail = np.where(fwd, net.seg_u[seg], net.seg_v[seg])
        head = np.where(fwd, net.seg_v[seg], net.seg_u[seg])
        n = net.n_nodes
        a_ord = np.argsort(head, kind="stable")
        d_ord = np.argsort(tail, kind="stable")
        a_ptr = np.searchsorted(head[a_ord], np.arange(n + 1))
        d_ptr = np.searchsorted(tail[d_ord], np.arange(n + 1))
        na, nd = np.diff(a_ptr), np.diff(d_ptr)
        # every (arrival, departure) pair at every node, one classify call
        k = na * nd
        node = np.repeat(np.arange(n), k)
        off = np.concatenate([[0], np.cumsum(k)])
        r = np.arange(int(k.sum())) - off[node]
        ai = a_ord[a_ptr[node] + r // np.maximum(nd[node], 1)]
        di = d_ord[d_ptr[node] + r % np.maximum(nd[node], 1)]
        sec = model.pair_seconds(seg[ai], fwd[ai], seg[di], fwd[di]) / 60.0
        self.arr_seg = {}
        self.dep_seg = {}
        self.cost = {}
        for x in np.flatnonzero(k > 0).tolist():
            self.arr_seg[x] = seg[a_ord[a_ptr[x]:a_ptr[x + 1]]]
            self.dep_seg[x] = seg[d_ord[d_ptr[x]:d_ptr[x + 1]]]
            self.cost[x] = sec[off[x]:off[x + 1]].reshape(na[x], nd[x])

    def at(self, owner: np.ndarray, c: int, x: int) -> float:
        """Estimated forced turn minutes of territory ``c`` at node ``x``."""
        from scipy.optimize import linear_sum_assignment

        m = self.cost.get(x)
        if m is None:
            return 0.0
        ra = owner[self.arr_seg[x]] == c
        cd = owner[self.dep_seg[x]] == c
        if not ra.any() or not cd.any():
            return 0.0
        sub = m[np.ix_(ra, cd)]
        if sub.size == 1:
            return float(sub[0, 0])
        i, j = linear_sum_assignment(sub)
        return float(sub[i, j].sum())


def street_runs(net: Network, sg: StreetGraph) -> list[list[int]]:
    """Required segments chained through nodes where exactly two required segments meet.

    A run ends at intersections (three or more required segments), dead ends and
    nodes where the required streets stop. Moving a whole run between
    territories never leaves a stub in the middle of a street.
    """
    req = np.flatnonzero(sg.required)
    u, v = net.seg_u[req], net.seg_v[req]
    ends = np.concatenate([u, v])
    deg = np.bincount(ends, minlength=net.n_nodes)
    parent = {int(s): int(s) for s in req.tolist()}

    def find(x: int) -> int:
        while parent[x] != x:
            parent[x] = parent[parent[x]]
            x = parent[x]
        return x

    segs_at: dict[int, list[int]] = {}
    for s, a, b in zip(req.tolist(), u.tolist(), v.tolist()):
        segs_at.setdefault(a, []).append(s)
        if b != a:
            segs_at.setdefault(b, []).append(s)
    for x, ss in segs_at.items():
        if deg[x] == 2 and len(ss) == 2:
            ra, rb = find(ss[0]), find(ss[1])
            if ra != rb:
                parent[max(ra, rb)] = min(ra, rb)
    runs: dict[int, list[int]] = {}
    for s in req.tolist():
        runs.setdefault(find(s), []).append(s)
    return [sorted(r) for _, r in sorted(runs.items())]


def polish_borders(net: Network, sg: StreetGraph, owner: np.ndarray, eligible: np.ndarray,
                   bt: "BorderTurns", rounds: int = 6, slack: float = 0.01) -> int:
    """Move street runs across borders where that cuts the turns borders force; returns moves made.

    A run's part held by territory A (see :func:`street_runs`) moves to a
    territory B holding another required segment at one of its nodes when the
    :class:`BorderTurns` estimate of A and B at the nodes it touches goes down;
    A must stay connected (B does: the part joins it at that node), B must be
    able to serve every segment of it, and the larger of the two estimated
    loads (work with the deadhead allowance, plus the border turns) may grow by
    at most ``slack`` of the mean load; the balancer evens out the rest. Runs
    are visited in order of their lowest segment id: deterministic.
    """
    u, v = net.seg_u, net.seg_v
    k = int(eligible.shape[0])
    est = sg.work * (1.0 + DEADHEAD_ALLOWANCE)
    req = np.flatnonzero(sg.required)
    load = np.bincount(owner[req], weights=est[req], minlength=k).astype(float)
    segs_at: dict[int, list[int]] = {}
    for s in req.tolist():
        for x in {int(u[s]), int(v[s])}:
            segs_at.setdefault(x, []).append(s)
    runs = street_runs(net, sg)
    mean = float(load.sum()) / max(k, 1)
    moved = 0
    for _ in range(rounds):
        changed = 0
        for run in runs:
            by_owner: dict[int, list[int]] = {}
            for s in run:
                by_owner.setdefault(int(owner[s]), []).append(s)
            for a, part in sorted(by_owner.items()):
                if a < 0:
                    continue
                nodes = sorted({int(u[s]) for s in part} | {int(v[s]) for s in part})
                cands = sorted({int(owner[t]) for x in nodes for t in segs_at.get(x, ())} - {a, -1})
                if not cands:
                    continue
                before_a = sum(bt.at(owner, a, x) for x in nodes)
                best, best_delta, best_after = -1, -1e-9, None
                for b in cands:
                    if not eligible[b, part].all():
                        continue
                    before = before_a + sum(bt.at(owner, b, x) for x in nodes)
                    owner[part] = b
                    after_a = sum(bt.at(owner, a, x) for x in nodes)
                    after_b = sum(bt.at(owner, b, x) for x in nodes)
                    owner[part] = a
                    delta = after_a + after_b - before
                    if delta < best_delta:
                        best, best_delta, best_after = b, delta, (after_a, after_b, before)
                if best < 0:
                    continue
                b = best
                w = float(est[part].sum())
                after_a, after_b, before = best_after
                before_b = before - before_a
                new_a = load[a] - w + after_a - before_a
                new_b = load[b] + w + after_b - before_b
                if max(new_a, new_b) > max(load[a], load[b]) + slack * mean:
                    continue
                rest = np.flatnonzero(owner == a)
                pset = set(part)
                rest = [s for s in rest.tolist() if s not in pset]
                if not rest or len(pieces(sg, rest)) > 1:
                    continue
                owner[part] = b
                load[a], load[b] = new_a, new_b
                changed += 1
        moved += changed
        if not changed:
            break
    return moved

