"""Eulerization benchmark (not collected by pytest): run ``python tests/bench_eulerize.py``.

1. Undirected T-join against a networkx baseline (Dijkstra between the odd nodes,
   then ``nx.min_weight_matching`` on their complete graph) at about 250, 500 and
   1,000 odd nodes: same cost, speed ratio printed (target >= 1,000 at 1,000).
2. A generated 100,000-segment town (crewcut.demo.towngen + crewcut.solve.readers): undirected
   (walking profile) and directed (every street ploughed each way) Eulerization,
   each timed (target under 5 s).
3. A 20,000-segment mixed town (main streets both curbs, residential streets one
   pass either way): time and gap to the lower bound (target under 30 s).

Options: ``--quick`` skips the 1,000-odd-node baseline (networkx takes many minutes there).
"""
from __future__ import annotations

import argparse
import dataclasses
import json
import sys
import tempfile
import time
from pathlib import Path

import networkx as nx
import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from crewcut.solve.postman.eulerize import eulerize  # noqa: E402
from crewcut.solve.profile import builtin_profile  # noqa: E402
from crewcut.solve.postman.tasks import build_deadhead, build_tasks  # noqa: E402
from crewcut.solve.postman.tjoin import min_tjoin  # noqa: E402


def perturbed_grid(side: int, seed: int):
    """A street-like grid: random lengths 60-140 m, 12 % of the streets removed (kept connected)."""
    rng = np.random.default_rng(seed)
    g = nx.grid_2d_graph(side, side)
    idx = {p: i for i, p in enumerate(sorted(g.nodes))}
    edges = sorted((idx[a], idx[b]) for a, b in g.edges)
    tree = nx.minimum_spanning_tree(nx.Graph((a, b, {"weight": rng.random()}) for a, b in edges))
    keep = [e for e in edges if tree.has_edge(*e) or rng.random() > 0.12]
    u = np.array([a for a, _ in keep])
    v = np.array([b for _, b in keep])
    w = rng.uniform(60, 140, u.size).round(2)
    return side * side, u, v, w


def networkx_baseline(n, u, v, w, odd):
    g = nx.Graph()
    g.add_weighted_edges_from(zip(u.tolist(), v.tolist(), w.tolist()))
    t = odd.tolist()
    dist = {a: nx.single_source_dijkstra_path_length(g, a) for a in t}
    k = nx.Graph()
    k.add_weighted_edges_from((a, b, dist[a][b]) for i, a in enumerate(t) for b in t[i + 1:])
    return sum(dist[a][b] for a, b in nx.min_weight_matching(k))


def bench_matching(targets):
    print("1. undirected T-join vs networkx (Dijkstra + min_weight_matching)")
    print(f"{'odd nodes':>9} {'segments':>9} {'ours s':>9} {'networkx s':>11} {'ratio':>9} {'ours m':>14} {'networkx m':>14}")
    n, u, v, w = perturbed_grid(10, seed=1)  # warm-up: loads PyMatching outside the timing
    min_tjoin(u, v, w, np.flatnonzero(np.bincount(np.r_[u, v], minlength=n) % 2), n)
    for target in targets:
        side = int(np.sqrt(target / 0.3))  # roughly 25-30 % of the grid's nodes end up odd
        while True:  # the smallest grid with at least ``target`` odd nodes
            n, u, v, w = perturbed_grid(side, seed=target)
            odd = np.flatnonzero(np.bincount(np.r_[u, v], minlength=n) % 2)
            if odd.size >= target:
                break
            side += 1
        t0 = time.perf_counter()
        r = min_tjoin(u, v, w, odd, n)
        ours = time.perf_counter() - t0
        t0 = time.perf_counter()
        ref = networkx_baseline(n, u, v, w, odd)
        base = time.perf_counter() - t0
        same = "same" if abs(r.cost - ref) < 1e-6 * ref else "DIFFERENT"
        print(f"{odd.size:>9} {u.size:>9} {ours:>9.4f} {base:>11.2f} {base / ours:>9.0f} {r.cost:>14.2f} {ref:>14.2f} {same}",
              flush=True)


def load_town(n_segments: int, profile):
    from crewcut.solve.readers import read_network
    from crewcut.demo.towngen import generate_town
    with tempfile.TemporaryDirectory() as d:
        path = Path(d) / "town.geojson"
        path.write_text(json.dumps(generate_town(n_segments, seed=0)))
        return read_network(path, profile)


def run_eulerize(label, net, profile):
    tasks, arcs = build_tasks(net, profile), build_deadhead(net, profile)
    depot = int(np.argmax(np.bincount(np.r_[net.seg_u, net.seg_v])))  # a busy crossing
    t0 = time.perf_counter()
    aug = eulerize(tasks, arcs, depot, net.n_nodes, time_limit_s=10.0)
    took = time.perf_counter() - t0
    gap = aug.cost / aug.lower_bound - 1 if aug.lower_bound > 0 else 0.0
    print(f"  {label:<34} segments {net.n_segments:>7}  tasks {len(tasks):>7} "
          f"({int((~tasks.directed).sum())} undirected)  {took:6.2f} s  added {aug.cost:10.1f} min  "
          f"bound {aug.lower_bound:10.1f}  gap {gap:6.2%}  exact {aug.exact}  [{aug.method}]", flush=True)


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true")
    args = ap.parse_args()
    bench_matching([250, 500] if args.quick else [250, 500, 1000])
    walk = builtin_profile("walking-inspection")
    plough = dataclasses.replace(builtin_profile("ploughing"), default_service={"default": "each_direction"})
    mixed = dataclasses.replace(builtin_profile("curb-sweeping"),
                                default_service={"default": "both_sides", "residential": "one_pass",
                                                 "service": "none"})
    print("2. 100,000-segment generated town")
    net = load_town(100_000, walk)
    run_eulerize("undirected (walking, one pass)", net, walk)
    net = load_town(100_000, plough)
    run_eulerize("directed (each direction)", net, plough)
    print("3. 20,000-segment mixed town")
    net = load_town(20_000, mixed)
    run_eulerize("mixed (main both curbs, res. one)", net, mixed)


if __name__ == "__main__":
    main()
