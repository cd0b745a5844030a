"""An SVG map of a cycle plan coloured by day: which streets are swept on which day of the cycle.

Every served pass is drawn in its route's day colour (one colour per cycle day,
from the same palette as the territory map); streets no route serves are grey.
A legend gives each day's hours over all crews. Same plan, same bytes.
"""
from __future__ import annotations

from crewcut.plans.model import Plan
from crewcut.plans.view import PlanView, view
from crewcut.reports.svgmap import BACKGROUND, INK, PALETTE, WIDTH, LEGEND_W, frame_of, legend_row, path_of, svg_doc
from crewcut.reports.textsafety import SafeText, XmlEscaper


def day_map(pv: Plan | PlanView, standalone: bool = True) -> SafeText:
    """The day map (module docstring); a plan without a cycle has no days and draws every street grey."""
    pv = view(pv)
    esc = XmlEscaper()
    fr = frame_of(pv)
    cyc = pv.plan.settings.options.cycle
    days = list(cyc.days) if cyc is not None else []
    colour = {d: PALETTE[i % len(PALETTE)] for i, d in enumerate(days)}
    dash = {d: ("" if i < len(PALETTE) else "8 4") for i, d in enumerate(days)}
    day_of: dict[int, str] = {}
    hours = {d: 0.0 for d in days}
    for c in pv.crews:
        for r in c.routes:
            if r.day is None:
                continue
            hours[r.day] = hours.get(r.day, 0.0) + r.totals.total_min / 60.0
            for x in r.traversals:
                if x.service:
                    day_of.setdefault(x.segment, r.day)
    body = [f'<g fill="none" stroke="{BACKGROUND}" stroke-width="1.6" stroke-linecap="round">']
    body += [f'<path d="{path_of(fr, s)}"/>' for s in range(len(pv.segments)) if s not in day_of]
    body.append("</g>")
    for d in days:
        style = f' stroke-dasharray="{dash[d]}"' if dash[d] else ""
        body.append(f'<g fill="none" stroke="{colour[d]}" stroke-width="4.5" stroke-linecap="round"{style} '
                    f'data-day="{esc.attr(d)}">')
        body += [f'<path d="{path_of(fr, s)}"/>' for s in sorted(day_of) if day_of[s] == d]
        body.append("</g>")
    y = 44.0
    body.append(f'<text x="{WIDTH + 8}" y="{y - 8:.1f}" font-size="12" font-weight="bold" fill="{INK}">'
                f'day: all crews (h)</text>')
    for d in days:
        sw = f'<path d="M0,6.5 H26" stroke="{colour[d]}" stroke-width="6"{" stroke-dasharray=" + chr(34) + dash[d] + chr(34) if dash[d] else ""}/>'
        body.append(legend_row(y, sw, f"{d}: {hours.get(d, 0.0):.2f} h", esc))
        y += 20
    body.append(legend_row(y + 6, f'<path d="M0,6.5 H26" stroke="{BACKGROUND}" stroke-width="2"/>',
                           "not served", esc))
    height = max(fr.height, int(y) + 60)
    return svg_doc(WIDTH + LEGEND_W, height, body, f"Sweeping days - {len(days)} day cycle", standalone, esc)
