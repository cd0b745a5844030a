"""The plan file: one self-contained JSON document per plan (README, "The plan file").

Format name ``crewcut-plan``, version 1. Crews hold routes, routes hold
traversals; each crew has one route today, but a crew may later hold several
(one per day of a cycle, or trips split by dump visits). Everything a report,
``verify`` or ``rebalance`` needs is in the file: nodes, segments with their
geometry, the settings, the crews, their territories and routes.

Writing is atomic (:func:`crewcut.files.atomic_write`), numbers
are rounded to fixed decimals, and keys keep a fixed order, so the same plan
gives the same bytes.
"""
from __future__ import annotations

import json
import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from crewcut.solve.costs import Passes, deadhead_minutes, required_passes, service_minutes
from crewcut.solve.errors import InputError
from crewcut.solve.network.model import SERVICE_LABELS, Network
from crewcut.solve.profile import Profile
from crewcut.solve.result import Route, RouteTotals, Traversal

from crewcut.files import atomic_write

FORMAT = "crewcut-plan"
VERSION = 1


@dataclass
class CrewPlan:
    """One crew in a plan: its depot, its territory (segment ids) and its routes."""

    id: str
    depot_node: int
    shift_limit_min: float
    territory: list[int]
    routes: list[Route] = field(default_factory=list)

    @property
    def shift_min(self) -> float:
        return sum(r.totals.total_min for r in self.routes)


def _r(x: float, nd: int) -> float:
    v = round(float(x), nd)
    return 0.0 if v == 0 else v  # no "-0.0" in the file


def network_section(net: Network, profile: Profile, source: str = "") -> dict:
    """The network part of a plan: nodes and segments with passes and times."""
    passes: Passes = required_passes(net, profile)
    smin = service_minutes(net, profile)
    dmin = deadhead_minutes(net, profile)
    nodes = [{"id": i, "lon": _r(net.node_lon[i], 7) if net.has_geometry else None,
              "lat": _r(net.node_lat[i], 7) if net.has_geometry else None,
              "label": net.node_label[i]} for i in range(net.n_nodes)]
    segs = []
    for s in range(net.n_segments):
        coords = net.seg_coords[s]
        segs.append({
            "id": s,
            "source_id": net.seg_source[s],
            "from": int(net.seg_u[s]),
            "to": int(net.seg_v[s]),
            "length_m": _r(net.seg_length[s], 3),
            "oneway": bool(net.seg_oneway[s]),
            "closed": bool(net.seg_closed[s]),
            "name": net.seg_name[s],
            "class": net.seg_class[s],
            "service": SERVICE_LABELS[int(net.seg_service[s])],
            "passes": {"forward": int(passes.forward[s]), "backward": int(passes.backward[s]),
                       "either": int(passes.either[s])},
            "service_min": _r(smin[s], 5),
            "deadhead_min": _r(dmin[s], 5),
            "coords": None if coords is None else [[_r(x, 7), _r(y, 7)] for x, y in coords.tolist()],
        })
    return {"fingerprint": net.fingerprint, "source": source, "has_geometry": net.has_geometry,
            "origin": list(net.origin), "nodes": nodes, "segments": segs}


def route_section(route: Route, route_id: str = "route-1") -> dict:
    t = route.totals
    return {
        "id": route_id,
        "method": route.method,
        "exact": route.exact,
        "lower_bound_min": _r(route.lower_bound_min, 4),
        "totals": {"service_km": _r(t.service_km, 4), "service_min": _r(t.service_min, 4),
                   "deadhead_km": _r(t.deadhead_km, 4), "deadhead_min": _r(t.deadhead_min, 4),
                   "turn_min": _r(t.turn_min, 4), "total_min": _r(t.total_min, 4),
                   "u_turns": t.u_turns, "across_turns": t.across_turns},
        "traversals": [{"segment": x.segment, "from": x.from_node, "to": x.to_node,
                        "mode": "service" if x.service else "deadhead",
                        "metres": _r(x.metres, 3), "minutes": _r(x.minutes, 5),
                        "turn": x.turn, "turn_minutes": _r(x.turn_minutes, 5)}
                       for x in route.traversals],
    }


