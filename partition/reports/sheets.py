"""Route sheets: the ordered list of streets a crew drives, with turns, headings, distances and times.

A sheet is made for each route of a crew from the plan's traversals. Consecutive
traversals on the same named street in the same mode (serve or drive) become one
line, so that a driver reads "serve Mere Street east, 450 m" once, not once per
block. A U-turn always starts a new line (the driver must see it), and streets
without a name are never merged (two unnamed pieces need not be one street).

Turns come from the plan (the route engine's ``turn`` kinds) and are told as a
driver hears them: with / across traffic become right / left according to the
plan's traffic side. The heading is the 8-point compass direction from the
line's first point to its last (of its first traversal when the line closes on
itself), computed with the spherical initial-bearing formula.

Street names and crew ids come from the user's data and may hold anything: the
text sheet drops control characters and line breaks
(:func:`crewcut.reports.textsafety.terminal_text`), the Markdown sheet escapes
HTML, markup and line breaks (:func:`crewcut.reports.textsafety.markdown_text`)
and the HTML sheet drops what HTML text may not hold before escaping
(:func:`crewcut.reports.textsafety.html_text`). File names made from crew ids
(:func:`slug`, :func:`sheet_names`) hold only ASCII letters, digits, ``-`` and ``_``.
"""
from __future__ import annotations

import hashlib
import math
import re
from dataclasses import dataclass, field

from crewcut.solve.calendar.postings import clock

from crewcut.plans.model import CrewPlan, Plan, route_id
from crewcut.plans.view import PlanView, view
from crewcut.reports.caution import CAUTION
from crewcut.reports.textsafety import html_text, markdown_text, terminal_text
from crewcut.solve.result import Route

UNNAMED = "unnamed street"
SHEET_FORMATS = ("txt", "md", "html")
COMPASS = ("N", "NE", "E", "SE", "S", "SW", "W", "NW")


@dataclass
class SheetLine:
    """One line of a route sheet: several traversals merged, or the depot start / end."""

    kind: str  # "start" | "step" | "end"
    street: str = ""  # display name ("unnamed street" when the data has none)
    mode: str = ""  # "serve" | "drive"
    heading: str = ""  # N, NE, ... or "" without coordinates
    turn: str = ""  # "leave depot", "left", "right", "straight on", "U-turn", "turn" (unknown)
    metres: float = 0.0
    minutes: float = 0.0  # driving/service minutes plus turn delays of the merged traversals
    elapsed_min: float = 0.0  # cumulative, at the end of this line
    traversals: list[int] = field(default_factory=list)  # indices into the route's traversals


@dataclass
class Sheet:
    crew: str
    route: str
    depot: str
    depot_lonlat: tuple[float, float] | None
    lines: list[SheetLine]
    total_min: float  # the route's recorded total
    service_km: float
    deadhead_km: float
    day: str | None = None  # cycle plans: the route's day, its clock start and its waits
    start_min: float | None = None
    wait_min: float = 0.0


def initial_bearing(p: list[float], q: list[float]) -> float:
    """Initial compass bearing p -> q in degrees [0, 360) on a sphere (the standard great-circle formula)."""
    lon1, lat1, lon2, lat2 = map(math.radians, (p[0], p[1], q[0], q[1]))
    dlon = lon2 - lon1
    x = math.sin(dlon) * math.cos(lat2)
    y = math.cos(lat1) * math.sin(lat2) - math.sin(lat1) * math.cos(lat2) * math.cos(dlon)
    return math.degrees(math.atan2(x, y)) % 360.0


