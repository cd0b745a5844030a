"""The plan file's JSON document and the typed :class:`crewcut.plans.model.Plan`, each into the other.

:func:`plan_to_dict` gives the document with the file's fixed key order and
rounding (metres to 3 decimals, minutes to 4 or 5, coordinates to 7, summary
figures to 5; no ``-0.0``); :func:`plan_from_dict` checks a document
(:func:`crewcut.plans.filecheck.record_problem`: the records' shapes and links,
coordinates, traffic side, totals) and returns the plan, or raises :class:`InputError` naming the
record at fault. For every document crewcut writes,
``plan_to_dict(plan_from_dict(doc)) == doc``.
"""
from __future__ import annotations

import dataclasses
import json

import numpy as np

from crewcut.solve.errors import InputError
from crewcut.solve.network.scope import LeftOutStreet
from crewcut.solve.profile import Crew, Profile, recorded_fields
from crewcut.solve.readers.area import ServiceArea
from crewcut.solve.calendar.cycle import make_cycle
from crewcut.solve.result import Route, RouteTotals, Traversal, Visit

from crewcut.plans.filecheck import TOTALS as _TOTALS, is_finite, record_problem
from crewcut.plans.schema import schema_problem
from crewcut.plans.model import (CHANGE_FIELDS, FORMAT, VERSION, BalanceLimits, BalanceOutcome, Change, CrewPlan,
                                 DeferredSegment, FleetSummary, History, NodeRecord, OverLimit, Plan, PlanNetwork,
                                 PlanSettings, PostedRecord, ReplanLimits, RouteSummary, RunOptions, SegmentPasses,
                                 SegmentRecord, route_id)

FIX = "re-plan, or restore the file as crewcut wrote it"


def rnd(x: float, nd: int) -> float:
    """``x`` rounded to ``nd`` decimals, as the file records it (never ``-0.0``)."""
    v = round(float(x), nd)
    return 0.0 if v == 0 else v


def rounded(d):
    """Every float in a nested summary rounded to 5 decimals (numpy numbers made plain)."""
    if isinstance(d, dict):
        return {k: rounded(v) for k, v in d.items()}
    if isinstance(d, (list, tuple)):
        return [rounded(v) for v in d]
    if isinstance(d, (float, np.floating)):
        return rnd(d, 5)
    if isinstance(d, np.integer):
        return int(d)
    return d


def dumps(doc: dict) -> str:
    """The document as the file's text: compact UTF-8 JSON, one trailing newline."""
    return json.dumps(doc, ensure_ascii=False, separators=(",", ":"), allow_nan=False) + "\n"


# ------------------------------------------------------------------ typed -> document
def _traversal_dict(x: Traversal) -> dict:
    d = {"segment": x.segment, "from": x.from_node, "to": x.to_node, "mode": "service" if x.service else "deadhead",
         "metres": rnd(x.metres, 3), "minutes": rnd(x.minutes, 5), "turn": x.turn,
         "turn_minutes": rnd(x.turn_minutes, 5)}
    if x.wait_minutes:  # only cycle plans wait; other plans keep the bytes they always had
        d["wait_minutes"] = rnd(x.wait_minutes, 5)
    return d


def route_section(route: Route, rid: str = "route-1") -> dict:
    t = route.totals
    doc = {"id": rid}
    if route.day is not None:
        doc["day"] = route.day
        doc["start_min"] = rnd(route.start_min, 3)
    doc.update({
        "method": route.method,
        "exact": route.exact,
        "lower_bound_min": rnd(route.lower_bound_min, 4),
        "totals": {"service_km": rnd(t.service_km, 4), "service_min": rnd(t.service_min, 4),
                   "deadhead_km": rnd(t.deadhead_km, 4), "deadhead_min": rnd(t.deadhead_min, 4),
                   "turn_min": rnd(t.turn_min, 4), "total_min": rnd(t.total_min, 4),
                   "u_turns": t.u_turns, "across_turns": t.across_turns},
        "traversals": [_traversal_dict(x) for x in route.traversals],
    })
    if route.day is not None:
        doc["totals"]["wait_min"] = rnd(t.wait_min, 4)
    if route.visits:  # trips only; other plans keep the bytes they always had
        doc["totals"]["visit_min"] = rnd(t.visit_min, 4)
        doc["visits"] = [{"after": v.after, "facility": v.facility, "node": v.node,
                          "arrive_min": rnd(v.arrive_min, 4), "wait_min": rnd(v.wait_min, 5),
                          "minutes": rnd(v.minutes, 5), "resets": list(v.resets)} for v in route.visits]
    return doc