def traversals_from_section(rec: dict) -> tuple[Traversal, ...]:
    """A route section's traversals back as :class:`crewcut.solve.result.Traversal` (inverse of :func:`route_section`)."""
    return tuple(Traversal(int(t["segment"]), int(t["from"]), int(t["to"]), t["mode"] == "service",
                           float(t["metres"]), float(t["minutes"]), str(t.get("turn", "unknown")),
                           float(t.get("turn_minutes", 0.0))) for t in rec["traversals"])


def route_from_section(rec: dict, depot: int) -> Route:
    """A route section back as a :class:`crewcut.solve.result.Route` (inverse of :func:`route_section`)."""
    tot = rec["totals"]
    totals = RouteTotals(**{k: tot[k] for k in ("service_km", "service_min", "deadhead_km", "deadhead_min",
                                                "turn_min", "total_min", "u_turns", "across_turns")})
    return Route(depot, traversals_from_section(rec), totals, str(rec.get("method", "")),
                 bool(rec.get("exact", False)), float(rec.get("lower_bound_min", 0.0)))


def build_plan(net: Network, profile: Profile, crews: list[CrewPlan], *, source: str = "",
               settings: dict | None = None, summary: dict | None = None,
               history: dict | None = None) -> dict:
    """Assemble a plan document (plain dict, ready for :func:`write_plan`)."""
    return {
        "format": FORMAT,
        "version": VERSION,
        "settings": {"profile": profile.to_dict(), **(settings or {})},
        "network": network_section(net, profile, source),
        "crews": [{
            "id": c.id,
            "depot_node": int(c.depot_node),
            "shift_limit_min": _r(c.shift_limit_min, 3),
            "territory": sorted(int(s) for s in c.territory),
            "shift_min": _r(c.shift_min, 4),
            "routes": [route_section(r, f"route-{i + 1}") for i, r in enumerate(c.routes)],
        } for c in crews],
        "summary": _rounded(summary or {}),
        "history": history or {"parent": None, "changes": []},
    }


def _rounded(d):
    if isinstance(d, dict):
        return {k: _rounded(v) for k, v in d.items()}
    if isinstance(d, list):
        return [_rounded(v) for v in d]
    if isinstance(d, (float, np.floating)):
        return _r(d, 5)
    if isinstance(d, np.integer):
        return int(d)
    return d


def dumps(plan: dict) -> str:
    return json.dumps(plan, ensure_ascii=False, separators=(",", ":"), allow_nan=False) + "\n"


def write_plan(plan: dict, path: str | Path) -> Path:
    return atomic_write(path, dumps(plan))


def read_plan(path: str | Path) -> dict:
    """Read and recognise a plan file; a clear :class:`InputError` when it is not one."""
    path = Path(path)
    if not path.is_file():
        raise InputError(f"plan file '{path}' not found", "give the plan.json written by 'crewcut plan'")
    try:
        plan = json.loads(path.read_text(encoding="utf-8"))
    except (json.JSONDecodeError, UnicodeDecodeError) as exc:
        raise InputError(f"{path}: not a plan file (not valid JSON: {exc})") from None
    if not isinstance(plan, dict) or plan.get("format") != FORMAT:
        raise InputError(f"{path}: not a crewcut plan file (no \"format\": \"{FORMAT}\")",
                         "give the plan.json written by 'crewcut plan' or 'crewcut route'")
    if plan.get("version") != VERSION:
        raise InputError(f"{path}: plan format version {plan.get('version')!r} is not supported "
                         f"(this crewcut reads version {VERSION})", "re-plan with this version of crewcut")
    for key in ("network", "crews", "settings"):
        if key not in plan:
            raise InputError(f"{path}: plan file has no '{key}' section")
    problem = record_problem(plan)
    if problem:
        raise InputError(f"{path}: damaged plan file: {problem}",
                         "re-plan, or restore the file as crewcut wrote it")
    return plan


