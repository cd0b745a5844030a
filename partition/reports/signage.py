"""The signage table of a cycle plan: street, curb side, day, window, crew.

One row per street feature (the source file's feature id), curb side, day and
crew. A posted street keeps its posted day and window (``basis`` "posted"); for
the others the plan proposes one: the day its route serves it, and the whole
hours around the time it is served (``basis`` "proposed"), so that a sign reads
"Tue 08:00-10:00" rather than a minute-exact time. Times come from the plan's
clock rule (:mod:`crewcut.solve.calendar.clock`).

Curb side: ``left`` / ``right`` as seen along the feature's drawn direction for a
street whose curbs are served apart, ``both`` otherwise. The rows are advice for
the people who post signs: they must follow local codes, traffic law and the
city's own posting rules.
"""
from __future__ import annotations

import csv
import io
import math

from crewcut.solve.calendar.clock import timing
from crewcut.solve.calendar.postings import clock

from crewcut.plans.model import Plan
from crewcut.reports.caution import CAUTION
from crewcut.reports.textsafety import csv_cell

COLUMNS = ("street", "feature", "side", "day", "window", "crew", "basis")
SIDES = {"right_curb": "right", "left_curb": "left"}
SIGN_CAUTION = ("advice for posting signs only; local codes, traffic law and the city's posting rules decide. "
                + CAUTION)


def _feature(source_id: str) -> str:
    """The source feature id of a segment (a curb split off a street keeps its street's id before ':')."""
    head, sep, tail = source_id.rpartition(":")
    return head if sep and tail in ("left", "right") else source_id


def signage_rows(plan: Plan) -> list[dict]:
    """Rows (dicts keyed by :data:`COLUMNS`) in cycle-day order, then crew, street, feature and side."""
    segs = plan.network.segments
    days = list(plan.settings.options.cycle.days) if plan.settings.options.cycle else []
    spans: dict[tuple, list] = {}
    for crew in plan.crews:
        for route in crew.routes:
            if route.day is None:
                continue
            tm = timing(route.traversals, route.start_min or 0.0)
            for i, x in enumerate(route.traversals):
                if not x.service:
                    continue
                rec = segs[x.segment]
                posted = rec.posted
                key = (route.day, crew.id, rec.name, _feature(rec.source_id), SIDES.get(rec.service, "both"))
                span = spans.setdefault(key, [math.inf, -math.inf, posted])
                span[0] = min(span[0], float(tm.drive_start[i]))
                span[1] = max(span[1], float(tm.drive_end[i]))
    rows = []
    for (day, crew, name, feature, side), (lo, hi, posted) in spans.items():
        if posted is not None and posted.window:
            window, basis = posted.window, "posted"
        else:
            window = f"{clock(60 * math.floor(lo / 60))}-{clock(60 * max(math.ceil(hi / 60), math.floor(lo / 60) + 1))}"
            basis = "posted" if posted is not None else "proposed"
        rows.append({"street": name, "feature": feature, "side": side, "day": day, "window": window,
                     "crew": crew, "basis": basis})
    order = {d: i for i, d in enumerate(days)}
    rows.sort(key=lambda r: (order.get(r["day"], len(order)), r["crew"], r["street"], r["feature"], r["side"]))
    return rows


def signage_csv(plan: Plan) -> str:
    """The signage table as CSV text (cells safe for spreadsheets), the caution as its last line."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(COLUMNS)
    for r in signage_rows(plan):
        w.writerow([csv_cell(r[c]) for c in COLUMNS])
    w.writerow([csv_cell(f"# {SIGN_CAUTION}")])
    return buf.getvalue()
