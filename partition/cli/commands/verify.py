"""``crewcut verify PLAN NETWORK``: check a plan against its street network, independently of the planner."""
from __future__ import annotations

import argparse

NAME = "verify"
HELP = "check every invariant of a plan file against the street network (exit 2 at the first violation)"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("plan", metavar="PLAN", help="plan.json written by 'crewcut plan'")
    parser.add_argument("network", metavar="NETWORK", help="the street network the plan was made on")
    parser.add_argument("--config", metavar="FILE",
                        help="the work profile used for planning, when it read the network differently from "
                             "the settings recorded in the plan (e.g. its OpenStreetMap road classes)")


def run(args, ui) -> int:
    from crewcut.solve.errors import InputError
    from crewcut.solve.profile import load_profile
    from crewcut.solve.readers import read_network

    from crewcut.plans.planfile import read_plan
    from crewcut.plans.verify import check_plan, plan_overview, profile_of_plan

    plan = read_plan(args.plan)
    profile = profile_of_plan(plan, load_profile(args.config) if args.config else None)
    net = read_network(args.network, profile)
    found = check_plan(plan, net, profile, first_only=True)
    if found:
        raise InputError(f"{args.plan} is not a valid plan for {args.network}: {found[0]}",
                         "re-plan with 'crewcut plan', or give the network the plan was made on")
    o = plan_overview(plan)
    ui.out.print(f"valid: {o.crews} crews, {o.segments:,} segments in territories, {o.traversals:,} "
                 f"traversals; every required pass served exactly once; closed walks from the depots; "
                 f"longest shift {o.longest_min / 60:.2f} h")
    return 0
