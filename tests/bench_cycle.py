"""Benchmark: planning a sweeping cycle on generated towns, with and without posted districts.

Run:  .venv/bin/python tests/bench_cycle.py [--cases 20000:12:5,100000:40:10] [--workers 2]
      [--posted 0.15]

Each case is SEGMENTS:CREWS:DAYS on an invented Tallowmere town (crewcut.demo.towngen,
seed 0), every crew at the town's first depot, the shipped curb-sweeping profile with its
8-hour shift, the cycle mon..fri (five days) or mon1..fri2 (ten), shifts from 06:00. Each
case runs twice: with no street posted (days proposed for every street) and with a share
of the streets posted the way a city posts districts (``--posted``: k-means districts of
the street midpoints, each posted for one day of the cycle and one of the windows
08:00-10:00, 10:00-12:00, 08:00-12:00; invented postings). For each it prints:

* wall time of ``plan_cycle`` (territories or crew-day regions, day routes, balancing,
  lower bound);
* longest day / lower bound (crewcut.solve.postman.bounds.fleet_lower_bound for one crew
  per crew-day);
* day balance: the most uneven crew's longest day / mean day (target <= 1.05);
* posted passes served inside their windows (must be all) and days over the shift limit.

Targets (issue "Sweeping cycles"): 20,000 segments, 12 crews x 5 days under 2 min and
100,000 segments, 40 crews x 10 days under 10 min, on 2 cores.
Not collected by pytest (the file name does not start with test_).
"""
from __future__ import annotations

import argparse
import dataclasses
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from sklearn.cluster import KMeans  # noqa: E402

from crewcut.cycle.planner import plan_cycle  # noqa: E402
from crewcut.demo.towngen import generate_town, town_depots, write_town  # noqa: E402
from crewcut.fleet.crews import resolve_crews  # noqa: E402
from crewcut.solve.calendar.cycle import make_cycle  # noqa: E402
from crewcut.solve.calendar.postings import Posting  # noqa: E402
from crewcut.solve.costs import required_passes  # noqa: E402
from crewcut.solve.profile import builtin_profile  # noqa: E402
from crewcut.solve.readers import read_network  # noqa: E402

WINDOWS = ((480, 600), (600, 720), (480, 720))


def posted_districts(net, profile, days, share: float, seed: int = 0):
    """Postings for about ``share`` of the streets needing service: whole districts, one day each."""
    need = np.flatnonzero(required_passes(net, profile).total > 0)
    mx = (net.node_x[net.seg_u[need]] + net.node_x[net.seg_v[need]]) / 2
    my = (net.node_y[net.seg_u[need]] + net.node_y[net.seg_v[need]]) / 2
    n_d = max(len(days) * 16, 16)  # districts of a sixteenth of a day's streets: a window can hold one
    lab = KMeans(n_clusters=n_d, n_init=2, random_state=seed).fit_predict(np.stack([mx, my], 1))
    rng = np.random.default_rng(seed)
    chosen = rng.permutation(n_d)[:max(1, int(round(share * n_d)))]
    post = [None] * net.n_segments
    for j, cl in enumerate(chosen.tolist()):
        day = days[j % len(days)]
        lo, hi = WINDOWS[j % len(WINDOWS)]
        for s in need[lab == cl].tolist():
            post[s] = Posting(day, lo, hi, f"{day} {lo // 60:02d}:00-{hi // 60:02d}:00")
    return tuple(post)


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--cases", default="20000:12:5,100000:40:10")
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--posted", type=float, default=0.15, help="share of streets posted (0: only the unposted run)")
    ap.add_argument("--seed", type=int, default=0)
    a = ap.parse_args()
    profile = dataclasses.replace(builtin_profile("curb-sweeping"), crews=())
    print(f"{'case':>16} {'posted':>7} {'wall s':>8} {'longest/LB':>10} {'day bal':>8} {'windows met':>14} "
          f"{'days over':>10}")
    with tempfile.TemporaryDirectory() as tmp:
        for case in a.cases.split(","):
            n, k, d = (int(x) for x in case.split(":"))
            path = Path(tmp) / f"town-{n}.geojson"
            write_town(path, n, seed=0)
            net0 = read_network(path, profile)
            depot = town_depots(generate_town(n, seed=0))[0][1]
            crews = resolve_crews(net0, profile, k=k, depot_lonlat=depot)
            days = ("mon", "tue", "wed", "thu", "fri") if d == 5 else tuple(
                f"{w}{i}" for i in (1, 2) for w in ("mon", "tue", "wed", "thu", "fri"))[:d]
            cyc = make_cycle(list(days), "06:00")
            for share in (0.0, a.posted) if a.posted > 0 else (0.0,):
                net = net0 if share == 0 else dataclasses.replace(
                    net0, seg_posting=posted_districts(net0, profile, days, share, a.seed))
                t0 = time.perf_counter()
                plan = plan_cycle(net, profile, crews, cyc, seed=a.seed, workers=a.workers)
                wall = time.perf_counter() - t0
                s = plan.summary
                posted_passes = sum(1 for c in plan.crews for r in c.routes for x in r.traversals
                                    if x.service and net.posting(x.segment) is not None
                                    and net.posting(x.segment).has_window)
                met = posted_passes - s.window_misses
                print(f"{case:>16} {share:>7.2f} {wall:>8.1f} {s.longest_min / s.lower_bound_min:>10.3f} "
                      f"{s.day_balance:>8.3f} {met:>6}/{posted_passes:<7} {len(s.over_limit):>5}/{s.crew_days:<4}",
                      flush=True)


if __name__ == "__main__":
    main()
