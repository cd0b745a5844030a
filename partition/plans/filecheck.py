"""The structural check of a plan document: every record shaped and linked as crewcut writes it.

Run by :func:`crewcut.plans.fileformat.plan_from_dict` before a document becomes a
typed plan (the JSON Schema, :mod:`crewcut.plans.schema`, is the other half):
types, ids equal to positions, end nodes, depots, territories, traversals and
facility visits that point at existing records, unique crew ids, coordinates,
and a recorded profile that obeys the rules of a config file.
"""
from __future__ import annotations

import math

from crewcut.solve.errors import InputError
from crewcut.solve.profile import crew_id_problem, profile_from_dict

TOTALS = ("service_km", "service_min", "deadhead_km", "deadhead_min", "turn_min", "total_min", "u_turns",
           "across_turns")


def _is_int(x) -> bool:
    return isinstance(x, int) and not isinstance(x, bool)


def _is_num(x) -> bool:
    return isinstance(x, (int, float)) and not isinstance(x, bool)


def is_finite(x) -> bool:
    return _is_num(x) and math.isfinite(x)


_TRAVERSAL_KEYS = {"segment": _is_int, "from": _is_int, "to": _is_int, "mode": lambda x: x in ("service", "deadhead"),
                   "metres": is_finite, "minutes": is_finite, "turn_minutes": is_finite}
_SEGMENT_KEYS = {"id": _is_int, "from": _is_int, "to": _is_int, "length_m": is_finite,
                 "service_min": is_finite, "deadhead_min": is_finite,
                 "passes": lambda x: isinstance(x, dict) and all(_is_int(v) for v in x.values())}


def record_problem(plan: dict) -> str | None:
    """The first record not shaped or linked as crewcut writes it; None when all are sound.

    The structural check of a plan document, run by :func:`plan_from_dict`: types,
    ids equal to positions, end nodes, depots, territories and traversals that
    point at existing nodes and segments, unique crew ids.
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
    for i, c in enumerate(crews):
        cid = c.get("id") if isinstance(c, dict) else None
        if not isinstance(cid, str) or not cid:
            return "a crew record has no id"
        problem = crew_id_problem(cid)  # what the config allows (printable, one line, short)
        if problem:
            return f"crews[{i}]: {problem}"
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
                if "wait_minutes" in t and not (is_finite(t["wait_minutes"]) and t["wait_minutes"] >= 0):
                    return f"crew '{cid}' route '{rid}': traversal {j} has a wait that is not 0 or more minutes"
            problem = _visits_problem(r, len(trs))
            if problem:
                return f"crew '{cid}' route '{rid}': {problem}"
            if "day" in r and not (isinstance(r["day"], str) and is_finite(r.get("start_min"))
                                   and is_finite(r["totals"].get("wait_min", 0.0))):
                return f"crew '{cid}' route '{rid}' has a day but no clock start (start_min) or wait total"
            bad = [k for k in TOTALS if not (is_finite(r["totals"].get(k)) if k.endswith(("_km", "_min"))
                                              else _is_int(r["totals"].get(k)))]
            if bad:
                return f"crew '{cid}' route '{rid}': totals lack or mangle {', '.join(bad)}"
    return _geometry_problem(net) or _settings_problem(plan.get("settings"))


def _visits_problem(r: dict, n: int) -> str | None:
    vs = r.get("visits", [])
    if not isinstance(vs, list):
        return "visits is not a list"
    last = 0
    for j, v in enumerate(vs):
        ok = (isinstance(v, dict) and _is_int(v.get("after")) and last <= v["after"] <= n
              and isinstance(v.get("facility"), str) and _is_int(v.get("node"))
              and all(is_finite(v.get(k)) and v[k] >= 0 for k in ("arrive_min", "wait_min", "minutes"))
              and isinstance(v.get("resets"), list) and all(isinstance(x, str) for x in v["resets"]))
        if not ok:
            return f"visit {j} lacks or mangles after, facility, node, arrive_min, wait_min, minutes or resets"
        last = v["after"]
    if vs and not is_finite(r["totals"].get("visit_min")):
        return "has visits but no visit_min total"
    return None


def _pair(q) -> bool:
    return isinstance(q, list) and len(q) == 2 and all(is_finite(v) for v in q)


def _geometry_problem(net: dict) -> str | None:
    """Node and segment coordinates of a network with geometry: finite lon/lat pairs."""
    if not net.get("has_geometry", False):
        return None
    for i, n in enumerate(net["nodes"]):
        if not (is_finite(n.get("lon")) and is_finite(n.get("lat"))):
            return f"network: node {i} has no valid lon/lat"
    for i, s in enumerate(net["segments"]):
        c = s.get("coords")
        if not isinstance(c, list) or len(c) < 2 or any(not isinstance(q, list) or len(q) != 2 for q in c):
            return f"network: segment {i} has no valid coordinates (a list of two or more [lon, lat])"
        if not all(_pair(q) for q in c):
            return f"network: segment {i} has a coordinate that is not a number"
    return None


# Where each recorded profile setting lives in a config file (crewcut.solve.profile.profile_from_dict).
_PROFILE_TABLES = {"turn_penalty_s": None, "service_speed_kmh": None, "deadhead_speed_kmh": None,
                   "default_service": None, "priority": None, "snap_tolerance_m": "network", "split_at_touch": "network",
                   "vehicle": None, "osm_highways": ("osm", "highways"),
                   "osm_keep_service_kinds": ("osm", "keep_service_kinds"), "capacity": None, "facilities": None}


def _settings_problem(settings) -> str | None:
    if not isinstance(settings, dict) or not isinstance(settings.get("profile", {}), dict):
        return "the settings section has no profile record"
    prof = settings.get("profile", {})
    traffic = prof.get("traffic", "right")
    if traffic not in ("right", "left"):
        return f"settings.profile.traffic is {traffic!r} (it must be \"right\" or \"left\")"
    # the recorded profile obeys the rules of a config file (types, ranges, known keys)
    data: dict = {}
    for key, value in prof.items():
        table = _PROFILE_TABLES.get(key, "profile")
        if table is None:
            data[key] = value
        elif isinstance(table, tuple):
            data.setdefault(table[0], {})[table[1]] = value
        else:
            data.setdefault(table, {})[key] = value
    try:
        profile_from_dict(data, "settings")
    except InputError as exc:
        return f"the recorded profile is not a valid work profile: {exc.message}"
    return None
