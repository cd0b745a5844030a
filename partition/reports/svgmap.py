"""Maps of a plan as plain SVG: crew territories, and one crew's route with driving arrows.

Pure vector output; no tiles, no fonts or anything else fetched. Coordinates are
projected with the plan's own local projection (azimuthal equidistant at the
plan's ``origin``, :func:`crewcut.solve.network.geodesy.project`) so that distances and angles
look right at town scale, then scaled to fit the drawing.

The crew colours (``PALETTE``) are our own: chosen by a greedy max-min search
over a 16-level RGB grid for the largest CIELAB distance between every pair, and
from the greys and black used for other marks, under normal vision and under
simulated deuteranopia, protanopia and tritanopia (the Machado, Oliveira and
Fernandes 2009 simulation). Every pair stays more than 20 CIELAB units apart in
all four. Beyond eight crews colours repeat with a dash pattern added.

Every piece of the user's text (crew ids, street and depot names, titles) is
written with :class:`crewcut.reports.textsafety.XmlEscaper`: characters that XML
1.0 cannot hold become U+FFFD, and the map then says so once in an XML comment.
:func:`territory_map` and :func:`route_map` return the text with that count;
:func:`territory_svg` and :func:`route_svg` the text alone.

Route maps draw service in the crew's colour with an arrow per traversal, and
deadhead (driving without serving) as a thin dashed dark grey line, each
traversal shifted a little to the driving side so that the two directions of a
street stay apart.
"""
from __future__ import annotations

import math

import numpy as np

from crewcut.plans.model import CrewPlan, Plan
from crewcut.plans.view import PlanView, view
from crewcut.reports.caution import SHORT_CAUTION
from crewcut.reports.textsafety import SafeText, XmlEscaper, xml_note

PALETTE = ("#2255aa", "#ff7711", "#66bbff", "#884411", "#9900ff", "#ddaa77", "#774477", "#8877ff")
DASHES = ("", "10 4", "3 3", "12 3 3 3")  # added to repeated colours beyond len(PALETTE) crews
BACKGROUND = "#cfcfcf"  # streets outside every territory / outside the crew's route
DEADHEAD = "#7a7a7a"
INK = "#1d1d1d"
FONT = 'font-family="DejaVu Sans, Liberation Sans, Arial, sans-serif"'

WIDTH = 760  # drawing area in px (legend added to the right)
LEGEND_W = 230
MARGIN = 24


def crew_colours(pv: Plan | PlanView) -> dict[str, str]:
    """Crew id -> colour, by the crew's position in the plan."""
    return {c.id: PALETTE[i % len(PALETTE)] for i, c in enumerate(pv.crews)}


