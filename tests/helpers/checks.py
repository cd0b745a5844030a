"""Independent checkers: they read the plan file or the arrays, never the planner or the route engine.

Sources: networkx's own algorithms (``is_eulerian``: balanced and connected;
Dijkstra shortest paths; connected components); pyproj's geodesic azimuths
(WGS84) for bearings; the trade's service rules (one pass per curb with traffic,
both curbs of a one-way street in its direction); the min-max bound of Ahr and
Reinelt (2006), see :func:`nx_lower_bound`. Each function's docstring says which.
"""
from __future__ import annotations

import math

import networkx as nx
import numpy as np

from crewcut.solve.network.model import Network


def augmented_multigraph(tasks, arcs, aug, directed: bool = True):
    """The oriented tasks plus the added arcs as a networkx multigraph."""
    o = np.asarray(aug.orientation, bool)
    t = np.concatenate([np.where(o, tasks.tail, tasks.head), arcs.tail[aug.arcs]])
    h = np.concatenate([np.where(o, tasks.head, tasks.tail), arcs.head[aug.arcs]])
    g = nx.MultiDiGraph() if directed else nx.MultiGraph()
    g.add_edges_from(zip(t.tolist(), h.tolist()))
    return g


def assert_valid(tasks, arcs, aug, depot: int) -> None:
    """The invariant of every Eulerization: balanced, connected, contains the depot, legal arcs."""
    assert aug.orientation.shape == (len(tasks),)
    assert np.all(aug.orientation[tasks.directed]), "a directed task was flipped"
    assert np.all((aug.arcs >= 0) & (aug.arcs < len(arcs)))
    assert abs(aug.cost - float(arcs.minutes[aug.arcs].sum())) < 1e-6 * max(1.0, aug.cost)
    assert aug.lower_bound <= aug.cost + 1e-9
    if len(tasks) == 0:
        return
    g = augmented_multigraph(tasks, arcs, aug)
    g.add_node(depot)
    # networkx's own test: connected and every in-degree equals its out-degree
    assert nx.is_eulerian(g), "augmented multigraph is not Eulerian (or not connected with the depot)"


def assert_closed_walk(net: Network, tail, head, seg, forward, depot: int, ignore_oneway: bool = False) -> None:
    """A closed walk from ``depot`` over existing, usable segments in legal directions.

    Checked from the network arrays alone (independent of the circuit code), and
    with networkx: the walk's multigraph must pass ``networkx.is_eulerian``.
    """
    tail, head, seg, forward = (np.asarray(a) for a in (tail, head, seg, forward))
    assert tail.size > 0
    assert tail[0] == depot and head[-1] == depot, "starts and ends at the depot"
    assert (head[:-1] == tail[1:]).all(), "consecutive traversals share a node"
    assert ((seg >= 0) & (seg < net.n_segments)).all(), "existing segments only"
    assert not net.seg_closed[seg].any(), "no closed segment is driven"
    su, sv = net.seg_u[seg], net.seg_v[seg]
    assert np.where(forward, (tail == su) & (head == sv), (tail == sv) & (head == su)).all(), \
        "each traversal runs along its segment"
    assert ignore_oneway or forward[net.seg_oneway[seg]].all(), "one-way segments only in their legal direction"
    g = nx.MultiDiGraph()
    g.add_edges_from(zip(tail.tolist(), head.tolist()))
    assert nx.is_eulerian(g)  # networkx's own check: balanced and strongly connected


def passes_needed(seg: dict, ignore_oneway: bool) -> tuple[int, int, int]:
    """(forward, backward, either) passes of a plan segment from its service kind.

    From the trade (design.md section 2): one pass per curb with traffic, both
    curbs of a one-way street in its direction; one-pass streets either way.
    Written out again here so that the check does not reuse crewcut.solve.costs.
    """
    if seg["closed"]:
        return 0, 0, 0
    svc, ow = seg["service"], seg["oneway"] and not ignore_oneway
    if svc == "none":
        return 0, 0, 0
    if svc == "one_pass":
        return (1, 0, 0) if ow else (0, 0, 1)
    if svc == "both_sides":
        if ignore_oneway:
            return 0, 0, 2
        return (2, 0, 0) if ow else (1, 1, 0)
    if svc == "each_direction":
        return (1, 0, 0) if ow else (1, 1, 0)
    raise ValueError(svc)


