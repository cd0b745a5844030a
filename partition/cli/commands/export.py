"""``crewcut export PLAN --format geojson|gpx|csv``: the plan for GIS and navigation devices."""
from __future__ import annotations


from crewcut.reports.exports import FORMATS, export_document
from crewcut.cli.commands.common import out_file, plan_inputs, styled, write_or_print
from crewcut.plans.view import load

NAME = "export"
HELP = "export a plan as GeoJSON (territories, routes and the streets left out), GPX 1.1 (one track per crew, depots as waypoints) or CSV (per segment)"


def add_arguments(p) -> None:
    p.add_argument("plan", metavar="PLAN", help="plan.json written by 'crewcut plan' or 'crewcut route'")
    p.add_argument("--format", choices=FORMATS, required=True, help="geojson, gpx or csv")
    p.add_argument("--out", metavar="FILE", help="write here (all at once; '-': stdout, the default)")


def run(args, ui) -> int:
    pv = load(args.plan)
    out = out_file(args.out, plan_inputs(args.plan, pv))
    doc = export_document(pv, args.format)
    if doc.note:  # characters of names or ids that XML cannot hold were replaced
        ui.err.print(styled(f"note: {doc.note}", "yellow"))
    return write_or_print(ui, out, doc.text)
