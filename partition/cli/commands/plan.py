"""``crewcut plan NETWORK``: territories, routes and balanced shifts for a fleet of crews."""
from __future__ import annotations

import argparse
import time
from pathlib import Path

from crewcut.cli.commands.common import (add_network_arguments, add_run_arguments, add_scope_arguments, out_folder,
                                         scope_area, stage_progress)

NAME = "plan"
HELP = "split a street network into balanced territories, one per crew, and route every crew"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_network_arguments(parser, "work profile with [[crews]] (TOML); default: the shipped curb-sweeping profile")
    parser.add_argument("--crews", metavar="K", type=int,
                        help="plan for K identical crews sharing the depot given by --depot")
    parser.add_argument("--depot", metavar="LON,LAT", help="the shared depot of --crews K")
    parser.add_argument("--crew", metavar="ID", action="append", default=None,
                        help="plan only for this crew of the config (repeat for several)")
    parser.add_argument("--days", metavar="LABELS",
                        help="plan a cycle: one route per crew and working day, e.g. mon,tue,wed,thu,fri "
                             "(default: the config's [cycle], else one shift per crew)")
    parser.add_argument("--shift-start", metavar="HH:MM",
                        help="clock time the shifts of a cycle start (default: the config's, else 06:00)")
    add_scope_arguments(parser)
    add_run_arguments(parser)
    parser.add_argument("--out", metavar="DIR", default="crewcut-out",
                        help="folder for plan.json (default ./crewcut-out)")


def run(args, ui) -> int:
    from crewcut.solve.profile import load_profile
    from crewcut.solve.readers import read_network

    from crewcut.cli.args import parse_lonlat
    from crewcut.fleet.crews import resolve_crews
    from crewcut.plans.planfile import write_plan
    from crewcut.fleet.planner import plan_fleet

    profile = load_profile(args.config)
    depot = parse_lonlat(args.depot) if args.depot else None
    out_dir = out_folder(args.out, inputs=[args.network, args.config, args.area, profile.service_area])
    area = scope_area(args)
    net = read_network(args.network, profile)
    crews = resolve_crews(net, profile, k=args.crews, depot_lonlat=depot, only=args.crew)
    cycle = _cycle(args, profile)
    t0 = time.perf_counter()
    with stage_progress(ui) as progress:
        if cycle is None:
            plan = plan_fleet(net, profile, crews, seed=args.seed, workers=args.workers,
                              time_limit_s=args.time_limit, progress=progress, source=str(args.network),
                              area=area, unservable=args.unservable)
        else:
            from crewcut.cycle.planner import plan_cycle

            plan = plan_cycle(net, profile, crews, cycle, seed=args.seed, workers=args.workers,
                              time_limit_s=args.time_limit, progress=progress, source=str(args.network),
                              area=area, unservable=args.unservable)
    seconds = time.perf_counter() - t0
    if cycle is None:
        path = write_plan(plan, out_dir / "plan.json")
    else:
        from crewcut.files import atomic_write_many
        from crewcut.plans.planfile import plan_to_json
        from crewcut.reports.signage import signage_csv

        written = atomic_write_many([(out_dir / "plan.json", plan_to_json(plan)),
                                     (out_dir / "signage.csv", signage_csv(plan))])
        path = written[0]
    _print(ui, plan, path, seconds, net.restrictions)
    return 0


def _cycle(args, profile):
    """The cycle from --days / --shift-start, else the config's [cycle], else None."""
    from crewcut.solve.calendar.cycle import make_cycle

    if args.days is None:
        if profile.cycle is None:
            if args.shift_start is not None:
                from crewcut.solve.errors import InputError

                raise InputError("`shift_start` is given but no cycle is planned", "add --days mon,tue,wed,thu,fri",
                                 param="shift_start")
            return None
        if args.shift_start is None:
            return profile.cycle
        return make_cycle(profile.cycle.days, args.shift_start, "--shift-start", as_parameters=True)
    start = args.shift_start
    if start is None and profile.cycle is not None:
        from crewcut.solve.calendar.postings import clock

        start = clock(profile.cycle.shift_start_min)
    return make_cycle(args.days, start, "--days", as_parameters=True)


def _print(ui, plan, path: Path, seconds: float, restrictions=()) -> None:
    # The workload table's caption already gives longest / mean, the bound, the gap
    # and the crews over their limit; add only what the table does not say.
    from crewcut.cli.tables import workload_table

    s = plan.summary
    ui.out.print(workload_table(plan))
    if s.crew_days is not None:
        from crewcut.cli.tables import week_table

        ui.out.print(week_table(plan))
        ui.out.print(f"{s.crew_days} day routes; the most uneven crew's longest day is {s.day_balance:.3f} x its "
                     f"mean day; {s.window_misses} pass(es) outside their posted window; signage table in "
                     f"{path.parent / 'signage.csv'}")
        if s.window_misses:
            from crewcut.cli.commands.common import styled

            ui.err.print(styled(f"warning: {s.window_misses} posted pass(es) are served outside their window; "
                                "verify will refuse this plan. Post fewer streets in those windows, widen them, "
                                "or add crews on those days", "yellow"))
    ui.out.print("the gap is an upper bound on how far this heuristic plan is from the best possible")
    b = s.balance
    if b:
        ui.out.print(f"balancing: longest {b.before_longest_min / 60:.2f} h -> {b.after_longest_min / 60:.2f} h, "
                     f"{b.moves_kept} moves and {b.swaps_kept} swaps kept of {b.trials} tried, "
                     f"stopped on {b.stop}")
    if s.over_limit:
        ui.out.print(f"an estimated {s.crews_needed_estimate} crews would fit their shift limits "
                     f"(total shift minutes over the limits; not a plan)")
    if plan.left_out:
        from crewcut.cli.tables import left_out_table

        ui.out.print(left_out_table(plan.left_out))
    if restrictions:  # the network file's turn restrictions: the routes make none of the turns applied ones forbid
        from crewcut.cli.tables import restriction_table

        ui.out.print(restriction_table(restrictions))
    ui.out.print(f"plan written to {path} ({seconds:.1f} s)")
