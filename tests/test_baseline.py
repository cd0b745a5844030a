"""The route-first, cluster-second baseline (Frederickson, Hecht and Kim 1978) on small networks.

The baseline's pieces must together serve every pass exactly once as closed walks
from the depot (checked from a plan file, independently), never beat the lower
bound, and each piece obeys the split rule of the paper (from memory): the j-th
cut lies where the tour's cumulative cost first exceeds (j/k)(L - 2 c_max) + c_max,
so a piece's own part of the tour costs at most (L - 2 c_max)/k plus one traversal,
and the two closing paths at most a round trip each. The ratio of our longest shift to
the baseline's is printed for the closing note.
"""
from __future__ import annotations

import numpy as np
import pytest

from helpers.checks import check_plan_independently, nx_lower_bound
from helpers.nets import repaired_grid
from crewcut.fleet.baseline import route_first_split
from crewcut.fleet.crews import resolve_crews
from crewcut.plans.model import CrewPlan
from crewcut.plans.planfile import build_plan, plan_to_dict
from crewcut.fleet.planner import plan_fleet
from crewcut.solve.profile import Crew, Profile


@pytest.mark.parametrize("seed,k", [(1, 2), (2, 3), (3, 4), (4, 3)])
def test_baseline_valid_and_compared(seed, k):
    from crewcut.solve.route import plan_route

    profile = Profile(shift_limit_min=1440.0)
    net = repaired_grid(9, 6, seed)
    crews = resolve_crews(net, profile, k=k, depot_lonlat=(-30.5, 45.2))
    depot = crews[0].depot_node
    giant = plan_route(net, profile, depot, None, seed=seed)
    pieces = route_first_split(net, profile, depot, k, giant=giant)
    assert len(pieces) == k
    plans = [CrewPlan(Crew(f"piece-{j + 1}", 1440.0, None, depot), (), (r,)) for j, r in enumerate(pieces)]
    doc = plan_to_dict(build_plan(net, profile, plans))
    check_plan_independently(doc, whole_segments=False)
    longest_base = max(r.totals.total_min for r in pieces)
    assert longest_base >= nx_lower_bound(doc) - 1e-6
    # charged like our routes: every turn after the start at the profile's penalty, the joins included
    for r in pieces:
        assert r.traversals[0].turn == "start" and r.traversals[0].turn_minutes == 0.0
        for t in r.traversals[1:]:
            assert t.turn != "start"
            assert t.turn_minutes == pytest.approx(profile.turn_penalty_s.get(t.turn, 0.0) / 60.0)
    # k closed walks that together serve every pass once: at least the forced turns (crewcut.solve.postman.bounds proof)
    from crewcut.solve.postman.bounds import turn_lower_bound

    assert sum(r.totals.turn_min for r in pieces) >= turn_lower_bound(net, profile, k) - 1e-9
    # split rule: each piece is at most a k-th of the tour (less 2 c_max) plus one traversal,
    # plus the closing paths (each at most the largest depot round trip, 2 c_max)
    cost = np.array([t.minutes + t.turn_minutes for t in giant.traversals])
    total = cost.sum()
    ours = plan_fleet(net, profile, crews, seed=seed, workers=1)
    ratio = ours.summary.longest_min / longest_base
    print(f"\nseed {seed} k {k}: ours {ours.summary.longest_min:.1f} min, "
          f"route-first baseline {longest_base:.1f} min, ratio {ratio:.3f}")
    c = _c_max(net, profile, depot)
    assert longest_base <= (total - 2 * c) / k + cost.max() + 4 * c + 1e-6
    assert ratio < 1.5  # sanity: far worse than the baseline would mean the balancer is broken


def _c_max(net, profile, depot) -> float:
    import networkx as nx

    from crewcut.solve.costs import deadhead_minutes

    dm = deadhead_minutes(net, profile)
    g = nx.DiGraph()
    tail, head, seg, _ = net.arcs(profile.ignore_oneway)
    for a, b, s in zip(tail.tolist(), head.tolist(), seg.tolist()):
        if not g.has_edge(a, b) or g[a][b]["w"] > dm[s]:
            g.add_edge(a, b, w=float(dm[s]))
    out = nx.single_source_dijkstra_path_length(g, depot, weight="w")
    back = nx.single_source_dijkstra_path_length(g.reverse(copy=False), depot, weight="w")
    return max(0.5 * (out[v] + back[v]) for v in out if v in back)
