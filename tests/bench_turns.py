"""Benchmark: turn-aware against plain Euler circuits on the invented demo town.

Run from the repository root:

    /work/venv/bin/python tests/bench_turns.py [--segments 2000] [--big 45000]

Prints, side by side from one run on the same augmentation: U-turns, turns across
traffic and turn minutes of plain Hierholzer and of the turn-aware circuit; then
the circuit time on a town with about 100,000 traversals (target: a few seconds).
Not collected by pytest (the file name does not start with ``test_``).
"""
from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from rich.console import Console  # noqa: E402
from rich.table import Table  # noqa: E402

from crewcut.solve.circuits.euler import euler_circuit  # noqa: E402
from crewcut.solve.profile import builtin_profile  # noqa: E402
from crewcut.solve.readers import read_network  # noqa: E402
from crewcut.solve.route import augmented_traversals  # noqa: E402
from crewcut.solve.circuits.turns import TurnModel  # noqa: E402

EXAMPLE = Path(__file__).resolve().parent.parent / "examples" / "tallowmere.geojson"


def load_town(n_segments: int, tmp: Path, profile):
    if n_segments == 2000 and EXAMPLE.is_file():
        return read_network(EXAMPLE, profile), str(EXAMPLE.name)
    from crewcut.demo.towngen import write_town

    path = write_town(tmp / f"town-{n_segments}.geojson", n_segments, seed=0)
    return read_network(path, profile), f"generated town, {n_segments:,} segments, seed 0"


def centre_depot(net):
    return net.nearest_node(-30.5, 45.2)[0]  # the invented town's centre


def compare(net, profile, label: str, console: Console) -> float:
    depot = centre_depot(net)
    t0 = time.perf_counter()
    trav = augmented_traversals(net, profile, depot)
    t_aug = time.perf_counter() - t0
    model = TurnModel.from_network(net, profile)
    args = (trav.tail, trav.head, trav.seg, trav.forward, depot, model)
    t0 = time.perf_counter()
    plain = euler_circuit(*args, turn_aware=False)
    t_plain = time.perf_counter() - t0
    t0 = time.perf_counter()
    aware = euler_circuit(*args, turn_aware=True)
    t_aware = time.perf_counter() - t0
    tab = Table(title=f"{label}: {trav.tail.size:,} traversals ({trav.n_tasks:,} service), "
                      f"Eulerization {trav.aug.method} in {t_aug:.2f} s", title_justify="left")
    tab.add_column("circuit")
    for col in ("U-turns (count)", "across traffic (count)", "turn time (min)", "circuit time (s)"):
        tab.add_column(col, justify="right")
    for name, c, t in (("plain Hierholzer", plain, t_plain), ("turn-aware", aware, t_aware)):
        tab.add_row(name, f"{c.u_turns:,}", f"{c.across_turns:,}", f"{c.total_turn_s / 60:,.1f}", f"{t:.2f}")
    tab.add_section()
    ratio = lambda a, b: f"{a / b:.3f}" if b else "-"  # noqa: E731
    tab.add_row("turn-aware / plain", ratio(aware.u_turns, plain.u_turns),
                ratio(aware.across_turns, plain.across_turns), ratio(aware.total_turn_s, plain.total_turn_s), "")
    console.print(tab)
    s = aware.stats
    console.print(f"  sub-circuits after pairing: {s.get('sub_circuits', 0):,}; splices: {s.get('splices', 0):,}; "
                  f"pairing lower bound on cyclic turn time: {s.get('pairing_cycle_s', 0) / 60:,.1f} min; "
                  f"kept: {s['kept']}")
    return t_aware


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--segments", type=int, default=2000, help="demo town size (default 2000)")
    ap.add_argument("--big", type=int, default=45000, help="town size for the 100k-traversal timing")
    args = ap.parse_args()
    console = Console(width=130)
    profile = builtin_profile("curb-sweeping")
    with tempfile.TemporaryDirectory() as tmp:
        net, label = load_town(args.segments, Path(tmp), profile)
        compare(net, profile, label, console)
        big, label = load_town(args.big, Path(tmp), profile)
        t = compare(big, profile, label, console)
        console.print(f"turn-aware circuit on the big town: {t:.2f} s (target: a few seconds at 100,000 traversals)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