def check_plan_independently(plan: dict, whole_segments: bool = True) -> None:
    """Assert the plan's invariants from the plan file alone (raises AssertionError).

    ``whole_segments=False`` drops the territory checks (one owner per segment,
    service only inside the own territory) for the route-first baseline, whose
    pieces may split the two curbs of a street between crews.
    """
    segs = plan["network"]["segments"]
    ignore = plan["settings"]["profile"]["ignore_oneway"]
    need = {s["id"]: passes_needed(s, ignore) for s in segs}
    served: dict[int, list[bool]] = {}
    owner: dict[int, str] = {}
    for crew in plan["crews"]:
        for s in crew["territory"] if whole_segments else ():
            assert s not in owner, f"segment {s} in two territories"
            owner[s] = crew["id"]
        for route in crew["routes"]:
            trs = route["traversals"]
            # a closed walk from the depot (networkx is not needed for this, plain chaining is)
            assert trs[0]["from"] == crew["depot_node"] and trs[-1]["to"] == crew["depot_node"]
            for a, b in zip(trs, trs[1:]):
                assert a["to"] == b["from"]
            total = 0.0
            for t in trs:
                seg = segs[t["segment"]]
                assert not seg["closed"]
                assert {t["from"], t["to"]} == {seg["from"], seg["to"]}
                fwd = (t["from"], t["to"]) == (seg["from"], seg["to"])
                if seg["oneway"] and not ignore:
                    assert fwd, f"one-way segment {seg['id']} driven backwards"
                if t["mode"] == "service" and whole_segments:
                    assert owner.get(t["segment"]) == crew["id"]
                if t["mode"] == "service":
                    served.setdefault(t["segment"], []).append(fwd)
                total += t["minutes"] + t["turn_minutes"]
            assert math.isclose(total, route["totals"]["total_min"], rel_tol=1e-6, abs_tol=1e-3)
    for sid, (f, b, e) in need.items():
        got = served.get(sid, [])
        nf = sum(got)
        nb = len(got) - nf
        assert nf >= f and nb >= b and nf + nb == f + b + e, (sid, (f, b, e), (nf, nb))
        if whole_segments:
            assert (sid in owner) == (f + b + e > 0), sid


def azimuth(p, q) -> float:
    """Compass bearing from lon/lat p to q, degrees (pyproj's geodesic, not crewcut.solve.network.model)."""
    from pyproj import Geod

    az, _, _ = Geod(ellps="WGS84").inv(p[0], p[1], q[0], q[1])
    return az % 360.0