def crew_section(c: CrewPlan) -> dict:
    return {"id": c.id, "depot_node": int(c.depot_node), "shift_limit_min": rnd(c.shift_limit_min, 3),
            "territory": sorted(int(s) for s in c.territory), "shift_min": rnd(c.shift_min, 4),
            "routes": [route_section(r, route_id(i)) for i, r in enumerate(c.routes)]}


def _node_dict(n: NodeRecord) -> dict:
    return {"id": n.id, "lon": n.lon, "lat": n.lat, "label": n.label}


def _segment_dict(s: SegmentRecord) -> dict:
    p = s.passes
    return {"id": s.id, "source_id": s.source_id, "from": s.from_node, "to": s.to_node,
            "length_m": rnd(s.length_m, 3), "oneway": s.oneway, "closed": s.closed, "name": s.name,
            "class": s.road_class, "service": s.service,
            "passes": {"forward": p.forward, "backward": p.backward, "either": p.either},
            "service_min": rnd(s.service_min, 5), "deadhead_min": rnd(s.deadhead_min, 5),
            "coords": None if s.coords is None else [[rnd(x, 7), rnd(y, 7)] for x, y in s.coords],
            **({} if s.posted is None else {"posted": posted_dict(s.posted)})}


def posted_dict(p: PostedRecord) -> dict:
    """A posted time as the file writes it: ``{"day": "tue", "window": "08:00-10:00"}``, no window key without one."""
    return {"day": p.day, **({"window": p.window} if p.window else {})}


def summary_dict(s: FleetSummary | RouteSummary | None) -> dict:
    if s is None:
        return {}
    d = {f.name: getattr(s, f.name) for f in dataclasses.fields(s)}
    if isinstance(s, FleetSummary):
        d["over_limit"] = [{k: v for k, v in dataclasses.asdict(o).items() if v is not None} for o in s.over_limit]
        for key in ("balance", "deferred_segments", "deferred_min", "crew_days", "day_balance", "window_misses"):
            if d[key] is None:
                del d[key]
        if s.balance is not None:
            d["balance"] = dataclasses.asdict(s.balance)
    return rounded(d)


def _change_dict(c: Change) -> dict:
    d = {"kind": c.kind}
    for key in CHANGE_FIELDS.get(c.kind, ()):
        v = getattr(c, key)
        d[key] = list(v) if isinstance(v, tuple) else v
    if c.day is not None:
        d["day"] = c.day
    return d


def history_dict(h: History) -> dict:
    changes = [_change_dict(c) for c in h.changes]
    if h.generation is None:
        return {"parent": h.parent, "changes": changes}
    return {"parent": h.parent, "parent_path": h.parent_path, "parent_fingerprint": h.parent_fingerprint,
            "generation": h.generation, "lineage": list(h.lineage), "changes": changes,
            "stability": h.stability, "overflow": h.overflow}


def _deferred_dict(d: DeferredSegment) -> dict:
    return {"segment": d.segment, "source_id": d.source_id, "name": d.name, "class": d.road_class,
            "priority": d.priority, "crew": d.crew, "work_min": d.work_min, "length_m": d.length_m}


# The key order of the run options: a replan keeps its parent's keys in place and appends its own,
# so the order depends on the lineage: a one-crew plan's (command), a fleet plan's (balance), or neither.
_OPTION_ORDER = {
    "route": ("command", "depot_node", "seed", "turn_aware", "unservable", "area", "crews", "rebalance",
              "route_time_limit_s"),
    "fleet": ("seed", "crews", "unservable", "area", "cycle", "balance", "route_time_limit_s", "rebalance"),
    "other": ("seed", "crews", "unservable", "area", "cycle", "rebalance", "route_time_limit_s"),
}


def options_dict(o: RunOptions) -> dict:
    """The run options as the file records them (only those recorded, in the lineage's key order)."""
    lineage = "route" if o.command is not None else ("fleet" if o.balance is not None else "other")
    out = {}
    for key in _OPTION_ORDER[lineage]:
        v = getattr(o, key)
        if v is None:
            continue
        if key == "crews":
            v = [{"id": c.id, "depot_node": c.depot_node, "shift_limit_min": c.shift_limit_min,
                  **({"days_off": list(c.days_off)} if c.days_off else {})} for c in v]
        elif key in ("balance", "rebalance"):
            v = dataclasses.asdict(v)
        elif key == "area":
            v = {"source": v.source, **v.to_geojson()}
        elif key == "cycle":
            v = v.to_dict()
        out[key] = v
    return out


