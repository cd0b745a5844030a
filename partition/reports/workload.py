"""The per-crew workload table: what each crew drives, serves and how long its shift is.

One row per crew plus a totals row, computed from the plan file alone (route
traversals and crew shift limits). ``workload_rows`` gives plain data (used by
``workload_text``); ``workload_text`` the table as CSV, Markdown or JSON text.
The terminal table is drawn by the command line from the same rows.

Definitions (minutes and metres from the traversals, summed over a crew's routes):
service km / h: traversals in ``service`` mode; driving h: deadhead minutes plus
turn delays (and, in a cycle plan, waits for posted windows), so that service h +
driving h (+ hours at facilities, in a plan with trips) = shift h; in a cycle plan the shift is the whole cycle's and its limit
the shift limit times the crew's day routes; deadhead %: deadhead
distance over all distance driven; % of limit: shift over the crew's shift limit.
The lower bound and gap come from the plan's ``summary`` (keys
``lower_bound_min`` and ``gap``) when the planner recorded them.

Crew ids and depot names come from the user's data: in CSV they pass through
:func:`crewcut.reports.textsafety.csv_cell` (OWASP, "CSV Injection"), in
Markdown through :func:`crewcut.reports.textsafety.markdown_text` (no raw HTML,
no markup, no line break).
"""
from __future__ import annotations

import csv
import io
import json

from crewcut.plans.model import CrewPlan, Plan
from crewcut.plans.view import PlanView, view
from crewcut.reports.leftout import left_out_line
from crewcut.reports.textsafety import csv_cell, markdown_text

# (key, header with unit, justify) in display order.
COLUMNS: tuple[tuple[str, str, str], ...] = (
    ("crew", "crew", "left"),
    ("depot", "depot", "left"),
    ("segments", "segments (count)", "right"),
    ("service_km", "service (km)", "right"),
    ("deadhead_km", "deadhead (km)", "right"),
    ("deadhead_pct", "deadhead (% of km)", "right"),
    ("service_h", "service (h)", "right"),
    ("driving_h", "driving (h)", "right"),
    ("u_turns", "U-turns (count)", "right"),
    ("across_turns", "across-traffic turns (count)", "right"),
    ("shift_h", "shift (h)", "right"),
    ("limit_pct", "shift limit used (%)", "right"),
)
# Trips (plans whose routes stop at facilities): inserted before the shift, only then
TRIP_COLUMNS: tuple[tuple[str, str, str], ...] = (
    ("trips", "trips (count)", "right"),
    ("visits", "facility visits (count)", "right"),
    ("facility_h", "at facilities (h)", "right"),
    ("unloaded", "used by service", "left"),
)
TEXT_FORMATS = ("csv", "md", "json")
DECIMALS = {"service_km": 2, "deadhead_km": 2, "deadhead_pct": 1, "service_h": 2, "driving_h": 2,
            "shift_h": 2, "limit_pct": 1, "facility_h": 2}


def has_trips(plan: Plan | PlanView) -> bool:
    """Does any route of the plan stop at a facility?"""
    return any(r.visits for c in view(plan).crews for r in c.routes)


def columns(plan: Plan | PlanView) -> tuple[tuple[str, str, str], ...]:
    """:data:`COLUMNS`, with :data:`TRIP_COLUMNS` before the shift when the plan has trips."""
    if not has_trips(plan):
        return COLUMNS
    i = [k for k, _h, _j in COLUMNS].index("shift_h")
    return COLUMNS[:i] + TRIP_COLUMNS + COLUMNS[i:]


def _amounts(pv: PlanView, crew: CrewPlan) -> str:
    """The amount of each capacity the crew's service uses in all (rate per km x pass length)."""
    caps = pv.plan.settings.profile.capacities
    total = [0.0] * len(caps)
    for r in crew.routes:
        for t in r.traversals:
            if t.service:
                seg = pv.segments[t.segment]
                for c, cap in enumerate(caps):
                    total[c] += cap.rate(seg.road_class) * seg.length_m / 1000.0
    return "; ".join(f"{c.name} {v:.1f} {c.unit}".strip() for c, v in zip(caps, total))