def compass(bearing: float) -> str:
    """8-point compass name of a bearing in degrees (sectors of 45 degrees centred on N, NE, ...)."""
    return COMPASS[int(((bearing % 360.0) + 22.5) // 45.0) % 8]


def turn_words(kind: str, traffic: str) -> str:
    """A turn kind of the plan as a driver hears it."""
    if kind == "with_traffic":
        return "right" if traffic == "right" else "left"
    if kind == "across_traffic":
        return "left" if traffic == "right" else "right"
    return {"start": "leave depot", "straight": "straight on", "u_turn": "U-turn"}.get(kind, "turn")


def _heading(pv: PlanView, route: Route, idx: list[int]) -> str:
    if not pv.has_geometry:
        return ""
    steps = route.traversals
    first = pv.seg_coords(steps[idx[0]].segment, steps[idx[0]].from_node)
    last = pv.seg_coords(steps[idx[-1]].segment, steps[idx[-1]].from_node)
    a, b = first[0], last[-1]
    if a == b:
        b = first[-1]
    return compass(initial_bearing(a, b))


def route_sheet(pv: Plan | PlanView, crew: CrewPlan, route: Route, name: str | None = None) -> Sheet:
    """The sheet of one route of one crew (see the module notes for the merging rule).

    ``name``: the route's id on the sheet (default: its id in the plan file, by position).
    """
    pv = view(pv)
    steps = list(route.traversals)
    rname = name if name is not None else route_id(next((i for i, r in enumerate(crew.routes) if r is route), 0))
    lines: list[SheetLine] = []
    depot = crew.depot_node
    depot_name = pv.node_name(depot)
    lines.append(SheetLine("start", street=f"start at the depot, {depot_name}"))
    elapsed = 0.0
    cur: SheetLine | None = None
    caps = pv.plan.settings.profile.capacities
    load = [0.0] * len(caps)
    visits = {}
    for v in route.visits:
        visits.setdefault(v.after, []).append(v)
    for i, st in enumerate(steps + [None]):
        for v in visits.get(i, ()):
            elapsed += v.wait_min + v.minutes
            lines.append(SheetLine("visit", street=_visit_text(v, caps, load), elapsed_min=elapsed))
            load = [0.0 if c.name in v.resets else x for c, x in zip(caps, load)]
            cur = None
        if st is None:
            break
        if st.service:
            seg = pv.segments[st.segment]
            load = [x + c.rate(seg.road_class) * seg.length_m / 1000.0 for c, x in zip(caps, load)]
        name = pv.segments[st.segment].name or ""
        mode = "serve" if st.service else "drive"
        if st.wait_minutes:  # a posted window not yet open: the wait gets a line of its own
            elapsed += st.wait_minutes
            lines.append(SheetLine("wait", street=f"wait {hmm(st.wait_minutes)} h:mm for the posted window",
                                   elapsed_min=elapsed))
            cur = None
        if cur is not None and name and cur.street == name and cur.mode == mode and st.turn != "u_turn":
            cur.traversals.append(i)
        else:
            cur = SheetLine("step", street=name or UNNAMED, mode=mode, turn=turn_words(st.turn, pv.traffic),
                            traversals=[i])
            lines.append(cur)
        cur.metres += st.metres
        cur.minutes += st.minutes + st.turn_minutes
        elapsed += st.minutes + st.turn_minutes
        cur.elapsed_min = elapsed
    for ln in lines[1:]:
        if ln.kind == "step":
            ln.heading = _heading(pv, route, ln.traversals)
    end_ok = not steps or steps[-1].to_node == depot
    lines.append(SheetLine("end", street=("back at the depot, " if end_ok else "route ends away from the depot, ")
                           + (depot_name if end_ok else pv.node_name(steps[-1].to_node)), elapsed_min=elapsed))
    return Sheet(crew=crew.id, route=rname, depot=depot_name,
                 depot_lonlat=pv.node_lonlat(depot), lines=lines,
                 total_min=float(route.totals.total_min),
                 service_km=sum(s.metres for s in steps if s.service) / 1000.0,
                 deadhead_km=sum(s.metres for s in steps if not s.service) / 1000.0,
                 day=route.day, start_min=route.start_min, wait_min=float(route.totals.wait_min))


def _visit_text(v, caps, load) -> str:
    held = ", ".join(f"{c.name} {x:.2f} {c.unit}".rstrip() for c, x in zip(caps, load))
    wait = f", wait {hmm(v.wait_min)} h:mm for it to open" if v.wait_min > 0.5 else ""
    return (f"stop at facility {v.facility}: arrive {clock(v.arrive_min)}{wait}, stay {v.minutes:g} min, "
            f"reset {', '.join(v.resets)}; load on arrival {held}")


def crew_sheets(pv: Plan | PlanView, crews: list[CrewPlan] | tuple[CrewPlan, ...]) -> list[Sheet]:
    """The sheets of every route of ``crews``, crew by crew."""
    pv = view(pv)
    return [route_sheet(pv, c, r, r.day or route_id(i)) for c in crews for i, r in enumerate(c.routes)]


# ------------------------------------------------------------------ rendering
def hmm(minutes: float) -> str:
    """Minutes as h:mm (rounded to the minute)."""
    m = int(round(minutes))
    return f"{m // 60}:{m % 60:02d}"


def distance(metres: float) -> str:
    return f"{metres:.0f}"


HEAD = ("#", "turn", "street", "work", "heading", "distance (m)", "elapsed (h:mm)")
CLOCK_HEAD = HEAD[:-1] + ("clock (hh:mm)",)


def _head(sheet: Sheet) -> tuple[str, ...]:
    return CLOCK_HEAD if sheet.start_min is not None else HEAD


def _cells(sheet: Sheet) -> list[list[str]]:
    out = []
    n = 0
    when = (lambda m: clock(sheet.start_min + m)) if sheet.start_min is not None else hmm
    for ln in sheet.lines:
        if ln.kind == "step":
            n += 1
            out.append([str(n), ln.turn, ln.street, ln.mode, ln.heading or "-", distance(ln.metres),
                        when(ln.elapsed_min)])
        else:
            out.append(["", "", ln.street, "", "", "", when(ln.elapsed_min)])
    return out


def _intro(sheet: Sheet) -> list[str]:
    where = "" if sheet.depot_lonlat is None else f" at lon {sheet.depot_lonlat[0]:.6f}, lat {sheet.depot_lonlat[1]:.6f}"
    n = sum(ln.kind == "step" for ln in sheet.lines)
    out = [f"Depot: {sheet.depot}{where}"]
    if sheet.start_min is not None:
        out.append(f"Day: {sheet.day}; the shift starts at {clock(sheet.start_min)} and ends about "
                   f"{clock(sheet.start_min + sheet.total_min)}; waiting for posted windows {hmm(sheet.wait_min)} h:mm")
    out += [f"Shift: {hmm(sheet.total_min)} h:mm ({sheet.total_min:.1f} min); serve {sheet.service_km:.2f} km, "
            f"drive without serving {sheet.deadhead_km:.2f} km; {n} lines",
            f"Caution: {CAUTION}"]
    if any(ln.kind == "visit" for ln in sheet.lines):
        out.append("Facility stops: loads are estimates from the profile's rates per km, not weighed; the site's own "
                   "hours, access and weight rules, and the vehicle's legal load limits, come first.")
    return out


def plain_text(text: str) -> str:
    """``text`` for one line of a plain-text sheet: no control characters, line breaks or tabs."""
    return terminal_text(" ".join(str(text).splitlines())).replace("\t", " ")


def to_text(sheet: Sheet) -> str:
    cells = [list(_head(sheet))] + [[plain_text(c) for c in r] for r in _cells(sheet)]
    widths = [max(len(r[i]) for r in cells) for i in range(len(HEAD))]
    right = {0, 5, 6}
    title = f"Route sheet - {plain_text(sheet.crew)}, {plain_text(sheet.route)}"
    out = [title, "=" * len(title)] + [plain_text(x) for x in _intro(sheet)] + [""]
    for k, r in enumerate(cells):
        out.append("  ".join(c.rjust(widths[i]) if i in right else c.ljust(widths[i]) for i, c in enumerate(r)).rstrip())
        if k == 0:
            out.append("  ".join("-" * w for w in widths))
    return "\n".join(out) + "\n"


def to_markdown(sheet: Sheet) -> str:
    esc = markdown_text
    out = [f"## Route sheet - {esc(sheet.crew)}, {esc(sheet.route)}", ""] + [f"- {esc(x)}" for x in _intro(sheet)] + [""]
    out.append("| " + " | ".join(_head(sheet)) + " |")
    out.append("|" + "|".join("---:" if i in (0, 5, 6) else ":---" for i in range(len(HEAD))) + "|")
    out += ["| " + " | ".join(esc(c) for c in r) + " |" for r in _cells(sheet)]
    return "\n".join(out) + "\n"


SHEET_CSS = """
.sheet { margin: 0 0 2.5em 0; }
.sheet + .sheet, .crewpage + .crewpage { break-before: page; page-break-before: always; }
.sheet h2 { font-size: 1.25em; margin: 0.2em 0; border-bottom: 3px solid var(--crew, #444); }
.sheet .intro { margin: 0.3em 0 0.6em 0; color: #333; }
table.steps { border-collapse: collapse; width: 100%; font-size: 0.92em; }
table.steps th, table.steps td { padding: 2px 6px; border-bottom: 1px solid #d6d6d6; text-align: left; }
table.steps td.n, table.steps th.n { text-align: right; font-variant-numeric: tabular-nums; }
table.steps tr.drive td { color: #5d5d5d; font-style: italic; }
table.steps tr.depot td { font-weight: bold; background: #f1f1ec; }
table.steps tr.uturn td.turn { font-weight: bold; }
table.steps thead { display: table-header-group; }
table.steps tr { break-inside: avoid; page-break-inside: avoid; }
"""


def to_html_section(sheet: Sheet, colour: str | None = None, extra: str = "") -> str:
    """One sheet as an HTML <section> (no document around it)."""
    e = html_text
    style = f' style="--crew: {colour}"' if colour else ""
    out = [f'<section class="sheet"{style} id="sheet-{e(slug(sheet.crew))}-{e(slug(sheet.route))}">',
           f"<h2>Route sheet &ndash; {e(sheet.crew)}, {e(sheet.route)}</h2>",
           '<p class="intro">' + "<br>".join(e(x) for x in _intro(sheet)) + "</p>", extra,
           '<table class="steps"><thead><tr>'
           + "".join(f'<th class="n">{e(h)}</th>' if i in (0, 5, 6) else f"<th>{e(h)}</th>" for i, h in enumerate(_head(sheet)))
           + "</tr></thead><tbody>"]
    for ln, r in zip(sheet.lines, _cells(sheet)):
        cls = "depot" if ln.kind != "step" else ln.mode + (" uturn" if ln.turn == "U-turn" else "")
        tds = "".join(f'<td class="n">{e(c)}</td>' if i in (0, 5, 6) else
                      (f'<td class="turn">{e(c)}</td>' if i == 1 else f"<td>{e(c)}</td>") for i, c in enumerate(r))
        out.append(f'<tr class="{cls}">{tds}</tr>')
    out.append("</tbody></table></section>")
    return "\n".join(x for x in out if x)


def html_document(title: str, body: str, css: str = "") -> str:
    """A self-contained HTML document (inline CSS, nothing fetched)."""
    return ("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
            f"<title>{html_text(title)}</title>\n<style>\n{BASE_CSS}{SHEET_CSS}{css}</style>\n</head>\n"
            f"<body>\n{body}\n</body>\n</html>\n")


BASE_CSS = """
@page { size: A4; margin: 14mm; }
body { font-family: "DejaVu Sans", "Liberation Sans", Arial, sans-serif; color: #1d1d1d; margin: 1.5em;
       -webkit-print-color-adjust: exact; print-color-adjust: exact; }
@media print { body { margin: 0; } }
"""


SLUG_MAX = 40  # characters of a slug, its hash included


def id_hash(text: str, n: int = 8) -> str:
    """The first ``n`` hex digits of the SHA-256 of ``text`` (UTF-8): a short, stable tag of a full id."""
    return hashlib.sha256(str(text).encode("utf-8", "surrogatepass")).hexdigest()[:n]


def slug(text: str, n: int = 8) -> str:
    """A file-name-safe form of a crew or route id: ASCII letters, digits, ``-`` and ``_``, at most 40 characters.

    An id that is already such a name (and not longer) is kept as it is; any
    other id is cut down to those characters and tagged with :func:`id_hash` of
    the full id (``n`` hex digits), so that two ids never share a slug by being
    shortened or cleaned alike.
    """
    text = str(text)
    if _SAFE_NAME.fullmatch(text) and len(text) <= SLUG_MAX:
        return text
    return _tagged(text, n)


_SAFE_NAME = re.compile(r"[A-Za-z0-9][A-Za-z0-9_-]*")


def _tagged(text: str, n: int) -> str:
    """The id cut down to safe characters (at most ``SLUG_MAX - n - 1``) and its hash."""
    s = re.sub(r"[^A-Za-z0-9_-]+", "_", text).strip("_-")[:SLUG_MAX - n - 1].rstrip("_-")
    return (s or "crew") + "-" + id_hash(text, n)


def sheet_names(ids: list[str]) -> dict[str, str]:
    """A slug per distinct id, unique even on a file system that ignores case.

    Ids whose slugs would coincide (ignoring case) are all tagged with a hash of
    the full id, longer until they are told apart (at most 32 hex digits, so the
    name stays within :data:`SLUG_MAX`).
    """
    ids = list(dict.fromkeys(ids))
    out = {i: slug(i) for i in ids}
    n = 8
    while n <= 32:
        groups: dict[str, list[str]] = {}
        for i in ids:
            groups.setdefault(out[i].lower(), []).append(i)
        clash = [i for g in groups.values() if len(g) > 1 for i in g]
        if not clash:
            return out
        for i in clash:
            out[i] = _tagged(i, n)
        n *= 2
    return out


def sheet_files(pv: Plan | PlanView, crews: list[CrewPlan] | tuple[CrewPlan, ...], form: str) -> list[tuple[str, str]]:
    """The sheets of ``crews`` as (file name, text) pairs in a :data:`SHEET_FORMATS` form.

    txt and md give one file per crew (``sheet-<crew>.<form>``, the crew id made
    safe for a file name by :func:`sheet_names`: unique, short, ASCII); html
    gives one document, ``sheets.html``, with a printed page per crew.
    """
    if form not in SHEET_FORMATS:
        raise ValueError(f"unknown sheet format {form!r}; one of {', '.join(SHEET_FORMATS)}")
    pv = view(pv)
    sheets = crew_sheets(pv, crews)
    if form == "html":
        from crewcut.reports.svgmap import crew_colours
        colours = crew_colours(pv)
        body = "\n".join(to_html_section(s, colours[s.crew]) for s in sheets) or "<p>no crews selected</p>"
        return [("sheets.html", html_document(f"Route sheets - {pv.title}", body))]
    fn = to_markdown if form == "md" else to_text
    files: dict[str, list[str]] = {}
    names = sheet_names([s.crew for s in sheets])
    for s in sheets:
        files.setdefault(f"sheet-{names[s.crew]}.{form}", []).append(fn(s))
    return [(name, "\n".join(parts)) for name, parts in files.items()]