def plan_to_dict(plan: Plan) -> dict:
    """The plan file's document (plain dicts and lists, fixed key order, rounded numbers)."""
    nw = plan.network
    doc = {
        "format": FORMAT,
        "version": VERSION,
        "settings": {"profile": plan.settings.profile.to_dict(), **options_dict(plan.settings.options)},
        "network": {"fingerprint": nw.fingerprint, "source": nw.source, "has_geometry": nw.has_geometry,
                    "origin": list(nw.origin), "nodes": [_node_dict(n) for n in nw.nodes],
                    "segments": [_segment_dict(s) for s in nw.segments]},
        "crews": [crew_section(c) for c in plan.crews],
        "summary": summary_dict(plan.summary),
        "history": history_dict(plan.history),
    }
    if plan.deferred is not None:
        doc["deferred"] = [_deferred_dict(d) for d in plan.deferred]
    if plan.left_out is not None:
        doc["left_out"] = [left_out_dict(s) for s in plan.left_out]
    return doc


def left_out_dict(s: LeftOutStreet) -> dict:
    """A left-out street as the file records it."""
    return {"segment": s.segment, "source_id": s.source_id, "name": s.name, "length_m": rnd(s.length_m, 3),
            "reason": s.reason}


# ------------------------------------------------------------------ document -> typed
def _traversals(rec: dict) -> tuple[Traversal, ...]:
    return tuple(Traversal(t["segment"], t["from"], t["to"], t["mode"] == "service", t["metres"], t["minutes"],
                           str(t.get("turn", "unknown")), t["turn_minutes"], t.get("wait_minutes", 0.0))
                 for t in rec["traversals"])


def _route(rec: dict, depot: int) -> Route:
    tot = rec["totals"]
    totals = RouteTotals(**{k: tot[k] for k in _TOTALS}, wait_min=tot.get("wait_min", 0.0),
                         visit_min=tot.get("visit_min", 0.0))
    visits = tuple(Visit(v["after"], v["facility"], v["node"], v["arrive_min"], v["wait_min"], v["minutes"],
                         tuple(v["resets"])) for v in rec.get("visits", ()))
    return Route(depot, _traversals(rec), totals, str(rec.get("method", "")), bool(rec.get("exact", False)),
                 rec.get("lower_bound_min", 0.0), day=rec.get("day"), start_min=rec.get("start_min"), visits=visits)


def _crew(rec: dict) -> CrewPlan:
    depot = rec["depot_node"]
    crew = CrewPlan(Crew(rec["id"], rec["shift_limit_min"], None, depot),
                    tuple(sorted(rec["territory"])), tuple(_route(r, depot) for r in rec["routes"]))
    recorded = rec.get("shift_min")
    if not is_finite(recorded) or abs(recorded - crew.shift_min) > 1e-3 * max(1, len(crew.routes)):
        raise InputError(f"crew '{crew.id}': shift_min {recorded!r} but its routes add up to {crew.shift_min:.4f}")
    return crew


def _segment(s: dict) -> SegmentRecord:
    c = s.get("coords")
    return SegmentRecord(s["id"], str(s["source_id"]), s["from"], s["to"], s["length_m"], bool(s["oneway"]),
                         bool(s["closed"]), str(s["name"]), str(s["class"]), str(s["service"]),
                         SegmentPasses(s["passes"]["forward"], s["passes"]["backward"], s["passes"]["either"]),
                         s["service_min"], s["deadhead_min"],
                         None if c is None else tuple((q[0], q[1]) for q in c),
                         None if s.get("posted") is None else PostedRecord(str(s["posted"]["day"]),
                                                                           str(s["posted"].get("window", ""))))


def _network(nw: dict) -> PlanNetwork:
    origin = nw.get("origin") or [0.0, 0.0]
    return PlanNetwork(str(nw.get("fingerprint", "")), str(nw.get("source") or ""), bool(nw.get("has_geometry", False)),
                       (origin[0], origin[1]),
                       tuple(NodeRecord(n["id"], n.get("lon"), n.get("lat"), str(n.get("label") or ""))
                             for n in nw["nodes"]),
                       tuple(_segment(s) for s in nw["segments"]))