def trips_of(route) -> int:
    """Trips of a route: the stretches between facility visits that serve at least one pass."""
    cuts = sorted({v.after for v in route.visits})
    bounds = [0] + cuts + [len(route.traversals)]
    return sum(any(t.service for t in route.traversals[a:b]) for a, b in zip(bounds, bounds[1:]))


def _pct(a: float, b: float) -> float:
    return 0.0 if b <= 0 else 100.0 * a / b


def _crew_row(pv: PlanView, crew: CrewPlan, trips: bool = False) -> dict:
    s_m = d_m = s_min = d_min = turn_min = 0.0
    u = across = 0
    for route in crew.routes:
        for st in route.traversals:
            if st.service:
                s_m += st.metres
                s_min += st.minutes
            else:
                d_m += st.metres
                d_min += st.minutes
            turn_min += st.turn_minutes
            u += st.turn == "u_turn"
            across += st.turn == "across_traffic"
    wait_min = sum(r.totals.wait_min for r in crew.routes)
    visit_min = sum(r.totals.visit_min for r in crew.routes)
    shift = s_min + d_min + turn_min + wait_min + visit_min
    day_routes = [r for r in crew.routes if r.day is not None]
    # a cycle plan's crew works one shift per day route: its limit over the cycle, over the day the worst day
    limit = float(crew.shift_limit_min or 0.0) * max(1, len(day_routes))
    over = max((r.totals.total_min - crew.shift_limit_min for r in day_routes), default=shift - limit)
    return {
        "row": "crew",
        "crew": crew.id,
        "depot": pv.node_name(crew.depot_node),
        "segments": len(crew.territory),
        "service_km": s_m / 1000.0,
        "deadhead_km": d_m / 1000.0,
        "deadhead_pct": _pct(d_m, s_m + d_m),
        "service_h": s_min / 60.0,
        "driving_h": (d_min + turn_min + wait_min) / 60.0,
        "u_turns": u,
        "across_turns": across,
        **({"trips": sum(trips_of(r) for r in crew.routes), "visits": sum(len(r.visits) for r in crew.routes),
            "facility_h": visit_min / 60.0, "unloaded": _amounts(pv, crew)} if trips else {}),
        "shift_h": shift / 60.0,
        "shift_limit_h": limit / 60.0,
        "limit_pct": _pct(shift, limit),
        "over_limit_min": max(0.0, over) if limit > 0 else 0.0,
    }


def workload_rows(plan: Plan | PlanView) -> list[dict]:
    """One dict per crew (plan order) and a last row with ``"row": "total"``.

    Keys carry their unit (``_km``, ``_h``, ``_pct``, ``_min``); counts are ints.
    """
    pv = view(plan)
    trips = has_trips(pv)
    rows = [_crew_row(pv, c, trips) for c in pv.crews]
    tot = {"row": "total", "crew": "all crews", "depot": "", "unloaded": ""}
    for key in ("segments", "service_km", "deadhead_km", "service_h", "driving_h", "u_turns", "across_turns",
                "shift_h", "shift_limit_h", "over_limit_min") + (("trips", "visits", "facility_h") if trips else ()):
        tot[key] = sum(r[key] for r in rows)
    tot["deadhead_pct"] = _pct(tot["deadhead_km"], tot["service_km"] + tot["deadhead_km"])
    tot["limit_pct"] = _pct(tot["shift_h"], tot["shift_limit_h"])
    return rows + [{k: tot[k] for k in rows[0]} if rows else tot]


def workload_summary(plan: Plan | PlanView) -> dict:
    """Longest and mean shift, longest / mean, the recorded lower bound and gap, crews over their limit."""
    pv = view(plan)
    rows = workload_rows(pv)[:-1]
    shifts = [r["shift_h"] * 60.0 for r in rows]
    if getattr(pv.summary, "crew_days", None):  # a cycle plan: the bound and the limits are per day
        shifts = [r.totals.total_min for c in pv.crews for r in c.routes]
    longest = max(shifts, default=0.0)
    mean = sum(shifts) / len(shifts) if shifts else 0.0
    lb = getattr(pv.summary, "lower_bound_min", None)
    lb = float(lb) if isinstance(lb, (int, float)) and lb > 0 else None
    gap = getattr(pv.summary, "gap", None)
    if not isinstance(gap, (int, float)):
        gap = None if lb is None else longest / lb - 1.0
    return {
        "crews": len(rows),
        "longest_shift_min": longest,
        "mean_shift_min": mean,
        "longest_over_mean": longest / mean if mean > 0 else 0.0,
        "lower_bound_min": lb,
        "gap": None if gap is None else float(gap),
        "over_limit": [{"crew": r["crew"], "over_min": r["over_limit_min"]} for r in rows if r["over_limit_min"] > 0],
        "left_out_segments": len(pv.plan.left_out or ()),
        "left_out_km": sum(x.length_m for x in pv.plan.left_out or ()) / 1000.0,
    }


