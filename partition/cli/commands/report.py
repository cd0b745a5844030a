"""``crewcut report PLAN --out report.html``: one self-contained offline HTML report of a plan."""
from __future__ import annotations

from crewcut.reports.htmlreport import report_html
from crewcut.cli.commands.common import out_file, plan_inputs, write_or_print
from crewcut.plans.view import load

NAME = "report"
HELP = "write one offline HTML file with the workload table, maps and every crew's route sheet"


def add_arguments(p) -> None:
    p.add_argument("plan", metavar="PLAN", help="plan.json written by 'crewcut plan' or 'crewcut route'")
    p.add_argument("--out", metavar="FILE.html", required=True, help="where to write the report ('-': stdout)")


def run(args, ui) -> int:
    pv = load(args.plan)
    out = out_file(args.out, plan_inputs(args.plan, pv))
    text = report_html(pv)
    write_or_print(ui, out, text)
    if out:
        ui.out.print("(open it in any browser; it needs no network)")
    return 0
