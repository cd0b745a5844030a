"""Benchmark: planning generated towns for a fleet, against the route-first baseline.

Run:  /work/venv/bin/python tests/bench_plan.py [--sizes 2000,20000] [--crews 4,12] [--workers 2]

For each invented Tallowmere town (crewcut.demo.towngen, seed 0) and crew count, with all
crews sharing one depot at the town centre and the shipped curb-sweeping profile
(shift limits raised to 24 h so that no limit interferes with balancing):

* wall time of ``plan_fleet`` (territories, routes, balancing, lower bound);
* longest shift / lower bound (crewcut.solve.postman.bounds.fleet_lower_bound), longest / mean;
* deadhead share of the distance driven;
* longest shift of the route-first, cluster-second baseline of Frederickson,
  Hecht and Kim (1978) (one giant tour from crewcut.solve.route.plan_route split into k
  pieces, crewcut.fleet.baseline) and our longest over the baseline's;
* how territorial each plan is, ours and the baseline's side by side: "area x",
  the crews' convex hulls (of the midpoints of the streets each serves, shapely)
  added up over the hull of all streets (1.0: crews do not overlap; k: every crew
  ranges over the whole town), and "split %", the share of streets whose passes
  (curbs) are swept by two or more crews.

Targets (design.md section 6): 20,000 segments and 12 crews under 60 s on 2 cores,
longest <= 1.10 x lower bound, longest / mean <= 1.03, better than the baseline.
Not collected by pytest (the file name does not start with test_).
"""
from __future__ import annotations

import argparse
import dataclasses
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from crewcut.fleet.baseline import route_first_split  # noqa: E402
from crewcut.fleet.crews import resolve_crews  # noqa: E402
from crewcut.fleet.planner import plan_fleet  # noqa: E402
from crewcut.solve.profile import builtin_profile  # noqa: E402
from crewcut.solve.readers import read_network  # noqa: E402
from crewcut.solve.route import plan_route  # noqa: E402
from crewcut.demo.towngen import write_town  # noqa: E402


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--sizes", default="2000,20000")
    ap.add_argument("--crews", default="4,12")
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--time-limit", type=float, default=None)
    ap.add_argument("--seed", type=int, default=0)
    a = ap.parse_args()
    profile = dataclasses.replace(builtin_profile("curb-sweeping"), shift_limit_min=1440.0, crews=())
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        for n in [int(x) for x in a.sizes.split(",")]:
            path = Path(tmp) / f"town-{n}.geojson"
            write_town(path, n, seed=0)
            net = read_network(path, profile)
            for k in [int(x) for x in a.crews.split(",")]:
                crews = resolve_crews(net, profile, k=k, depot_lonlat=(-30.5, 45.2))
                t0 = time.perf_counter()
                plan = plan_fleet(net, profile, crews, seed=a.seed, workers=a.workers, time_limit_s=a.time_limit)
                wall = time.perf_counter() - t0
                s = plan.summary
                t1 = time.perf_counter()
                giant = plan_route(net, profile, crews[0].depot_node, None, seed=a.seed)
                base = route_first_split(net, profile, crews[0].depot_node, k, giant=giant)
                base_wall = time.perf_counter() - t1
                base_longest = max(r.totals.total_min for r in base)
                ours = [r for c in plan.crews for r in c.routes]
                rows.append((net.n_segments, k, wall, s.longest_min / s.lower_bound_min,
                             s.longest_over_mean, s.deadhead_pct, s.longest_min / base_longest,
                             base_wall, *_territorial(net, ours), *_territorial(net, base),
                             s.balance.stop, s.balance.moves_kept, s.balance.trials))
                print(_fmt(rows[-1]), flush=True)
    print()
    print(_header())
    for r in rows:
        print(_fmt(r))


def _territorial(net, routes) -> tuple[float, float]:
    """(area x, split %) of a set of routes: see the module notes."""
    import numpy as np
    import shapely

    crews_of: dict[int, set[int]] = {}
    for i, r in enumerate(routes):
        for t in r.traversals:
            if t.service:
                crews_of.setdefault(t.segment, set()).add(i)
    segs = np.array(sorted(crews_of), np.int64)
    mx = (net.node_x[net.seg_u] + net.node_x[net.seg_v]) / 2.0
    my = (net.node_y[net.seg_u] + net.node_y[net.seg_v]) / 2.0

    def hull_area(ss) -> float:
        ss = np.asarray(sorted(ss), np.int64)
        return float(shapely.convex_hull(shapely.multipoints(np.stack([mx[ss], my[ss]], axis=1))).area)

    areas = [hull_area([s for s in segs.tolist() if i in crews_of[s]]) for i in range(len(routes))]
    split = sum(1 for v in crews_of.values() if len(v) > 1)
    return sum(areas) / hull_area(segs), 100.0 * split / max(len(crews_of), 1)


def _header() -> str:
    return (f"{'segments':>8} {'crews':>5} {'wall s':>7} {'longest/LB':>10} {'longest/mean':>12} "
            f"{'deadhead %':>10} {'ours/baseline':>13} {'baseline s':>10} {'area x ours/base':>16} "
            f"{'split % ours/base':>17}  balancer")


def _fmt(r) -> str:
    n, k, wall, lb, lm, dh, vb, bw, ax, sp, bax, bsp, stop, kept, tried = r
    return (f"{n:>8,} {k:>5} {wall:>7.1f} {lb:>10.3f} {lm:>12.3f} {dh:>10.1f} {vb:>13.3f} {bw:>10.1f} "
            f"{ax:>7.2f} / {bax:<6.2f} {sp:>8.1f} / {bsp:<6.1f}  {stop}, {kept} kept / {tried} tried")


if __name__ == "__main__":
    print(_header())
    main()
