"""Plan exports for other programs: GeoJSON (RFC 7946), GPX 1.1 and a per-segment CSV.

* GeoJSON (RFC 7946: WGS84 lon/lat positions, no "crs" member): one Feature per
  crew territory (MultiLineString of its segments) and one per route (a single
  continuous LineString through the traversals in driving order), with
  properties naming the crew and its totals. Cycle plans add each route's day and
  clock start, and one Feature per served pass (``kind: "pass"``: crew, day, step,
  clock times from and to, the posted window or null).
* GPX 1.1 (namespace http://www.topografix.com/GPX/1/1): a ``<wpt>`` at each
  crew's depot and one ``<trk>`` per crew route, track points in driving order,
  for in-cab devices (a track is followed as drawn; a GPX route would be
  re-planned between its points). No timestamps, so the same plan gives the
  same bytes.
* CSV: one row per network segment: segment id, source id, street name, crew
  (empty when no crew serves it; several joined by ";"), required passes and
  the passes the routes serve.

Coordinates are written with 7 decimals (about 1 cm), as in the plan file.

Street names, crew ids and the plan's title may hold anything. In GPX they pass
through :class:`crewcut.reports.textsafety.XmlEscaper` (characters XML 1.0
cannot hold become U+FFFD, and the file's metadata ``<desc>`` then says how
many); in CSV every text cell passes through
:func:`crewcut.reports.textsafety.csv_cell` (OWASP, "CSV Injection": a cell
starting with = + - @ tab or CR is quoted so that no spreadsheet runs it as a
formula; numbers stay numbers).
"""
from __future__ import annotations

import csv
import io
import json

from crewcut.solve.calendar.clock import timing
from crewcut.solve.calendar.postings import clock
from crewcut.solve.network.scope import REASONS

from crewcut.plans.model import Plan, route_id
from crewcut.plans.view import PlanView, view
from crewcut.reports.textsafety import SafeText, XmlEscaper, csv_cell, xml_note
from crewcut.solve.result import Route

FORMATS = ("geojson", "gpx", "csv")


def _pos(p: list[float]) -> list[float]:
    return [round(p[0], 7), round(p[1], 7)]


def _totals(route: Route) -> dict:
    steps = route.traversals
    return {"service_km": round(sum(s.metres for s in steps if s.service) / 1000.0, 4),
            "deadhead_km": round(sum(s.metres for s in steps if not s.service) / 1000.0, 4),
            "total_min": round(sum(s.minutes + s.turn_minutes + s.wait_minutes for s in steps), 4),
            "traversals": len(steps)}


def _pass_features(pv: PlanView, crew: str, rid: str, r: Route) -> list[dict]:
    tm = timing(r.traversals, r.start_min or 0.0)
    out = []
    for j, x in enumerate(r.traversals):
        if not x.service:
            continue
        rec = pv.segments[x.segment]
        out.append({"type": "Feature", "geometry": {"type": "LineString", "coordinates": [
            _pos(p) for p in pv.seg_coords(x.segment, x.from_node)]}, "properties": {
            "kind": "pass", "crew": crew, "route": rid, "day": r.day, "step": j + 1, "segment": x.segment,
            "source_id": rec.source_id, "name": rec.name, "from": clock(tm.drive_start[j]),
            "to": clock(tm.drive_end[j]), "posted_window": rec.posted.window if rec.posted else None}})
    return out


def to_geojson(pv: Plan | PlanView) -> str:
    pv = view(pv)
    pv.need_geometry()
    feats = []
    for c in pv.crews:
        terr = sorted(c.territory)
        geom = None
        if terr:
            geom = {"type": "MultiLineString", "coordinates": [[_pos(p) for p in pv.seg_coords(s)] for s in terr]}
        feats.append({"type": "Feature", "geometry": geom, "properties": {
            "kind": "territory", "crew": c.id, "segments": len(terr),
            "length_m": round(sum(float(pv.segments[s].length_m) for s in terr), 3),
            "depot_node": c.depot_node, "shift_limit_min": c.shift_limit_min}})
    for c in pv.crews:
        for i, r in enumerate(c.routes):
            line = [_pos(p) for p in pv.route_coords(r)]
            geom = {"type": "LineString", "coordinates": line} if len(line) >= 2 else None
            day = {} if r.day is None else {"day": r.day, "start": clock(r.start_min)}
            feats.append({"type": "Feature", "geometry": geom, "properties": {
                "kind": "route", "crew": c.id, "route": route_id(i), **day, **_totals(r)}})
    for c in pv.crews:  # cycle plans: every pass with its day, clock times and posted window
        for i, r in enumerate(c.routes):
            if r.day is not None:
                feats += _pass_features(pv, c.id, route_id(i), r)
    for x in pv.plan.left_out or ():  # never silent: each street no crew serves, with its reason
        coords = [_pos(p) for p in pv.seg_coords(x.segment)]
        feats.append({"type": "Feature", "geometry": {"type": "LineString", "coordinates": coords}, "properties": {
            "kind": "left_out", "segment": x.segment, "source_id": x.source_id, "name": x.name,
            "length_m": round(float(x.length_m), 3), "reason": x.reason, "why": REASONS.get(x.reason, x.reason)}})
    doc = {"type": "FeatureCollection", "features": feats}
    return json.dumps(doc, ensure_ascii=False, separators=(",", ":")) + "\n"


