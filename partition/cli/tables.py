"""Tables for the terminal (rich): the command line draws the library's plain rows here."""
from __future__ import annotations

from rich.table import Table
from rich.text import Text

from crewcut.plans.model import Plan
from crewcut.plans.view import PlanView, view
from crewcut.reports.leftout import left_out_rows
from crewcut.reports.restrictions import restriction_rows, shown_relations
from crewcut.reports.textsafety import terminal_text
from crewcut.reports.workload import columns, fmt, summary_lines, workload_rows


def workload_table(plan: Plan | PlanView) -> Table:
    """The workload table as a rich Table (crews over their shift limit in bold red, marked '!')."""
    pv = view(plan)
    rows = workload_rows(pv)
    table = Table(title="Workload per crew", caption="\n".join(summary_lines(pv)), caption_justify="left",
                  show_footer=False, header_style="bold")
    cols = columns(pv)
    for _key, header, justify in cols:
        table.add_column(header, justify=justify)
    for r in rows:
        over = r["row"] == "crew" and r["over_limit_min"] > 0
        cells = [fmt(k, r[k]) for k, _h, _j in cols]
        if over:
            cells[-1] += " !"
        style = "bold red" if over else ("bold" if r["row"] == "total" else None)
        table.add_row(*[Text(terminal_text(c)) for c in cells], style=style, end_section=len(rows) > 1 and r is rows[-2])
    return table


def restriction_table(notes) -> Table:
    """The turn restrictions read: applied, and not applied per reason, with the relations named."""
    rows = restriction_rows(notes)
    table = Table(title=f"Turn restrictions: {sum(r['count'] for r in rows):,} read", title_justify="left",
                  header_style="bold")
    for col, justify in (("outcome", "left"), ("relations", "right"), ("turns banned", "right"),
                         ("why", "left"), ("which", "left")):
        table.add_column(col, justify=justify, overflow="fold")
    for r in rows:
        table.add_row(*[Text(terminal_text(x)) for x in (r["outcome"], f"{r['count']:,}", f"{r['bans']:,}",
                                                          r["why"], shown_relations(r))])
    return table


def left_out_table(items) -> Table:
    """The streets left unserved, one row per feature and reason, with a total."""
    rows = left_out_rows(items)
    table = Table(title="Left out: need service, no crew serves them", title_justify="left", header_style="bold")
    for col, justify in (("feature", "left"), ("name", "left"), ("segments", "right"), ("length (m)", "right"),
                         ("reason", "left")):
        table.add_column(col, justify=justify, overflow="fold")
    for r in rows:
        table.add_row(*[Text(terminal_text(x)) for x in (r["source_id"], r["name"], f"{r['segments']:,}",
                                                          f"{r['length_m']:,.1f}", r["why"])],
                      end_section=r is rows[-1])
    table.add_row(Text("total", style="bold"), "", f"{sum(r['segments'] for r in rows):,}",
                  f"{sum(r['length_m'] for r in rows):,.1f}", "")
    return table


def week_table(plan: Plan) -> Table:
    """The cycle table: hours per crew and day (days over the limit marked '!'), totals."""
    from crewcut.reports.week import week_rows

    days, rows = week_rows(plan)
    table = Table(title="The cycle: hours per crew and day", title_justify="left", header_style="bold",
                  caption="h = hours of the day's route, waiting for posted windows included; '-': no route that day",
                  caption_justify="left")
    table.add_column("crew")
    for d in days:
        table.add_column(f"{d} (h)", justify="right")
    for col in ("cycle (h)", "service (km)", "deadhead (km)", "waiting (h)"):
        table.add_column(col, justify="right")
    for r in rows:
        cells = [r["crew"]]
        for d in days:
            h = r["days"][d]
            mark = " !" if h is not None and r["limit_h"] is not None and h > r["limit_h"] + 1e-9 else ""
            cells.append("-" if h is None else f"{h:.2f}{mark}")
        cells += [f"{r['hours']:.2f}", f"{r['service_km']:.2f}", f"{r['deadhead_km']:.2f}", f"{r['wait_h']:.2f}"]
        table.add_row(*[Text(terminal_text(c)) for c in cells], style="bold" if r is rows[-1] else None,
                      end_section=r is rows[-2])
    return table