def fmt(key: str, value) -> str:
    """A cell as text, fixed decimals per column."""
    if isinstance(value, float):
        return f"{value:.{DECIMALS.get(key, 2)}f}"
    return str(value)


def summary_lines(plan: Plan | PlanView) -> list[str]:
    """The lines printed under the table (plain text, no markup)."""
    s = workload_summary(plan)
    if not s["crews"]:
        return ["no crews in this plan"]
    unit = "day" if getattr(view(plan).summary, "crew_days", None) else "shift"
    lines = [f"longest {unit} {s['longest_shift_min'] / 60:.2f} h, mean {s['mean_shift_min'] / 60:.2f} h, "
             f"longest / mean {s['longest_over_mean']:.3f}"]
    if s["lower_bound_min"] is None:
        lines.append(f"lower bound on the longest {unit}: not recorded in this plan")
    else:
        lines.append(f"lower bound on the longest {unit} {s['lower_bound_min'] / 60:.2f} h, "
                     f"gap {100 * s['gap']:.1f} %")
    for o in s["over_limit"]:
        lines.append(f"over the shift limit: {o['crew']} by {o['over_min']:.0f} min"
                     + (" on its longest day" if unit == "day" else ""))
    pv = view(plan)
    area = pv.plan.settings.options.area
    if area is not None:
        lines.append(f"service area: {area.source or 'recorded in the plan'} (streets outside are driven, never served)")
    left = left_out_line(pv.plan.left_out)
    if left:
        lines.append(left + "; listed in the plan file and the report")
    return lines


def workload_text(plan: Plan | PlanView, form: str) -> str:
    """The table as text in one of the plain formats :data:`TEXT_FORMATS` (csv, md, json)."""
    pv = view(plan)
    if form not in TEXT_FORMATS:
        raise ValueError(f"unknown table format {form!r}; one of {', '.join(TEXT_FORMATS)}")
    rows = workload_rows(pv)
    if form == "json":
        def rnd(d: dict) -> dict:
            return {k: (round(v, 4) if isinstance(v, float) else v) for k, v in d.items()}
        summ = workload_summary(pv)
        summ = {**rnd(summ), "over_limit": [rnd(o) for o in summ["over_limit"]]}
        rows = [rnd(r) for r in rows]
        doc = {"columns": {k: h for k, h, _ in columns(pv)}, "rows": rows, "summary": summ}
        return json.dumps(doc, ensure_ascii=False, indent=1, sort_keys=False) + "\n"
    cols = columns(pv)
    cells = [[fmt(k, r[k]) for k, _h, _j in cols] for r in rows]
    headers = [h for _k, h, _j in cols]
    text_cols = [i for i, (_k, _h, j) in enumerate(cols) if j == "left"]  # crew, depot: the user's text
    if form == "csv":
        buf = io.StringIO()
        w = csv.writer(buf, lineterminator="\n")
        w.writerow(headers)
        # csv_cell: OWASP "CSV Injection"; numbers (formatted by fmt) are left as they are
        w.writerows([csv_cell(x) if i in text_cols else x for i, x in enumerate(c)] for c in cells)
        return buf.getvalue()
    # Markdown: a pipe table, numbers right-aligned, then the summary lines
    esc = markdown_text
    out = ["| " + " | ".join(esc(h) for h in headers) + " |",
           "|" + "|".join(":---" if j == "left" else "---:" for _k, _h, j in cols) + "|"]
    for r, c in zip(rows, cells):
        c = [f"**{esc(x)}**" if r["row"] == "total" and x else esc(x) for x in c]
        out.append("| " + " | ".join(c) + " |")
    out.append("")
    out.extend(f"- {esc(line)}" for line in summary_lines(pv))
    return "\n".join(out) + "\n"
