"""``crewcut table PLAN``: the per-crew workload table of a plan, for the terminal or for other programs."""
from __future__ import annotations

import csv
import io
import json
import sys

from crewcut.plans.view import load
from crewcut.reports.workload import COLUMNS, fmt, summary_lines, workload_rows, workload_summary, workload_table

NAME = "table"
HELP = "print the per-crew workload table of a plan (terminal, CSV, Markdown or JSON)"
FORMATS = ("terminal", "csv", "md", "json")


def add_arguments(p) -> None:
    p.add_argument("plan", metavar="PLAN", help="plan.json written by 'crewcut plan' or 'crewcut route'")
    p.add_argument("--format", choices=FORMATS, default="terminal",
                   help="terminal (default): a table with colours; csv, md, json: plain text on stdout")


def render(pv, form: str) -> str:
    """The table as text in one of the plain formats (csv, md, json)."""
    rows = workload_rows(pv)
    if form == "json":
        def rnd(d: dict) -> dict:
            return {k: (round(v, 4) if isinstance(v, float) else v) for k, v in d.items()}
        summ = workload_summary(pv)
        summ = {**rnd(summ), "over_limit": [rnd(o) for o in summ["over_limit"]]}
        rows = [rnd(r) for r in rows]
        doc = {"columns": {k: h for k, h, _ in COLUMNS}, "rows": rows, "summary": summ}
        return json.dumps(doc, ensure_ascii=False, indent=1, sort_keys=False) + "\n"
    cells = [[fmt(k, r[k]) for k, _h, _j in COLUMNS] for r in rows]
    headers = [h for _k, h, _j in COLUMNS]
    if form == "csv":
        buf = io.StringIO()
        w = csv.writer(buf, lineterminator="\n")
        w.writerow(headers)
        w.writerows(cells)
        return buf.getvalue()
    # Markdown: a pipe table, numbers right-aligned, then the summary lines
    def esc(t: str) -> str:
        return t.replace("|", "\\|")
    out = ["| " + " | ".join(esc(h) for h in headers) + " |",
           "|" + "|".join(":---" if j == "left" else "---:" for _k, _h, j in COLUMNS) + "|"]
    for r, c in zip(rows, cells):
        c = [f"**{esc(x)}**" if r["row"] == "total" and x else esc(x) for x in c]
        out.append("| " + " | ".join(c) + " |")
    out.append("")
    out.extend(f"- {line}" for line in summary_lines(pv))
    return "\n".join(out) + "\n"


def run(args, ui) -> int:
    pv = load(args.plan)
    if args.format == "terminal":
        ui.out.print(workload_table(pv))
    else:
        sys.stdout.write(render(pv, args.format))
    return 0
