"""``crewcut route NETWORK``: one crew serves the whole network; write the plan and print the totals."""
from __future__ import annotations

import argparse
from pathlib import Path

import numpy as np
from rich.table import Table

from crewcut.solve.costs import required_passes
from crewcut.solve.errors import InputError
from crewcut.solve.profile import Crew, load_profile
from crewcut.solve.readers import read_network
from crewcut.solve.route import plan_route

from crewcut.plans.model import CrewPlan, RouteSummary, RunOptions
from crewcut.plans.planfile import build_plan, write_plan
from crewcut.cli.commands.common import (add_network_arguments, add_scope_arguments, depot_from_args, line,
                                         measure_table, out_folder, scope_area, styled)

NAME = "route"
HELP = "plan one crew's route over the whole network and write it as a plan file"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_network_arguments(parser)
    parser.add_argument("--depot", metavar="LON,LAT",
                        help="where the route starts and ends (default: the first crew's depot in --config); "
                             "write --depot=-30.5,45.2 when the longitude is negative")
    parser.add_argument("--out", metavar="DIR", default="crewcut-out",
                        help="folder for plan.json (default: ./crewcut-out)")
    parser.add_argument("--seed", metavar="N", type=int, default=0,
                        help="seed for every random choice (default 0); same input and seed, same plan")
    parser.add_argument("--plain", action="store_true",
                        help="plain Euler circuit instead of the turn-aware one (for comparison)")
    add_scope_arguments(parser)


def _depot(args, net, profile) -> tuple[int, str, str | None, float | None]:
    """Depot node, a description, and the crew id and shift limit it came from (if any)."""
    found = depot_from_args(args, net, profile)
    if found is None:
        raise InputError("no depot: the route needs a place to start and end",
                         "give --depot LON,LAT, or a --config file with a [[crews]] entry that has a depot")
    node, text, crew = found
    return node, text, (crew.id if crew else None), (crew.shift_limit_min if crew else None)


def run(args, ui) -> int:
    profile = load_profile(args.config)
    if args.depot:  # a malformed --depot is reported before any reading
        from crewcut.cli.args import parse_lonlat
        parse_lonlat(args.depot)
    out_dir = out_folder(args.out, inputs=[args.network, args.config, args.area, profile.service_area])
    area = scope_area(args)
    net = read_network(args.network, profile)
    depot, depot_text, crew_id, shift = _depot(args, net, profile)
    from crewcut.solve.network.scope import run_scope

    scope = run_scope(net, profile, [depot], area, args.unservable)
    net = scope.network
    if profile.capacities:  # trips: the settings checked before any work
        from crewcut.solve.trips.checks import check_trips

        check_trips(net, profile, [depot], [float(shift if shift is not None else profile.shift_limit_min)])
    with ui.progress() as bar:
        task = bar.add_task("planning the route", total=None)
        route = plan_route(net, profile, depot, turn_aware=not args.plain, seed=args.seed)
        if profile.capacities:
            from crewcut.solve.trips.route_trips import with_trips

            route = with_trips(net, profile, route)
        bar.update(task, completed=1, total=1)
    territory = np.flatnonzero(required_passes(net, profile).total > 0).tolist()
    crew = CrewPlan(Crew(crew_id or "crew-1", float(shift if shift is not None else profile.shift_limit_min),
                         None, depot), tuple(territory), (route,))
    st = route.stats
    summary = RouteSummary(crews=1, total_min=route.totals.total_min, lower_bound_min=route.lower_bound_min,
                           gap=route.gap, exact=route.exact, method=route.method, u_turns=route.totals.u_turns,
                           across_turns=route.totals.across_turns, plain_u_turns=st.get("plain_u_turns"),
                           plain_across_turns=st.get("plain_across_turns"))
    plan = build_plan(net, profile, [crew], source=str(args.network), summary=summary, left_out=scope.left_out,
                      options=RunOptions(command="route", depot_node=depot, seed=args.seed, turn_aware=not args.plain,
                                         unservable=scope.unservable, area=scope.area))
    path = write_plan(plan, out_dir / "plan.json")
    if scope.left_out:
        from crewcut.cli.tables import left_out_table

        ui.out.print(left_out_table(scope.left_out))
    if net.restrictions:
        from crewcut.cli.tables import restriction_table

        ui.out.print(restriction_table(net.restrictions))
    _print(ui, args.network, profile.name, depot_text, route, path)
    return 0


def _print(ui, source, profile_name: str, depot_text: str, route, path: Path) -> None:
    out = ui.out
    t = route.totals
    out.print(line((source, "bold"), f"  profile: {profile_name}  depot: {depot_text}"))
    n_service = sum(1 for x in route.traversals if x.service)
    n_dead = len(route.traversals) - n_service
    n_turns = sum(1 for x in route.traversals if x.turn != "start")
    tab = Table(title="Route totals", title_justify="left")
    for col in ("part", "traversals", "distance (km)", "time (min)"):
        tab.add_column(col, justify="left" if col == "part" else "right")
    tab.add_row("service", f"{n_service:,}", f"{t.service_km:,.2f}", f"{t.service_min:,.1f}")
    tab.add_row("deadhead", f"{n_dead:,}", f"{t.deadhead_km:,.2f}", f"{t.deadhead_min:,.1f}")
    tab.add_row("turns", f"{n_turns:,}", "", f"{t.turn_min:,.1f}")
    tab.add_section()
    tab.add_row(styled("total", "bold"), f"{len(route.traversals):,}", f"{t.service_km + t.deadhead_km:,.2f}",
                f"{t.total_min:,.1f}")
    out.print(tab)

    q = measure_table("Quality")
    q.add_row("method", route.method, "")
    q.add_row("deadhead proven least", "yes" if route.exact else "no (heuristic)", "")
    q.add_row("lower bound (service, deadhead, forced turns)", f"{route.lower_bound_min:,.1f}", "min")
    q.add_row("gap (total with turns over the bound)", f"{100 * route.gap:,.2f}", "%")
    st = route.stats
    if "detours" in st:  # the network holds forbidden turns
        q.add_row("detours round forbidden turns", f"{st['detours']:,} ({st['detour_min']:,.1f} min deadhead)", "")
        q.add_row("turns in the depot's yard that a restriction forbids on the street", f"{st['yard_turns']:,}", "")
    out.print(q)

    turns = Table(title="Turns", title_justify="left")
    turns.add_column("turn")
    aware = str(st.get("circuit", "")).startswith("turn-aware")
    if aware:
        turns.add_column("turn-aware (count)", justify="right")
    turns.add_column("plain circuit (count)", justify="right")
    rows = [("U-turns", t.u_turns, st.get("plain_u_turns", 0)),
            ("across traffic", t.across_turns, st.get("plain_across_turns", 0))]
    for label, mine, plain in rows:
        turns.add_row(label, *([f"{mine:,}"] if aware else []), f"{plain:,}")
    turns.add_section()
    turns.add_row(styled("turn time (min)", "bold"), *([f"{t.turn_min:,.1f}"] if aware else []),
                  f"{st.get('plain_turn_s', 0.0) / 60:,.1f}")
    out.print(turns)
    if aware and st.get("kept") == "plain":
        out.print("the turn-aware circuit cost more turn time than the plain one here; the plain one was kept")
    out.print(f"plan written to {path}")
