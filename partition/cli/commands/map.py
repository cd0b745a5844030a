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
    p.add_argument("--out", metavar="FILE.svg", help="write the SVG here ('-': stdout, the default)")


def run(args, ui) -> int:
    pv = load(args.plan)
    out = out_file(args.out, plan_inputs(args.plan, pv))
    svg = route_map(pv, pv.select([args.crew])[0]) if args.crew else territory_map(pv)
    if svg.note:  # characters of names or ids that XML cannot hold were replaced
        ui.err.print(styled(f"note: {svg.note}", "yellow"))
    return write_or_print(ui, out, svg.text)
