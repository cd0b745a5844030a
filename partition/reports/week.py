"""A crew's cycle as a table: hours per working day, with the day's kilometres and posted passes.

One row per crew, one column per cycle day (hours, ``None`` for a day the crew
does not work or has nothing to do), then the cycle's totals: hours, service
and deadhead kilometres, minutes waited for posted windows, and the passes
served inside a posted window. A totals row sums the columns.
"""
from __future__ import annotations

from crewcut.plans.model import Plan


def week_rows(plan: Plan) -> tuple[list[str], list[dict]]:
    """The cycle's day labels and the rows (``crew``, ``days`` {label: h or None}, totals); last row: totals."""
    cyc = plan.settings.options.cycle
    days = list(cyc.days) if cyc is not None else sorted({r.day for c in plan.crews for r in c.routes if r.day})
    rows = []
    for crew in plan.crews:
        by_day = {r.day: r for r in crew.routes if r.day is not None}
        rows.append({
            "crew": crew.id,
            "days": {d: (by_day[d].totals.total_min / 60.0 if d in by_day else None) for d in days},
            "hours": sum(r.totals.total_min for r in by_day.values()) / 60.0,
            "service_km": sum(r.totals.service_km for r in by_day.values()),
            "deadhead_km": sum(r.totals.deadhead_km for r in by_day.values()),
            "wait_h": sum(r.totals.wait_min for r in by_day.values()) / 60.0,
            "limit_h": crew.shift_limit_min / 60.0,
        })
    total = {"crew": "total", "days": {d: sum(r["days"][d] or 0.0 for r in rows) for d in days}}
    for key in ("hours", "service_km", "deadhead_km", "wait_h"):
        total[key] = sum(r[key] for r in rows)
    total["limit_h"] = None
    rows.append(total)
    return days, rows