def _is_int(x) -> bool:
    return isinstance(x, int) and not isinstance(x, bool)


def _is_num(x) -> bool:
    return isinstance(x, (int, float)) and not isinstance(x, bool)


def _is_finite(x) -> bool:
    return _is_num(x) and math.isfinite(x)


_TRAVERSAL_KEYS = {"segment": _is_int, "from": _is_int, "to": _is_int, "mode": lambda x: x in ("service", "deadhead"),
                   "metres": _is_finite, "minutes": _is_finite, "turn_minutes": _is_finite}
_SEGMENT_KEYS = {"id": _is_int, "from": _is_int, "to": _is_int, "length_m": _is_finite,
                 "service_min": _is_finite, "deadhead_min": _is_finite,
                 "passes": lambda x: isinstance(x, dict) and all(_is_int(v) for v in x.values())}


def record_problem(plan: dict) -> str | None:
    """The first record not shaped or linked as crewcut writes it; None when all are sound.

    The one structural check of a plan document, shared by :func:`read_plan` and the
    reports: types, ids equal to positions, end nodes, depots, territories and
    traversals that point at existing nodes and segments, unique crew ids.
    """
    net = plan.get("network")
    if not isinstance(net, dict) or not isinstance(net.get("segments"), list) \
            or not isinstance(net.get("nodes"), list):
        return "the network section has no list of nodes and segments"
    nodes, segs = net["nodes"], net["segments"]
    for i, n in enumerate(nodes):
        if not isinstance(n, dict) or n.get("id") != i:
            return f"node {i} is malformed (node ids must equal their positions)"
    for i, seg in enumerate(segs):
        bad = [k for k, ok in _SEGMENT_KEYS.items() if not (isinstance(seg, dict) and ok(seg.get(k)))]
        if bad:
            return f"segment {i} lacks or mangles {', '.join(bad)}"
        if seg["id"] != i or not (0 <= seg["from"] < len(nodes) and 0 <= seg["to"] < len(nodes)):
            return f"segment {i} has an id or end nodes that are not in the plan"
    crews = plan.get("crews")
    if not isinstance(crews, list):
        return "'crews' is not a list"
    seen: set[str] = set()
    for c in crews:
        cid = c.get("id") if isinstance(c, dict) else None
        if not isinstance(cid, str) or not cid:
            return "a crew record has no id"
        if cid in seen:
            return f"crew id '{cid}' appears twice"
        seen.add(cid)
        if not (_is_int(c.get("depot_node")) and 0 <= c["depot_node"] < len(nodes)
                and _is_num(c.get("shift_limit_min")) and isinstance(c.get("territory"), list)
                and all(_is_int(s) and 0 <= s < len(segs) for s in c["territory"])
                and isinstance(c.get("routes"), list)):
            return f"crew '{cid}' lacks or mangles its depot, shift limit, territory or routes"
        for r in c["routes"]:
            rid = r.get("id", "?") if isinstance(r, dict) else "?"
            trs = r.get("traversals") if isinstance(r, dict) else None
            if not isinstance(trs, list) or not isinstance(r.get("totals"), dict):
                return f"crew '{cid}' route '{rid}' has no traversals or totals"
            for j, t in enumerate(trs):
                bad = [k for k, ok in _TRAVERSAL_KEYS.items() if not (isinstance(t, dict) and ok(t.get(k)))]
                if bad:
                    return f"crew '{cid}' route '{rid}': traversal {j} lacks or mangles {', '.join(bad)}"
                if not 0 <= t["segment"] < len(segs) or {t["from"], t["to"]} != {segs[t["segment"]]["from"],
                                                                                  segs[t["segment"]]["to"]}:
                    return f"crew '{cid}' route '{rid}': traversal {j} does not match its segment's end nodes"
                if not isinstance(t.get("turn", ""), str):
                    return f"crew '{cid}' route '{rid}': traversal {j} has a turn that is not text"
    return None
