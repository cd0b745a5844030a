"""Benchmark: generate an invented town of 100,000 segments and load it.

Not collected by pytest (the name starts with ``bench_``). Run from the
repository root:

    python tests/bench_load.py [--segments 100000] [--seed 0]

Prints, side by side from one run: wall time of generating the town, of writing
it, and of loading it with ``crewcut.solve.readers.read_network`` (reading, topology
repair, lengths), and the peak memory of the process. Targets: load under 30 s
and peak memory under 2 GB.

Peak memory is the process's maximum resident set size from
``resource.getrusage`` (kilobytes on Linux), which counts numpy buffers and
everything else. ``--trace`` loads a second time under tracemalloc and prints the
peak of Python allocations during the load alone (tracing slows it several
times, so the timed load runs untraced).
"""
from __future__ import annotations

import argparse
import resource
import sys
import tempfile
import time
import tracemalloc
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from crewcut.demo import towngen  # noqa: E402
from crewcut.solve.profile import builtin_profile  # noqa: E402


def _rss_mb() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0  # ru_maxrss is in KiB on Linux


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--segments", type=int, default=100_000)
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument("--trace", action="store_true", help="also load once under tracemalloc")
    args = ap.parse_args()

    t0 = time.perf_counter()
    town = towngen.generate_town(args.segments, args.seed)
    t_gen = time.perf_counter() - t0
    n_features = len(town["features"])
    rss_gen = _rss_mb()
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "town.geojson"
        t0 = time.perf_counter()
        path.write_text(towngen.dumps_town(town), encoding="utf-8")
        t_write = time.perf_counter() - t0
        size_mb = path.stat().st_size / 2**20
        del town
        try:
            from crewcut.solve.readers import read_network
        except ImportError:
            print("crewcut.solve.readers is not in this version: only generation was measured")
            read_network = None
        t_load = float("nan")
        peak_py = float("nan")
        n_seg = 0
        errors = 0
        if read_network is not None:
            profile = builtin_profile("curb-sweeping")
            t0 = time.perf_counter()
            net = read_network(path, profile)
            t_load = time.perf_counter() - t0
            n_seg = net.n_segments
            errors = sum(1 for f in net.findings if f.severity == "error")
            del net
    rss = _rss_mb()
    if args.trace and read_network is not None:
        with tempfile.TemporaryDirectory() as tmp:
            path = Path(tmp) / "town.geojson"
            towngen.write_town(path, args.segments, args.seed)
            tracemalloc.start()
            read_network(path, profile)
            peak_py = tracemalloc.get_traced_memory()[1] / 2**20
            tracemalloc.stop()

    print(f"town: {args.segments:,} segments requested, seed {args.seed}; {n_features:,} features, "
          f"{size_mb:.1f} MB of GeoJSON")
    print(f"{'step':<28}{'wall time (s)':>14}")
    print(f"{'generate':<28}{t_gen:>14.2f}")
    print(f"{'write GeoJSON':<28}{t_write:>14.2f}")
    print(f"{'load (read_network)':<28}{t_load:>14.2f}   target < 30 s: {'met' if t_load < 30 else 'NOT met'}")
    print(f"loaded: {n_seg:,} segments ({n_seg / max(n_features, 1):.4f} per feature), {errors} error findings")
    print(f"peak memory: {rss:,.0f} MB resident for the whole process, generation included "
          f"({rss_gen:,.0f} MB after generating);   target < 2048 MB: {'met' if rss < 2048 else 'NOT met'}")
    if args.trace:
        print(f"peak of Python allocations during a second, traced load: {peak_py:,.0f} MB")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
