"""Benchmark: load a 100,000-segment street grid through the GeoJSON reader and repair.

Not collected by pytest. Run from the repository root:

    python tests/bench_readers.py [--n 100000] [--pbf PATH]

Prints wall time and peak memory (targets: under 30 s and under 2 GB). The grid
is synthetic: streets of about 100 m near the invented town's centre, each end
jittered by up to 0.3 m so that snapping has real work, and every 10th side street
drawn unsplit across a junction so that split-at-touch has real work too.
"""
from __future__ import annotations

import argparse
import json
import math
import resource
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from crewcut.solve.profile import builtin_profile  # noqa: E402
from crewcut.solve.readers import read_network  # noqa: E402


def grid_features(n_segments: int, seed: int = 0) -> dict:
    rng = np.random.default_rng(seed)
    side = int(math.ceil(math.sqrt(n_segments / 2))) + 1
    lon0, lat0 = -30.5, 45.2
    dlat = 100 / 111_132.0
    dlon = 100 / (111_320.0 * math.cos(math.radians(lat0)))
    jit = 0.3 / 111_132.0
    feats = []

    def add(coords, oneway="no"):
        c = np.asarray(coords) + rng.uniform(-jit, jit, (len(coords), 2)) * 0.7
        feats.append({"type": "Feature", "properties": {"id": f"s{len(feats)}", "oneway": oneway,
                                                        "class": "residential"},
                      "geometry": {"type": "LineString", "coordinates": c.round(8).tolist()}})

    for r in range(side):
        for c in range(side - 1):  # east-west streets
            a = (lon0 + c * dlon, lat0 + r * dlat)
            b = (lon0 + (c + 1) * dlon, lat0 + r * dlat)
            if r % 10 == 5 and c % 2 == 0 and c + 2 < side:  # drawn across the next junction
                add([a, b, (lon0 + (c + 2) * dlon, lat0 + r * dlat)])
            elif r % 10 == 5:
                continue
            else:
                add([a, ((a[0] + b[0]) / 2, a[1]), b], "yes" if r % 7 == 3 else "no")
            if len(feats) >= n_segments:
                break
        for c in range(side - 1):  # north-south streets
            if r == side - 1:
                break
            a = (lon0 + c * dlon, lat0 + r * dlat)
            b = (lon0 + c * dlon, lat0 + (r + 1) * dlat)
            add([a, b])
    return {"type": "FeatureCollection", "features": feats[:n_segments]}


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--n", type=int, default=100_000)
    ap.add_argument("--pbf", help="also time an OpenStreetMap file")
    args = ap.parse_args()
    prof = builtin_profile("curb-sweeping")
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "grid.geojson"
        path.write_text(json.dumps(grid_features(args.n)))
        t = time.perf_counter()
        net = read_network(path, prof)
        dt = time.perf_counter() - t
    peak_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"synthetic grid: {args.n:,} lines -> {net.n_segments:,} segments, {net.n_nodes:,} nodes, "
          f"{len(net.findings)} findings")
    print(f"  load + repair: {dt:.2f} s wall (target < 30 s); process peak memory {peak_mb:,.0f} MB (target < 2,048 MB)")
    if args.pbf:
        t = time.perf_counter()
        net = read_network(args.pbf, prof)
        print(f"{args.pbf}: {net.n_segments:,} segments in {time.perf_counter() - t:.2f} s")


if __name__ == "__main__":
    main()