def _options(rec: dict) -> RunOptions:
    known = {f.name for f in dataclasses.fields(RunOptions)}
    unknown = sorted(k for k in rec if k not in known)
    if unknown:
        raise InputError(f"settings: unknown run option(s) {', '.join(repr(k) for k in unknown)}")
    kw = dict(rec)
    if kw.get("crews") is not None:
        kw["crews"] = tuple(Crew(c["id"], c["shift_limit_min"], None, c["depot_node"], tuple(c.get("days_off", ())))
                            for c in kw["crews"])
    if kw.get("cycle") is not None:
        kw["cycle"] = make_cycle(kw["cycle"].get("days"), kw["cycle"].get("shift_start"), "settings: cycle")
    if kw.get("balance") is not None:
        kw["balance"] = BalanceLimits(**kw["balance"])
    if kw.get("rebalance") is not None:
        kw["rebalance"] = ReplanLimits(**kw["rebalance"])
    if kw.get("area") is not None:
        a = kw["area"]
        kw["area"] = ServiceArea(tuple(tuple(tuple((float(x), float(y)) for x, y in ring) for ring in poly)
                                       for poly in a["coordinates"]), str(a.get("source") or ""))
    return RunOptions(**kw)


def _settings(rec: dict) -> PlanSettings:
    return PlanSettings(dataclasses.replace(Profile(), **recorded_fields(rec.get("profile", {}))),
                        _options({k: v for k, v in rec.items() if k != "profile"}))


def _summary(rec: dict) -> FleetSummary | RouteSummary | None:
    if not rec:
        return None
    if "longest_min" in rec:
        d = dict(rec)
        d["over_limit"] = tuple(OverLimit(**o) for o in rec.get("over_limit", []))
        if rec.get("balance") is not None:
            d["balance"] = BalanceOutcome(**rec["balance"])
        return FleetSummary(**d)
    if "total_min" in rec:
        return RouteSummary(**rec)
    raise InputError("the summary is neither a fleet plan's nor a one-crew plan's")


def _history(rec: dict) -> History:
    changes = tuple(Change(**{k: (tuple(v) if isinstance(v, list) else v) for k, v in c.items()})
                    for c in rec.get("changes", []))
    if "generation" not in rec:
        return History(rec.get("parent"), changes)
    return History(rec["parent"], changes, rec.get("parent_path"), rec.get("parent_fingerprint"),
                   rec["generation"], tuple(rec.get("lineage", [])), rec.get("stability"), rec.get("overflow"))


def _deferred(i: int, rec: dict) -> DeferredSegment:
    missing = [k for k in ("segment", "source_id", "priority", "crew", "work_min")
               if not isinstance(rec, dict) or rec.get(k) is None]
    if missing:
        raise InputError(f"deferred entry {i} lacks {', '.join(missing)}")
    return DeferredSegment(rec["segment"], rec["source_id"], rec.get("name", ""), rec.get("class", ""),
                           rec["priority"], rec["crew"], rec["work_min"], rec.get("length_m", 0.0))


def plan_from_dict(doc: dict, name: str = "plan", *, trusted: bool = False) -> Plan:
    """The typed plan of a plan document; :class:`InputError` naming the record when it is damaged.

    ``name`` (the file's path) starts every message. ``trusted``: the document was
    just made by :func:`crewcut.plans.planfile.build_plan`, so the structural and
    schema checks (the file edge's guard against damaged files) are skipped.
    """
    if not isinstance(doc, dict) or doc.get("format") != FORMAT:
        raise InputError(f"{name}: not a crewcut plan file (no \"format\": \"{FORMAT}\")",
                         "give the plan.json written by 'crewcut plan' or 'crewcut route'")
    if doc.get("version") != VERSION:
        raise InputError(f"{name}: plan format version {doc.get('version')!r} is not supported "
                         f"(this crewcut reads version {VERSION})", "re-plan with this version of crewcut")
    for key in ("network", "crews", "settings"):
        if key not in doc:
            raise InputError(f"{name}: plan file has no '{key}' section")
    problem = None if trusted else record_problem(doc) or schema_problem(doc)
    if problem:
        raise InputError(f"{name}: damaged plan file: {problem}", FIX)
    try:
        deferred = doc.get("deferred")
        left = doc.get("left_out")
        return Plan(settings=_settings(doc["settings"]), network=_network(doc["network"]),
                    crews=tuple(_crew(c) for c in doc["crews"]), summary=_summary(doc.get("summary") or {}),
                    history=_history(doc.get("history") or {}),
                    deferred=None if deferred is None else tuple(_deferred(i, d) for i, d in enumerate(deferred)),
                    left_out=None if left is None else tuple(
                        LeftOutStreet(d["segment"], d["source_id"], d["name"], d["length_m"], d["reason"])
                        for d in left))
    except InputError as exc:
        raise InputError(f"{name}: damaged plan file: {exc.message}", FIX) from None
    except (KeyError, TypeError, ValueError, AttributeError, IndexError) as exc:
        raise InputError(f"{name}: damaged plan file: a record is malformed or has a value of the wrong type "
                         f"({type(exc).__name__}: {exc})", FIX) from None
