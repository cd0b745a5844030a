"""Pieces several sub-commands share: the network arguments, the depot, the output folder, progress."""
from __future__ import annotations

import argparse
from contextlib import contextmanager
from pathlib import Path
from typing import TYPE_CHECKING, Iterable

from crewcut.solve.network.depot import check_depot_node, snap_depot
from crewcut.solve.network.model import Network
from crewcut.solve.profile import Crew, Profile

if TYPE_CHECKING:
    from rich.text import Text

NETWORK_HELP = "street network: .geojson/.json, .osm, .osm.pbf/.pbf, .graphml or .csv"
CONFIG_HELP = "work profile (TOML); default: the shipped curb-sweeping profile"


def styled(text, style: str = "") -> Text:
    """User text as a rich Text in ``style``: no markup read, control characters dropped.

    The consoles read no markup (:class:`crewcut.cli.main.SafeConsole`); this is how a
    command makes part of a line or a table cell bold or coloured.
    """
    from rich.text import Text

    from crewcut.reports.textsafety import terminal_text

    return Text(terminal_text(str(text)), style=style)


def line(*parts) -> Text:
    """One printed line from pieces: plain strings, or ``(text, style)`` pairs."""
    from rich.text import Text

    return Text.assemble(*(styled(*p) if isinstance(p, tuple) else styled(p) for p in parts))


def add_network_arguments(parser: argparse.ArgumentParser, config_help: str = CONFIG_HELP) -> None:
    """The NETWORK positional argument and --config, worded the same in every command."""
    parser.add_argument("network", metavar="NETWORK", help=NETWORK_HELP)
    parser.add_argument("--config", metavar="FILE", help=config_help)


def add_scope_arguments(parser: argparse.ArgumentParser) -> None:
    """--area and --unservable: which streets the run serves, worded the same in plan, route and check."""
    parser.add_argument("--area", metavar="FILE",
                        help="GeoJSON Polygon or MultiPolygon of the district to serve: a street needs service when "
                             "the middle of its length lies inside; the others may be driven, never served "
                             "(default: the config's network.service_area, else every street)")
    parser.add_argument("--unservable", choices=("leave_out", "refuse"), default=None,
                        help="streets that need service but lie on no closed route from a depot (one-way traps, "
                             "pieces cut off at the extract's border): leave_out lists them with their reasons "
                             "and plans the rest; refuse stops with them named (default: the config's "
                             "network.unservable, else leave_out)")


def scope_area(args):
    """The service area --area names, read and checked, or None."""
    if not getattr(args, "area", None):
        return None
    from crewcut.solve.readers.area import read_area

    return read_area(args.area)


def out_folder(path: str | Path, what: str = "plan.json", inputs: Iterable[str | Path | None] = ()) -> Path:
    """An output folder that may not exist yet but must not be a file, whose ``what`` replaces no input."""
    from crewcut.cli.outputs import check_folder

    return check_folder(path, [what], inputs)


def plan_inputs(plan_path: str | Path, pv) -> list[str | Path | None]:
    """A report's inputs: the plan file and the network file the plan records as its source."""
    return [plan_path, pv.plan.network.source or None]


def out_file(path: str | None, inputs: Iterable[str | Path | None]) -> str | None:
    """The one output file of a command, checked before it writes: None or '-' mean standard output."""
    from crewcut.cli.outputs import STDOUT, check_target

    if path is None or path == STDOUT:
        return None
    check_target(path, inputs)
    return path


def depot_from_args(args, net: Network, profile: Profile) -> tuple[int, str, Crew | None] | None:
    """The depot from --depot, else the first crew of --config; None when neither gives one.

    Returns the node, a description for the screen, and the crew it came from.
    """
    from crewcut.cli.args import parse_lonlat

    if getattr(args, "depot", None):
        lon, lat = parse_lonlat(args.depot)
        node = snap_depot(net, lon, lat, profile.depot_snap_max_m, who="--depot")
        return node, f"node {node} (from --depot {args.depot})", None
    if getattr(args, "config", None) and profile.crews:
        crew = profile.crews[0]
        who = f"{profile.source}: depot of crew '{crew.id}'"
        if crew.depot_lonlat is not None:
            node = snap_depot(net, *crew.depot_lonlat, profile.depot_snap_max_m, who=who)
        else:
            node = check_depot_node(net, crew.depot_node, who=who, usable=True)
        return node, f"node {node} (crew '{crew.id}' in {profile.source})", crew
    return None


@contextmanager
def stage_progress(ui):
    """A progress callback ``(description, done, total)`` drawing one bar per stage.

    The stage is the description's text before its first colon.
    """
    with ui.progress() as bar:
        tasks: dict[str, int] = {}

        def progress(desc: str, done: float, total: float) -> None:
            stage = desc.split(":")[0]
            if stage not in tasks:
                tasks[stage] = bar.add_task(desc, total=total)
            bar.update(tasks[stage], completed=done, total=total, description=desc)

        yield progress


def add_run_arguments(parser: argparse.ArgumentParser) -> None:
    """--seed, --workers and --time-limit, worded the same for plan and rebalance."""
    parser.add_argument("--seed", metavar="N", type=int, default=0,
                        help="seed for every random choice; same input and seed, same plan (default 0)")
    parser.add_argument("--workers", metavar="N", type=int, default=None,
                        help="processes routing territories in parallel (default: all cores)")
    parser.add_argument("--time-limit", metavar="SECONDS", type=float, default=None,
                        help="wall-clock time the balancer may take (default: no limit; it stops at its "
                             "tolerance or iteration limit, so the same input and seed give the same plan); "
                             "a plan cut short by a time limit may differ between machines")


def measure_table(title: str):
    """An empty rich table with the columns measure, value, unit."""
    from rich.table import Table

    t = Table(title=title, title_justify="left")
    t.add_column("measure")
    t.add_column("value", justify="right")
    t.add_column("unit")
    return t


def print_text(text: str = "") -> None:
    """Output text on standard output, flushed; a failure names standard output (a full device, say)."""
    import sys

    try:
        sys.stdout.write(text)
        sys.stdout.flush()
    except BrokenPipeError:
        raise
    except OSError as exc:
        if exc.filename is None:
            exc.filename = "standard output"
        raise


def write_or_print(ui, out: str | None, text: str) -> int:
    """Write ``text`` atomically to ``out`` (checked with :func:`out_file`) and say so, or to stdout."""
    from crewcut.files import atomic_write

    if out:
        atomic_write(out, text)
        ui.out.print(f"wrote {out}")
    else:
        print_text(text)
    return 0
