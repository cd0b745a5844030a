"""``crewcut table PLAN``: the per-crew workload table of a plan, for the terminal or for other programs."""
from __future__ import annotations


from crewcut.cli.tables import workload_table
from crewcut.plans.view import load
from crewcut.cli.commands.common import print_text
from crewcut.reports.workload import TEXT_FORMATS, workload_text

NAME = "table"
HELP = "print the per-crew workload table of a plan (terminal, CSV, Markdown or JSON)"
FORMATS = ("terminal",) + TEXT_FORMATS


def add_arguments(p) -> None:
    p.add_argument("plan", metavar="PLAN", help="plan.json written by 'crewcut plan' or 'crewcut route'")
    p.add_argument("--format", choices=FORMATS, default="terminal",
                   help="terminal (default): a table with colours; csv, md, json: plain text on stdout")


def run(args, ui) -> int:
    pv = load(args.plan)
    if args.format == "terminal":
        ui.out.print(workload_table(pv))
    else:
        print_text(workload_text(pv, args.format))
    return 0