def to_gpx(pv: Plan | PlanView) -> str:
    """GPX 1.1: each crew's depot as a waypoint and each route as a track.

    A track, not a GPX route: navigation devices re-plan the way between route
    points and could cut through streets the crew must serve; a track is
    followed as drawn.
    """
    return gpx_document(pv).text


def gpx_document(pv: Plan | PlanView) -> SafeText:
    """:func:`to_gpx` with the count of characters XML 1.0 could not hold (``replaced``)."""
    pv = view(pv)
    pv.need_geometry()
    esc = XmlEscaper()
    out = ['<?xml version="1.0" encoding="UTF-8"?>',
           '<gpx version="1.1" creator="crewcut" xmlns="http://www.topografix.com/GPX/1/1" '
           'xmlns:xsi="http://www.w3.org/2001/XMLSchema-instance" '
           'xsi:schemaLocation="http://www.topografix.com/GPX/1/1 http://www.topografix.com/GPX/1/1/gpx.xsd">',
           f"<metadata><name>{esc.text(pv.title)}</name></metadata>"]
    for c in pv.crews:  # GPX 1.1 puts every wpt before the first trk
        at = pv.node_lonlat(c.depot_node)
        if at is not None:
            out.append(f'<wpt lat="{at[1]:.7f}" lon="{at[0]:.7f}"><name>{esc.text(c.id)} depot</name></wpt>')
    for c in pv.crews:
        for i, r in enumerate(c.routes):
            t = _totals(r)
            out.append("<trk>")
            out.append(f"<name>{esc.text(c.id)} {esc.text(route_id(i))}</name>")
            desc = f"serve {t['service_km']:.2f} km, drive {t['deadhead_km']:.2f} km, {t['total_min']:.0f} min"
            out.append(f"<desc>{esc.text(desc)}</desc>")
            out.append("<trkseg>")
            for lon, lat in pv.route_coords(r):
                out.append(f'<trkpt lat="{lat:.7f}" lon="{lon:.7f}"></trkpt>')
            out.append("</trkseg>")
            out.append("</trk>")
    out.append("</gpx>")
    if esc.replaced:  # GPX 1.1 metadataType: <desc> follows <name>
        out[2] = out[2].replace("</name></metadata>", f"</name><desc>{xml_note(esc.replaced)}</desc></metadata>")
    return SafeText("\n".join(out) + "\n", esc.replaced)


def to_csv(pv: Plan | PlanView) -> str:
    pv = view(pv)
    crews_of: dict[int, list[str]] = {}
    for c in pv.crews:
        for s in c.territory:
            crews_of.setdefault(s, []).append(c.id)
    served = [0] * len(pv.segments)
    for c in pv.crews:
        for r in c.routes:
            for st in r.traversals:
                served[st.segment] += st.service
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["segment_id", "source_id", "name", "crew", "passes_required", "passes_served"])
    for s in pv.segments:  # csv_cell: OWASP "CSV Injection" (no text cell a spreadsheet would run)
        w.writerow([csv_cell(x) for x in (s.id, s.source_id, s.name, ";".join(sorted(crews_of.get(s.id, []))),
                                          s.passes.total, served[s.id])])
    return buf.getvalue()


def export(pv: Plan | PlanView, form: str) -> str:
    return export_document(pv, form).text


def export_document(pv: Plan | PlanView, form: str) -> SafeText:
    """The plan in one of :data:`FORMATS`, with the count of characters XML could not hold (GPX only)."""
    if form not in FORMATS:
        raise ValueError(f"unknown export format {form!r}; allowed: {', '.join(FORMATS)}")
    if form == "gpx":
        return gpx_document(pv)
    return SafeText({"geojson": to_geojson, "csv": to_csv}[form](pv))