def nx_turn_terms(plan: dict) -> dict:
    """Least turn minutes after arriving along each (segment, forward) at its end node.

    Written again from the plan file: bearings from pyproj's geodesic azimuths of
    the stored coordinates; turn kinds from the trade's reading of a heading change
    (straight up to 30 degrees either way, U-turn from 150 degrees or back along
    the same street, otherwise a turn with or across traffic by the side of the
    road vehicles keep to: from memory). Within 1 degree of a threshold both
    readings are allowed and the cheaper counts, so that rounding of the stored
    coordinates can only lower this bound. Departures: every legal direction of
    every open segment at the node.
    """
    segs = plan["network"]["segments"]
    prof = plan["settings"]["profile"]
    ignore = prof["ignore_oneway"]
    right_hand = prof["traffic"] != "left"
    pen = {"straight": 0.0, "with_traffic": 0.0, "across_traffic": 0.0, "u_turn": 0.0}
    pen.update({k: float(v) for k, v in prof["turn_penalty_s"].items()})
    heading = {}  # (seg, forward) -> (heading leaving, heading arriving)
    leaving: dict[int, list] = {}
    for s in segs:
        if s["closed"]:
            continue
        c = s["coords"]
        if c is not None:
            start, end = azimuth(c[0], c[1]), azimuth(c[-2], c[-1])
            heading[s["id"], True] = (start, end)
            heading[s["id"], False] = ((end + 180.0) % 360.0, (start + 180.0) % 360.0)
        leaving.setdefault(s["from"], []).append((s["id"], True))
        if ignore or not s["oneway"]:
            leaving.setdefault(s["to"], []).append((s["id"], False))

    def least(arr, dep) -> float:
        if arr[0] == dep[0] and arr[1] != dep[1]:
            return pen["u_turn"]
        if arr not in heading or dep not in heading:
            return 0.0  # no geometry: the kind is unknown and costs nothing
        d = (heading[dep][0] - heading[arr][1] + 540.0) % 360.0 - 180.0
        kinds = set()
        for x in (d - 1.0, d, d + 1.0):
            x = (x + 540.0) % 360.0 - 180.0
            mag = abs(x)
            if mag >= 150.0:
                kinds.add("u_turn")
            elif mag <= 30.0:
                kinds.add("straight")
            else:
                kinds.add("with_traffic" if (x > 0) == right_hand else "across_traffic")
        return min(pen[k] for k in kinds)

    out = {}
    for s in segs:
        if s["closed"]:
            continue
        for fwd in (True, False):
            node = s["to"] if fwd else s["from"]
            deps = leaving.get(node, [])
            out[s["id"], fwd] = min((least((s["id"], fwd), d) for d in deps), default=0.0) / 60.0
    return out


def nx_lower_bound(plan: dict) -> float:
    """A lower bound on the longest shift of any plan, recomputed with networkx.

    max(total / k, the longest "depot -> serve one pass -> depot" round trip from
    the best depot) -- the min-max bound of Ahr and Reinelt (2006), "Lower bounds
    for the min-max k-Chinese postman problem" (from memory), with the total
    single-crew cost weakened to its service part plus the turns forced after
    service arrivals (:func:`nx_turn_terms`; every served arrival but the k routes'
    last ones is followed by a departure, so the sum less the k largest terms),
    which any plan must spend. A round trip adds the forced turn after the
    served arrival unless it ends at that depot. Shortest paths: networkx's
    Dijkstra over legal directions at deadhead minutes.
    """
    segs = plan["network"]["segments"]
    ignore = plan["settings"]["profile"]["ignore_oneway"]
    g = nx.DiGraph()
    for s in segs:
        if s["closed"]:
            continue
        for a, b, ok in ((s["from"], s["to"], True), (s["to"], s["from"], ignore or not s["oneway"])):
            if ok and (not g.has_edge(a, b) or g[a][b]["w"] > s["deadhead_min"]):
                g.add_edge(a, b, w=s["deadhead_min"])
    depots = sorted({c["depot_node"] for c in plan["crews"]})
    out = {d: nx.single_source_dijkstra_path_length(g, d, weight="w") for d in depots}
    back = {d: nx.single_source_dijkstra_path_length(g.reverse(copy=False), d, weight="w") for d in depots}
    turn = nx_turn_terms(plan)
    k = len(plan["crews"])
    service = 0.0
    trip = 0.0
    per_pass = []
    for s in segs:
        f, b, e = passes_needed(s, ignore)
        if f + b + e == 0:
            continue
        service += (f + b + e) * s["service_min"]
        tf, tb = turn[s["id"], True], turn[s["id"], False]
        per_pass += [tf] * f + [tb] * b + [min(tf, tb)] * e
        u, v = s["from"], s["to"]
        inf = math.inf
        best = inf
        for d in depots:
            fw = out[d].get(u, inf) + s["service_min"] + back[d].get(v, inf) + (tf if v != d else 0.0)
            bw = out[d].get(v, inf) + s["service_min"] + back[d].get(u, inf) + (tb if u != d else 0.0)
            worst = 0.0
            if f:
                worst = max(worst, fw)
            if b:
                worst = max(worst, bw)
            if e:
                worst = max(worst, min(fw, bw))
            best = min(best, worst)
        trip = max(trip, best)
    per_pass.sort()
    turns = sum(per_pass[:max(0, len(per_pass) - k)])
    return max((service + turns) / k, trip)


