"""Benchmark: trips (route first, split second) on the CARPTIF instances and on the demo town.

Run:  .venv/bin/python tests/bench_trips.py [--sets Lpr_IF,Act-IF,Cen-IF,gdb_IF] [--skip-town]
      [--workers 2]

Part 1, CARPTIF (Willemse and Joubert 2016, Data in Brief 8; files and format:
/work/shared/benchmarks/arc-routing/SOURCES.md section 4; read by tests/helpers/carptif.py).
One vehicle serves every required link from the depot (crewcut.solve.route.plan_route,
turn penalties zero), and its route is split into trips at the dump sites
(crewcut.solve.trips.tripsplit.split_route: exact over cut points for the circuit's
order). Printed per instance: total cost (service + deadhead + dumping, the file's units),
trips used and ceil(total demand / capacity) (no split can use fewer), the lower bound and
cost / bound. The bound: the route engine's proven postman bound for serving every required
link from the depot (crewcut.solve.postman.bounds.route_lower_bound, the augmentation
relaxation), plus ceil(D / Q) dumping costs (every trip ends at a dump site before the
depot; the drive to the dump is not counted, so the bound stays valid). The instances'
MAX_TRIP (a shift limit) and VEHICLES are not applied here (one vehicle, trips in
sequence), so the costs are not comparable with published CARPTIF solutions; best-known
values were not found in a stored source.

Part 2, the demo town (examples/tallowmere.geojson and its config, invented) with a hopper
of 4 m3 (0.35 m3 per curb-km, 0.5 on primary streets), two dump sites (invented figures):
wall time of plan_fleet without and with trips, trips per crew, and the deadhead and minutes
trips add to the very same routes (the plan without trips, each route split afterwards).
Not collected by pytest (the file name does not start with test_); not a timed test.
"""
from __future__ import annotations

import argparse
import dataclasses
import math
import sys
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
sys.path.insert(0, str(HERE.parent))

from helpers.carptif import read_instance, to_crewcut, total_demand  # noqa: E402

from crewcut.fleet.crews import resolve_crews  # noqa: E402
from crewcut.fleet.planner import plan_fleet  # noqa: E402
from crewcut.reports.caution import CAUTION  # noqa: E402
from crewcut.solve.profile import load_profile, profile_from_dict  # noqa: E402
from crewcut.solve.readers import read_network  # noqa: E402
from crewcut.solve.route import plan_route  # noqa: E402
from crewcut.solve.trips.place import place_facilities  # noqa: E402
from crewcut.solve.trips.tripsplit import split_route  # noqa: E402

CARPTIF = Path("/work/shared/benchmarks/arc-routing/carptif")
TOWN_TRIPS = {
    "capacity": {"hopper": {"limit": 4.0, "unit": "m3", "per_km": {"default": 0.35, "primary": 0.5},
                            "end_empty": True}},
    "facilities": [
        {"id": "west-tip", "kind": "dump_site", "location": [-30.52, 45.195], "hours": "05:00-20:00",
         "minutes": 15, "resets": ["hopper"]},
        {"id": "east-yard", "kind": "dump_site", "location": [-30.4896428, 45.1895858], "hours": "05:00-22:00",
         "minutes": 20, "resets": ["hopper"]},
    ],
}


def carptif(sets: list[str]) -> None:
    print("CARPTIF: one vehicle, trips in sequence; cost and bound in the file's units")
    print(f"{'instance':<18}{'links':>6}{'cost':>11}{'bound':>11}{'cost/bound':>11}{'trips':>6}{'ceil D/Q':>9}"
          f"{'split s':>8}{'total s':>8}")
    ratios = []
    for name in sets:
        for path in sorted((CARPTIF / name).iterdir()):
            inst = read_instance(path)
            net, prof, depot = to_crewcut(inst)
            t0 = time.perf_counter()
            route = plan_route(net, prof, depot)
            t1 = time.perf_counter()
            out = split_route(net, prof, route, place_facilities(net, prof), 0.0)
            t2 = time.perf_counter()
            need = math.ceil(total_demand(inst) / inst.header["CAPACITY"] - 1e-9)
            lb = out.stats["trip_lower_bound_min"]
            cost = out.totals.total_min
            ratios.append(cost / lb)
            print(f"{inst.name:<18}{len(inst.required):>6}{cost:>11.0f}{lb:>11.0f}{cost / lb:>11.3f}"
                  f"{out.stats['trips']:>6}{need:>9}{t2 - t1:>8.2f}{t2 - t0:>8.2f}", flush=True)
    if ratios:
        print(f"cost / bound: mean {np.mean(ratios):.3f}, worst {max(ratios):.3f} over {len(ratios)} instances")


def town(workers: int) -> None:
    root = HERE.parent / "examples"
    base = load_profile(root / "tallowmere.toml")
    extra = profile_from_dict(TOWN_TRIPS, "bench_trips")
    with_trips = dataclasses.replace(base, capacities=extra.capacities, facilities=extra.facilities)
    net = read_network(str(root / "tallowmere.geojson"), base)
    crews = resolve_crews(net, base)
    t0 = time.perf_counter()
    plain = plan_fleet(net, base, crews, seed=0, workers=workers)
    t1 = time.perf_counter()
    tripped = plan_fleet(net, with_trips, crews, seed=0, workers=workers)
    t2 = time.perf_counter()
    print(f"\ndemo town: {net.n_segments} segments, {len(crews)} crews")
    print(f"plan_fleet wall time: without trips {t1 - t0:.1f} s, with trips {t2 - t1:.1f} s "
          f"(ratio {(t2 - t1) / (t1 - t0):.2f})")
    placed = place_facilities(net, with_trips)
    add_km, add_min, trips = [], [], []
    for c in plain.crews:
        for r in c.routes:
            s = split_route(net, with_trips, r, placed, 360.0)
            add_km.append(s.totals.deadhead_km - r.totals.deadhead_km)
            add_min.append(s.totals.total_min - r.totals.total_min)
            trips.append(s.stats["trips"])
    print(f"same routes split afterwards: trips per crew {trips}; deadhead added by trips "
          f"{sum(add_km):.1f} km in all ({np.mean(add_km):.2f} km per crew), minutes added "
          f"{np.mean(add_min):.1f} per crew (stays included)")
    longest = [max(c.shift_min for c in p.crews) / 60 for p in (plain, tripped)]
    per_crew = [sum(len(r.visits) for r in c.routes) for c in tripped.crews]
    print(f"plans: longest shift without trips {longest[0]:.2f} h, with trips {longest[1]:.2f} h; "
          f"facility visits per crew in the trip plan {per_crew}")
    print(f"Caution: {CAUTION}")


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--sets", default="Lpr_IF,Act-IF,Cen-IF,gdb_IF")
    ap.add_argument("--skip-town", action="store_true")
    ap.add_argument("--workers", type=int, default=2)
    a = ap.parse_args()
    carptif([s for s in a.sets.split(",") if s])
    if not a.skip_town:
        town(a.workers)


if __name__ == "__main__":
    main()
