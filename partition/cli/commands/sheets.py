"""``crewcut sheets PLAN``: route sheets (ordered streets, turns, headings, distances, times) per crew."""
from __future__ import annotations



from crewcut.cli.commands.common import plan_inputs, print_text
from crewcut.cli.outputs import check_folder
from crewcut.files import atomic_write_many
from crewcut.plans.view import load
from crewcut.reports.sheets import SHEET_FORMATS, sheet_files

NAME = "sheets"
HELP = "write route sheets for crews: the ordered streets with turns, headings, distances and elapsed time"
FORMATS = SHEET_FORMATS


def add_arguments(p) -> None:
    p.add_argument("plan", metavar="PLAN", help="plan.json written by 'crewcut plan' or 'crewcut route'")
    p.add_argument("--crew", action="append", metavar="ID", default=[],
                   help="only this crew (repeat for several); default: every crew")
    p.add_argument("--format", choices=FORMATS, default="txt",
                   help="txt (default), md (Markdown) or html (one crew per printed page)")
    p.add_argument("--out", metavar="DIR",
                   help="write files into DIR (sheet-CREW.txt/.md per crew, or sheets.html); default: stdout")


def run(args, ui) -> int:
    pv = load(args.plan)
    crews = pv.select(args.crew)
    files = sheet_files(pv, crews, args.format)  # everything rendered before anything is written
    if not args.out:
        print_text("\n".join(text for _n, text in files))
        return 0
    out = check_folder(args.out, [name for name, _ in files], plan_inputs(args.plan, pv))
    for path in atomic_write_many([(out / name, text) for name, text in files]):
        ui.out.print(f"wrote {path}")
    return 0
