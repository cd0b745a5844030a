"""The offline plan report: one self-contained HTML file with the workload table, maps and route sheets.

Everything is inline (CSS, SVG maps); nothing is fetched, so the file opens the
same on a laptop in the yard without a network. On paper the overview (table and
territory map) fills the first page and every crew starts on a page of its own
(its route map, then its route sheet).

Crew ids, street names and the title pass through
:func:`crewcut.reports.textsafety.html_text` (no control characters, escaped);
the inline maps escape their own text for XML.
"""
from __future__ import annotations

from crewcut.plans.model import Plan
from crewcut.plans.view import PlanView, view
from crewcut.reports.leftout import left_out_rows
from crewcut.reports.caution import CAUTION
from crewcut.reports.sheets import crew_sheets, html_document, to_html_section
from crewcut.reports.textsafety import html_text
from crewcut.reports.svgmap import crew_colours, route_svg, territory_svg
from crewcut.reports.workload import columns, fmt, summary_lines, workload_rows

REPORT_CSS = """
h1 { font-size: 1.6em; margin: 0 0 0.2em 0; }
.lede { color: #444; margin: 0 0 1em 0; }
table.load { border-collapse: collapse; font-size: 0.9em; margin: 0.5em 0; }
table.load th { background: #ecece4; font-weight: bold; vertical-align: bottom; }
table.load th, table.load td { border: 1px solid #c4c4bb; padding: 3px 7px; }
table.load td:first-child, table.load td:nth-child(2) { white-space: nowrap; }
table.load td.n { text-align: right; font-variant-numeric: tabular-nums; }
table.load tr.total td { font-weight: bold; border-top: 2px solid #1d1d1d; }
table.load tr.over td { color: #a01010; font-weight: bold; }
.chip { display: inline-block; width: 0.9em; height: 0.9em; vertical-align: -0.1em; margin-right: 0.35em;
        border: 1px solid #1d1d1d; }
ul.notes { margin: 0.3em 0 1em 1.2em; padding: 0; }
figure { margin: 0.8em 0; }
figure svg { max-width: 100%; height: auto; border: 1px solid #d8d8d0; }
.crewpage { break-before: page; page-break-before: always; }
.crewpage .sheet { break-before: auto; page-break-before: auto; }
nav.toc a { margin-right: 1em; }
p.caution { border-left: 4px solid #a01010; padding: 0.3em 0.6em; background: #faf5ee; }
.print-caution { display: none; }
@media print { nav.toc { display: none; } figure svg { border: none; }
  /* a fixed element is printed on every page: the caution reaches each printed page */
  .print-caution { display: block; position: fixed; bottom: 0; left: 0; right: 0; font-size: 8pt;
                   color: #444; background: #ffffff; }
  body { margin-bottom: 2.5em; } }
"""


def _load_table(pv: PlanView) -> str:
    e = html_text
    colours = crew_colours(pv)
    rows = workload_rows(pv)
    cols = columns(pv)
    head = "".join(f"<th>{e(h)}</th>" for _k, h, _j in cols)
    body = []
    for r in rows:
        cls = "total" if r["row"] == "total" else ("over" if r["over_limit_min"] > 0 else "")
        tds = []
        for k, _h, j in cols:
            text = e(fmt(k, r[k]))
            if k == "crew" and r["row"] == "crew":
                text = f'<span class="chip" style="background:{colours[r["crew"]]}"></span>{text}'
            if k == "limit_pct" and cls == "over":
                text += " (over)"
            tds.append(f'<td class="n">{text}</td>' if j == "right" else f"<td>{text}</td>")
        body.append(f'<tr class="{cls}">' + "".join(tds) + "</tr>")
    notes = "".join(f"<li>{e(x)}</li>" for x in summary_lines(pv))
    return (f'<table class="load"><thead><tr>{head}</tr></thead><tbody>{"".join(body)}</tbody></table>'
            f'<ul class="notes">{notes}</ul>')


def _left_out_table(pv: PlanView) -> str:
    e = html_text
    rows = left_out_rows(pv.plan.left_out)
    body = "".join(f"<tr><td>{e(r['source_id'])}</td><td>{e(r['name'])}</td><td class=\"n\">{r['segments']}</td>"
                   f"<td class=\"n\">{r['length_m']:.1f}</td><td>{e(r['why'])}</td></tr>" for r in rows)
    total = (f'<tr class="total"><td>total</td><td></td><td class="n">{sum(r["segments"] for r in rows)}</td>'
             f'<td class="n">{sum(r["length_m"] for r in rows):.1f}</td><td></td></tr>')
    return ("<h2>Left out: streets that need service and no crew serves</h2>"
            "<p>No closed route from a depot can serve these streets (or they are closed); check them on site "
            "and in the street data before the work starts.</p>"
            '<table class="load"><thead><tr><th>feature</th><th>name</th><th>segments (count)</th>'
            f"<th>length (m)</th><th>reason</th></tr></thead><tbody>{body}{total}</tbody></table>")


def report_html(pv: Plan | PlanView) -> str:
    """The whole report as one HTML document (a string; same plan, same bytes)."""
    pv = view(pv)
    e = html_text
    colours = crew_colours(pv)
    n_req = sum(1 for s in pv.segments if s.passes.total > 0)
    parts = [f"<h1>Street work plan &ndash; {e(pv.title)}</h1>",
             f'<p class="lede">{len(pv.crews)} crews, {n_req} segments to serve, '
             f'{pv.traffic}-hand traffic.</p>',
             f'<p class="caution"><strong>Caution.</strong> {e(CAUTION)}</p>',
             f'<div class="print-caution">{e(CAUTION)}</div>']
    if pv.crews:
        parts.append('<nav class="toc">' + "".join(f'<a href="#crew-{i}">{e(c.id)}</a>'
                                                 for i, c in enumerate(pv.crews)) + "</nav>")
    parts.append("<h2>Workload per crew</h2>")
    parts.append(_load_table(pv))
    if pv.plan.left_out:
        parts.append(_left_out_table(pv))
    if pv.has_geometry:
        parts.append(f"<figure>{territory_svg(pv, standalone=False)}</figure>")
    else:
        parts.append("<p>No map: the plan's network has no coordinates.</p>")
    sheets = crew_sheets(pv, pv.crews)
    for i, c in enumerate(pv.crews):
        parts.append(f'<div class="crewpage" id="crew-{i}">')
        fig = f"<figure>{route_svg(pv, c, standalone=False)}</figure>" if pv.has_geometry else ""
        for k, s in enumerate(x for x in sheets if x.crew == c.id):
            parts.append(to_html_section(s, colours[c.id], extra=fig if k == 0 else ""))
        parts.append("</div>")
    return html_document(f"Street work plan - {pv.title}", "\n".join(parts), REPORT_CSS)