def territory_connected(plan: dict, crew_index: int) -> bool:
    """A territory is one piece through its own streets and streets that need no service (networkx).

    Drive-through streets may join groups of a territory's streets (the planner
    links such groups); streets of other territories may not.
    """
    segs = plan["network"]["segments"]
    ignore = plan["settings"]["profile"]["ignore_oneway"]
    terr = plan["crews"][crew_index]["territory"]
    if not terr:
        return False
    g = nx.MultiGraph()
    for s in segs:
        through = not s["closed"] and sum(passes_needed(s, ignore)) == 0
        if through or s["id"] in set(terr):
            g.add_edge(s["from"], s["to"], key=s["id"])
    start = segs[terr[0]]["from"]
    comp = nx.node_connected_component(g, start)
    return all(segs[s]["from"] in comp for s in terr)


# ------------------------------------------------------------------ turn bans
def forbidden_turns_made(steps, bans, depot: int) -> list[tuple[int, tuple]]:
    """(step index, ban row) of every consecutive pair of ``steps`` that is a forbidden turn.

    ``steps``: (segment, forward, from_node) in driving order; ``bans``: rows
    (arrive_seg, arrive_fwd, depart_seg, depart_fwd). A turn made at ``depot`` (the
    step starts there) is not counted: the crew turns in its yard there (the rule
    the product documents; pass depot=-1 to count every turn). Plain Python, on purpose.
    """
    ban = {tuple(int(x) for x in r) for r in bans}
    out = []
    for i in range(1, len(steps)):
        (s0, f0, *_), (s1, f1, *rest) = steps[i - 1], steps[i]
        if rest and rest[0] == depot:
            continue
        row = (int(s0), int(f0), int(s1), int(f1))
        if row in ban:
            out.append((i, row))
    return out


def nx_servable_directions(net: Network, depot: int, bans, ignore_oneway: bool = False) -> set[tuple[int, int]]:
    """(segment, forward) directions that lie on some closed walk from ``depot`` over legal turns.

    networkx on the line graph built here from the segment arrays: a state per legal
    direction of every open segment, a move for every turn at a shared node that is
    not in ``bans``, and a yard state joined to every direction leaving or reaching
    the depot (the crew may turn any way in its yard). A direction is servable when it
    is reachable from the yard and the yard is reachable from it (networkx descendants
    and ancestors).
    """
    g = nx.DiGraph()
    dirs = []
    for s in range(net.n_segments):
        if net.seg_closed[s]:
            continue
        u, v = int(net.seg_u[s]), int(net.seg_v[s])
        dirs.append((s, 1, u, v))
        if ignore_oneway or not net.seg_oneway[s]:
            dirs.append((s, 0, v, u))
    by_tail: dict[int, list] = {}
    for d in dirs:
        by_tail.setdefault(d[2], []).append(d)
    ban = {tuple(int(x) for x in r) for r in bans}
    g.add_node("yard")
    for s, f, a, b in dirs:
        g.add_node((s, f))
        if a == depot:
            g.add_edge("yard", (s, f))
        if b == depot:
            g.add_edge((s, f), "yard")
        for s2, f2, _, _ in by_tail.get(b, []):
            if (s, f, s2, f2) not in ban:
                g.add_edge((s, f), (s2, f2))
    return (nx.descendants(g, "yard") & nx.ancestors(g, "yard")) - {"yard"}
