"""``crewcut check NETWORK``: load, repair and validate a street network; say what is wrong."""
from __future__ import annotations

import argparse

from rich.table import Table

from crewcut.solve.network.diagnose import CheckReport, check_network
from crewcut.solve.profile import load_profile
from crewcut.solve.readers import read_network

from crewcut.cli.tables import left_out_table, restriction_table
from crewcut.cli.commands.common import (add_network_arguments, add_scope_arguments, depot_from_args, line,
                                         measure_table, scope_area, styled)

NAME = "check"
HELP = "load a street network, repair its topology and report what would stop planning"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_network_arguments(parser)
    parser.add_argument("--depot", metavar="LON,LAT",
                        help="check reachability from this depot (default: the first crew's depot in --config)")
    add_scope_arguments(parser)


def run(args, ui) -> int:
    from crewcut.cli.args import parse_lonlat

    profile = load_profile(args.config)
    if args.depot:  # a malformed --depot is reported before any reading
        parse_lonlat(args.depot)
    area = scope_area(args)
    net = read_network(args.network, profile)
    outside = 0
    if area is not None or profile.service_area is not None:
        from crewcut.solve.network.scope import run_scope

        scope = run_scope(net, profile, [], area, "leave_out")  # the area only: reach is judged below
        net, outside = scope.network, int(scope.outside_area.size)
    found = depot_from_args(args, net, profile)
    depot, depot_text = (found[0], found[1]) if found else (None, "none given: each connected piece judged on its own")
    report = check_network(net, profile, depot, args.unservable)
    _print(ui, args.network, profile.name, depot_text, report, outside)
    return 0 if report.plannable else 2


def _print(ui, path, profile_name: str, depot_text: str, r: CheckReport, outside: int) -> None:
    out = ui.out
    out.print(line((path, "bold"), f"  profile: {profile_name}"))
    t = Table(title="Streets by road class", title_justify="left")
    for col in ("road class", "segments", "length (km)", "one-way (km)", "required passes", "to serve (km)"):
        t.add_column(col, justify="left" if col == "road class" else "right")
    for row in r.by_class:
        t.add_row(row.road_class or "(none)", f"{row.segments:,}", f"{row.km:,.2f}", f"{row.oneway_km:,.2f}",
                  f"{row.passes:,}", f"{row.required_km:,.2f}")
    t.add_section()
    t.add_row(styled("total", "bold"), f"{r.segments:,}", f"{r.km:,.2f}", f"{r.oneway_km:,.2f}", f"{r.passes:,}",
              f"{r.required_km:,.2f}")
    out.print(t)
    s = measure_table("Network")
    for label, value, unit in (
            ("intersections and street ends", f"{r.nodes:,}", "nodes"),
            ("closed streets", f"{r.closed_segments:,}", "segments"),
            ("connected pieces", f"{r.components:,}", "pieces"),
            ("odd-degree nodes", f"{r.odd_nodes:,}", "nodes"),
            ("dead ends", f"{r.dead_ends:,}", "nodes"),
            ("depot", depot_text, ""),
            ("cannot be reached" + (" from the depot" if r.depot is not None else ""), f"{r.not_reachable:,}",
             "segments"),
            ("cannot return" + (" to the depot" if r.depot is not None else " (one-way traps)"),
             f"{r.cannot_return:,}", "segments"),
            ("outside the service area (driven, never served)", f"{outside:,}", "segments"),
            ("left out: need service, no closed route serves them", f"{len(r.trapped):,}", "segments"),
            ("left out: length", f"{sum(x.length_m for x in r.trapped) / 1000:,.2f}", "km")):
        s.add_row(label, value, unit)
    out.print(s)
    if r.findings:
        p = Table(title=f"Problems: {len(r.errors)} error(s), {len(r.warnings)} warning(s)", title_justify="left")
        for col in ("severity", "feature", "problem", "fix"):
            p.add_column(col, overflow="fold")
        for f in sorted(r.findings, key=lambda f: f.severity != "error"):  # stable: errors first, input order
            sev = styled("error", "bold red") if f.severity == "error" else styled("warning", "yellow")
            p.add_row(sev, f.feature, f.message, f.hint, end_section=False)
        out.print(p)
    if r.left_out:
        out.print(left_out_table(r.left_out))
    if r.restrictions:
        out.print(restriction_table(r.restrictions))
    n, km = len(r.trapped), sum(x.length_m for x in r.trapped) / 1000
    if r.plannable and n:
        verdict = (("plannable", "bold green"), f": {n:,} street segment(s) ({km:,.2f} km) that no closed route can "
                   "serve will be left out, each listed above with its reason")
    elif r.plannable:
        verdict = (("plannable", "bold green"),)
    elif r.plannable_once_left_out:
        verdict = (("not plannable", "bold red"), f" as it is (unservable = refuse); plannable once {n:,} street "
                   f"segment(s) ({km:,.2f} km) are left out (--unservable leave_out)")
    else:
        verdict = (("not plannable", "bold red"), ": fix the errors above")
    out.print(line("Result: ", *verdict))