def crew_dash(pv: Plan | PlanView) -> dict[str, str]:
    return {c.id: DASHES[(i // len(PALETTE)) % len(DASHES)] for i, c in enumerate(pv.crews)}


class _Frame:
    """Projection of the plan's lon/lat to SVG pixels (y down), fitted to the drawing area."""

    def __init__(self, pv: PlanView, fit: list[int] | None = None) -> None:
        """Fit the drawing to segments ``fit`` (all segments when None)."""
        x, y, starts, node_xy = pv.projected  # projected once per plan, shared by every map of it
        x, y = np.concatenate([x, node_xy[:, 0]]), np.concatenate([y, node_xy[:, 1]])
        if fit:
            sel = np.concatenate([np.arange(starts[s], starts[s + 1]) for s in sorted(set(fit))])
            fx, fy = x[sel], y[sel]
        else:
            fx, fy = x, y
        span = max(float(np.ptp(fx)) if fx.size else 0.0, float(np.ptp(fy)) if fy.size else 0.0, 1.0)
        self.scale = (WIDTH - 2 * MARGIN) / span  # px per metre, same both ways
        self.x0 = float(fx.min()) if fx.size else 0.0
        self.y1 = float(fy.max()) if fy.size else 0.0
        self.height = int(math.ceil(max(float(np.ptp(fy)) if fy.size else 0.0, 1.0) * self.scale)) + 2 * MARGIN + 40
        self.height = max(self.height, 300)
        px = (x - self.x0) * self.scale + MARGIN
        py = (self.y1 - y) * self.scale + MARGIN + 30  # room for the title
        n = int(starts[-1])
        self._px = np.stack([px[:n], py[:n]], 1)
        self._starts = starts
        self.node_px = np.stack([px[n:], py[n:]], 1)
        # segments with a vertex on the canvas (the others are left out of zoomed maps)
        on = (px[:n] >= 0) & (px[:n] <= WIDTH) & (py[:n] >= 0) & (py[:n] <= self.height)
        self.visible = np.logical_or.reduceat(on, starts[:-1]).tolist() if n else []

    def seg(self, s: int, reverse: bool = False) -> np.ndarray:
        p = self._px[self._starts[s]:self._starts[s + 1]]
        return p[::-1] if reverse else p


def _path(p: np.ndarray) -> str:
    return "M" + " L".join(f"{x:.1f},{y:.1f}" for x, y in p)


def _offset(p: np.ndarray, d: float) -> np.ndarray:
    """Shift a polyline sideways by d px (positive: to the right of the driving direction, y down)."""
    if len(p) < 2 or d == 0:
        return p
    seg = np.diff(p, axis=0)
    ln = np.hypot(seg[:, 0], seg[:, 1])
    ln[ln == 0] = 1.0
    nrm = np.stack([-seg[:, 1], seg[:, 0]], 1) / ln[:, None]  # right-hand normal when y points down
    vn = np.concatenate([nrm[:1], nrm[:-1] + nrm[1:], nrm[-1:]])
    vl = np.hypot(vn[:, 0], vn[:, 1])
    vl[vl == 0] = 1.0
    return p + vn / vl[:, None] * d


def _midpoint(p: np.ndarray) -> tuple[float, float, float] | None:
    """Point half-way along a polyline and the heading there (radians, SVG axes)."""
    seg = np.diff(p, axis=0)
    ln = np.hypot(seg[:, 0], seg[:, 1])
    tot = float(ln.sum())
    if tot < 1e-6:
        return None
    half = tot / 2
    acc = np.cumsum(ln)
    i = int(np.searchsorted(acc, half))
    i = min(i, len(ln) - 1)
    before = acc[i] - ln[i]
    t = (half - before) / ln[i] if ln[i] > 0 else 0.0
    x, y = p[i] + seg[i] * t
    return float(x), float(y), math.atan2(seg[i, 1], seg[i, 0])


def _arrow(x: float, y: float, ang: float, size: float, fill: str) -> str:
    pts = [(size, 0.0), (-size * 0.8, size * 0.65), (-size * 0.4, 0.0), (-size * 0.8, -size * 0.65)]
    c, s = math.cos(ang), math.sin(ang)
    xy = " ".join(f"{x + a * c - b * s:.1f},{y + a * s + b * c:.1f}" for a, b in pts)
    return f'<polygon points="{xy}" fill="{fill}" stroke="#ffffff" stroke-width="0.7"/>'


def _depot_marks(pv: PlanView, fr: _Frame, crews: list[CrewPlan] | tuple[CrewPlan, ...], esc: XmlEscaper) -> list[str]:
    by_node: dict[int, list[str]] = {}
    for c in crews:
        by_node.setdefault(c.depot_node, []).append(c.id)
    out = []
    for node in sorted(by_node):
        x, y = fr.node_px[node]
        label = esc.text(", ".join(by_node[node]))
        out.append(f'<rect x="{x - 7:.1f}" y="{y - 7:.1f}" width="14" height="14" fill="#ffffff" stroke="{INK}" '
                   f'stroke-width="2.5"/><circle cx="{x:.1f}" cy="{y:.1f}" r="2.5" fill="{INK}"/>')
        out.append(f'<text x="{x + 10:.1f}" y="{y + 18:.1f}" font-size="11" fill="{INK}" stroke="#ffffff" '
                   f'stroke-width="3" paint-order="stroke">depot: {label}</text>')
    return out


def _facility_marks(fr: _Frame, crews, esc: XmlEscaper) -> list[str]:
    """A diamond at every facility the crews' routes stop at, labelled with its id (plans with trips only)."""
    by_node: dict[int, set[str]] = {}
    for c in crews:
        for r in c.routes:
            for v in r.visits:
                by_node.setdefault(v.node, set()).add(v.facility)
    out = []
    for node in sorted(by_node):
        x, y = fr.node_px[node]
        out.append(f'<polygon points="{x:.1f},{y - 9:.1f} {x + 9:.1f},{y:.1f} {x:.1f},{y + 9:.1f} {x - 9:.1f},{y:.1f}" '
                   f'fill="#ffffff" stroke="{INK}" stroke-width="2.5"/>')
        out.append(f'<text x="{x + 11:.1f}" y="{y - 8:.1f}" font-size="11" fill="{INK}" stroke="#ffffff" '
                   f'stroke-width="3" paint-order="stroke">facility: {esc.text(", ".join(sorted(by_node[node])))}</text>')
    return out


_DIAMOND = f'<polygon points="13,0 20,6.5 13,13 6,6.5" fill="#ffffff" stroke="{INK}" stroke-width="2.5"/>'


def _svg(width: int, height: int, body: list[str], title: str, standalone: bool, esc: XmlEscaper) -> SafeText:
    head = '<?xml version="1.0" encoding="UTF-8"?>\n' if standalone else ""
    label, shown = esc.attr(title), esc.text(title)
    note = f"<!-- {xml_note(esc.replaced)} -->\n" if esc.replaced else ""
    return SafeText(f'{head}<svg xmlns="http://www.w3.org/2000/svg" width="{width}" height="{height}" '
                    f'viewBox="0 0 {width} {height}" {FONT} role="img" aria-label="{label}">\n{note}'
                    f'<rect x="0" y="0" width="{width}" height="{height}" fill="#ffffff"/>\n'
                    f'<text x="{MARGIN}" y="26" font-size="16" font-weight="bold" fill="{INK}">{shown}</text>\n'
                    + "\n".join(body) + "\n"
                    f'<text x="{MARGIN}" y="{height - 4}" font-size="10" fill="{INK}">{esc.text(SHORT_CAUTION)}</text>'
                    "\n</svg>\n", esc.replaced)


def _scale_bar(fr: _Frame) -> str:
    want = (WIDTH - 2 * MARGIN) / fr.scale / 5  # about a fifth of the drawing, in metres
    mag = 10 ** math.floor(math.log10(want))
    metres = max(m * mag for m in (1, 2, 5) if m * mag <= want)
    w = metres * fr.scale
    x, y = MARGIN, fr.height - 14
    label = f"{metres / 1000:g} km" if metres >= 1000 else f"{metres:g} m"
    return (f'<path d="M{x},{y - 5} V{y} H{x + w:.1f} V{y - 5}" fill="none" stroke="{INK}" stroke-width="1.5"/>'
            f'<text x="{x + w + 6:.1f}" y="{y}" font-size="11" fill="{INK}">{label}</text>'
            f'<path d="M{WIDTH - MARGIN},{fr.height - 40} l-6,14 h12 z" fill="{INK}"/>'
            f'<text x="{WIDTH - MARGIN}" y="{fr.height - 12}" font-size="11" text-anchor="middle" fill="{INK}">N</text>')


def _legend_row(y: float, swatch: str, text: str, esc: XmlEscaper) -> str:
    return (f'<g transform="translate({WIDTH + 8},{y:.1f})">{swatch}'
            f'<text x="34" y="10" font-size="12" fill="{INK}">{esc.text(text)}</text></g>')


def territory_svg(pv: Plan | PlanView, standalone: bool = True) -> str:
    """All crews' territories in their colours, depots marked, a legend with crew ids and shift hours."""
    return territory_map(pv, standalone).text


def territory_map(pv: Plan | PlanView, standalone: bool = True) -> SafeText:
    """:func:`territory_svg` with the count of characters XML 1.0 could not hold (``replaced``)."""
    pv = view(pv)
    esc = XmlEscaper()
    fr = _Frame(pv)
    colours, dashes = crew_colours(pv), crew_dash(pv)
    owner: dict[int, str] = {}
    for c in pv.crews:
        for s in c.territory:
            owner.setdefault(s, c.id)
    body = [f'<g fill="none" stroke="{BACKGROUND}" stroke-width="1.6" stroke-linecap="round">']
    body += [f'<path d="{_path(fr.seg(s))}"/>' for s in range(len(pv.segments)) if s not in owner]
    body.append("</g>")
    for c in pv.crews:
        dash = f' stroke-dasharray="{dashes[c.id]}"' if dashes[c.id] else ""
        body.append(f'<g fill="none" stroke="{colours[c.id]}" stroke-width="4.5" stroke-linecap="round"'
                    f'{dash} data-crew="{esc.attr(c.id)}">')
        body += [f'<path d="{_path(fr.seg(s))}"/>' for s in sorted(c.territory) if owner.get(s) == c.id]
        body.append("</g>")
    body += _depot_marks(pv, fr, pv.crews, esc)
    marks = _facility_marks(fr, pv.crews, esc)
    body += marks
    body.append(_scale_bar(fr))
    from crewcut.reports.workload import workload_rows
    rows = {r["crew"]: r for r in workload_rows(pv) if r["row"] == "crew"}
    y = 44.0
    body.append(f'<text x="{WIDTH + 8}" y="{y - 8:.1f}" font-size="12" font-weight="bold" fill="{INK}">'
                f'crew: shift (h)</text>')
    for c in pv.crews:
        r = rows[c.id]
        dash = f' stroke-dasharray="{dashes[c.id]}"' if dashes[c.id] else ""
        sw = (f'<rect x="0" y="0" width="26" height="13" fill="{colours[c.id]}"/>' if not dash else
              f'<path d="M0,6.5 H26" stroke="{colours[c.id]}" stroke-width="6"{dash}/>')
        over = "  over limit" if r["over_limit_min"] > 0 else ""
        body.append(_legend_row(y, sw, f'{c.id}: {r["shift_h"]:.2f} h{over}', esc))
        y += 20
    y += 6
    body.append(_legend_row(y, f'<path d="M0,6.5 H26" stroke="{BACKGROUND}" stroke-width="2"/>', "no crew (not served)", esc))
    body.append(_legend_row(y + 20, f'<rect x="6" y="0" width="13" height="13" fill="#ffffff" stroke="{INK}" '
                                    f'stroke-width="2.5"/>', "depot", esc))
    if marks:
        body.append(_legend_row(y + 40, _DIAMOND, "facility (dump site, water point, salt depot)", esc))
    height = max(fr.height, int(y) + 60 + (20 if marks else 0))
    return _svg(WIDTH + LEGEND_W, height, body, f"Territories - {len(pv.crews)} crews", standalone, esc)


def route_svg(pv: Plan | PlanView, crew: CrewPlan, standalone: bool = True) -> str:
    """One crew's routes: service in the crew colour with arrows, deadhead thin, dashed and grey."""
    return route_map(pv, crew, standalone).text


def route_map(pv: Plan | PlanView, crew: CrewPlan, standalone: bool = True) -> SafeText:
    """:func:`route_svg` with the count of characters XML 1.0 could not hold (``replaced``)."""
    pv = view(pv)
    esc = XmlEscaper()
    used = sorted({int(s) for s in crew.territory}
                  | {st.segment for r in crew.routes for st in r.traversals})
    fr = _Frame(pv, fit=used)  # zoomed to the crew's own streets
    colour = crew_colours(pv)[crew.id]
    side = 2.6 if pv.traffic == "right" else -2.6  # draw on the driving side of the centre line
    body = [f'<g fill="none" stroke="{BACKGROUND}" stroke-width="1.4" stroke-linecap="round">']
    body += [f'<path d="{_path(fr.seg(s))}"/>' for s in range(len(pv.segments)) if fr.visible[s]]
    body.append("</g>")
    dead, serve, arrows = [], [], []
    n_serve = n_dead = 0
    for route in crew.routes:
        for st in route.traversals:
            seg = pv.segments[st.segment]
            p = _offset(fr.seg(st.segment, reverse=st.from_node != seg.from_node), side)
            if st.service:
                serve.append(f'<path d="{_path(p)}"/>')
                n_serve += 1
            else:
                dead.append(f'<path d="{_path(p)}"/>')
                n_dead += 1
            mid = _midpoint(p)
            if mid:
                arrows.append(_arrow(*mid, 7.0 if st.service else 5.0, INK if st.service else DEADHEAD))
    body.append(f'<g fill="none" stroke="{colour}" stroke-width="3.6" stroke-linecap="round" '
                f'stroke-linejoin="round">')
    body += serve
    body.append("</g>")
    body.append(f'<g fill="none" stroke="{DEADHEAD}" stroke-width="1.6" stroke-dasharray="5 4" '
                f'stroke-linecap="butt">')
    body += dead
    body.append("</g>")
    body += arrows
    body += _depot_marks(pv, fr, [crew], esc)
    marks = _facility_marks(fr, [crew], esc)
    body += marks
    body.append(_scale_bar(fr))
    y = 44.0
    body.append(_legend_row(y, f'<path d="M0,6.5 H26" stroke="{colour}" stroke-width="3.6"/>',
                            f"serve ({n_serve} traversals)", esc))
    body.append(_legend_row(y + 20, f'<path d="M0,6.5 H26" stroke="{DEADHEAD}" stroke-width="1.6" '
                                    f'stroke-dasharray="5 4"/>', f"drive, no service ({n_dead})", esc))
    body.append(_legend_row(y + 40, f'<path d="M0,6.5 H26" stroke="{colour}" stroke-width="3.6"/>' + _arrow(13, 6.5, 0.0, 7.0, INK),
                            "driving direction", esc))
    body.append(_legend_row(y + 60, f'<path d="M0,6.5 H26" stroke="{BACKGROUND}" stroke-width="2"/>',
                            "other streets", esc))
    body.append(_legend_row(y + 80, f'<rect x="6" y="0" width="13" height="13" fill="#ffffff" stroke="{INK}" '
                                    f'stroke-width="2.5"/>', "depot (start and end)", esc))
    shift = sum(st.minutes + st.turn_minutes for r in crew.routes for st in r.traversals)
    shift += sum(v.wait_min + v.minutes for r in crew.routes for v in r.visits)
    body.append(_legend_row(y + 108, "", f"shift {shift / 60:.2f} h", esc))
    if marks:
        body.append(_legend_row(y + 128, _DIAMOND, "facility stop", esc))
    return _svg(WIDTH + LEGEND_W, max(fr.height, 240), body, f"Route - {crew.id}", standalone, esc)


# ------------------------------------------------------------------ shared with the other maps
def frame_of(pv: PlanView) -> _Frame:
    """The drawing frame of a plan's whole network (what every whole-town map uses)."""
    return _Frame(pv)


def path_of(fr: _Frame, s: int) -> str:
    """SVG path data of segment ``s`` in a frame."""
    return _path(fr.seg(s))


def legend_row(y: float, swatch: str, text: str, esc: XmlEscaper) -> str:
    return _legend_row(y, swatch, text, esc)


def svg_doc(width: int, height: int, body: list[str], title: str, standalone: bool, esc: XmlEscaper) -> SafeText:
    """A whole SVG document (title, caution line, white ground) around ``body``."""
    return _svg(width, height, body, title, standalone, esc)
