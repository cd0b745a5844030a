"""``crewcut map PLAN``: an SVG map of the crews' territories, or of one crew's route."""
from __future__ import annotations


from crewcut.cli.commands.common import out_file, plan_inputs, styled, write_or_print
from crewcut.plans.view import load
from crewcut.reports.svgmap import route_map, territory_map

NAME = "map"
HELP = "draw an SVG map: every crew's territory, or with --crew one crew's route with driving arrows"


def add_arguments(p) -> None:
    p.add_argument("plan", metavar="PLAN", help="plan.json written by 'crewcut plan' or 'crewcut route'")
    p.add_argument("--crew", metavar="ID", help="draw this crew's route instead of all territories")
    p.add_argument("--by-day", action="store_true",
                   help="a cycle plan's streets coloured by the day they are swept")
    p.add_argument("--out", metavar="FILE.svg", help="write the SVG here ('-': stdout, the default)")


def run(args, ui) -> int:
    pv = load(args.plan)
    out = out_file(args.out, plan_inputs(args.plan, pv))
    if args.by_day:
        from crewcut.solve.errors import InputError
        from crewcut.reports.daymap import day_map

        if pv.plan.settings.options.cycle is None:
            raise InputError(f"{args.plan} is not a cycle plan: it has no days to colour",
                             "plan with --days (or a [cycle] in the config), or leave out --by-day")
        if args.crew:
            raise InputError("--by-day and --crew cannot be combined", "give one of them")
        pv.need_geometry()
        svg = day_map(pv)
    else:
        svg = route_map(pv, pv.select([args.crew])[0]) if args.crew else territory_map(pv)
    if svg.note:  # characters of names or ids that XML cannot hold were replaced
        ui.err.print(styled(f"note: {svg.note}", "yellow"))
    return write_or_print(ui, out, svg.text)
