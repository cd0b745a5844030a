"""``crewcut verify PLAN NETWORK``: check a plan against its street network (and config), independently of the planner."""
from __future__ import annotations

import argparse

NAME = "verify"
HELP = ("check every invariant of a plan file against the street network and the config "
        "(exit 2 at the first violation)")


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("plan", metavar="PLAN", help="plan.json written by 'crewcut plan'")
    parser.add_argument("network", metavar="NETWORK", help="the street network the plan was made on")
    parser.add_argument("--config", metavar="FILE",
                        help="the work profile the plan must have been made with: its settings, crews' depots "
                             "and shift limits are the truth (without it, the plan's own recorded settings are "
                             "taken on trust)")
    parser.add_argument("--area", metavar="FILE",
                        help="the service area the plan must have been made for (default: the config's "
                             "network.service_area, else the area the plan records)")


def run(args, ui) -> int:
    from crewcut.solve.errors import InputError
    from crewcut.solve.profile import load_profile
    from crewcut.solve.readers import read_network

    from crewcut.plans.planfile import read_plan
    from crewcut.plans.verify import PROFILE_FROM_CONFIG, plan_overview, profile_of_plan, verify_plan

    plan = read_plan(args.plan)
    config = load_profile(args.config) if args.config else None
    net = read_network(args.network, config if config is not None else profile_of_plan(plan))
    from crewcut.cli.commands.common import scope_area

    verdict = verify_plan(plan, net, config, first_only=True, area=scope_area(args))
    if verdict.profile_from == PROFILE_FROM_CONFIG:
        against = f"checked against {args.config}"
    else:
        against = "checked against the plan's own recorded settings (give --config to check those too)"
    if verdict.violations:
        raise InputError(f"{args.plan} is not a valid plan for {args.network} ({against}): {verdict.violations[0]}",
                         "re-plan with 'crewcut plan', or give the network and config the plan was made with")
    o = plan_overview(plan)
    ui.out.print(f"valid: {o.crews} crews, {o.segments:,} segments in territories, {o.traversals:,} "
                 f"traversals; every required pass served exactly once; closed walks from the depots; "
                 f"longest shift {o.longest_min / 60:.2f} h; {against}")
    return 0
