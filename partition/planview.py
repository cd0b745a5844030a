"""A checked, read-only view of a plan file for the reports (table, sheets, map, exports).

The reports read nothing but the plan document (a dict as
:func:`partition.planfile.read_plan` returns it). This module checks up front
that the parts they use are there and consistent (every traversal names a known
segment and node, every crew id is unique) and answers the questions all reports
ask: which crews, in which order, which points does a route pass in driving
order, what is a node called. A malformed plan raises
:class:`solve.errors.InputError` naming the crew, route or traversal at fault.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

from solve.errors import InputError

_FIX = "re-create the plan with 'crewcut plan' or 'crewcut route'"


@dataclass(frozen=True)
class Step:
    """One traversal of a route, with the facts reports need."""

    segment: int
    from_node: int
    to_node: int
    service: bool
    metres: float
    minutes: float  # driving or service minutes, turn excluded
    turn: str
    turn_minutes: float


class PlanView:
    """Checked access to a plan document. Build with :func:`view`."""

    def __init__(self, plan: dict, name: str = "plan") -> None:
        self.plan = plan
        self.name = name
        net = _get(plan, "network", dict, name)
        self.nodes: list[dict] = _get(net, "nodes", list, f"{name}: network")
        self.segments: list[dict] = _get(net, "segments", list, f"{name}: network")
        self.has_geometry = bool(net.get("has_geometry", False))
        # a title for reports that depends on the plan only, not on where the file lies
        self.title = str(net.get("source") or "") or "street plan"
        origin = net.get("origin") or [0.0, 0.0]
        self.origin = (float(origin[0]), float(origin[1]))
        settings = plan.get("settings") or {}
        profile = settings.get("profile") or {}
        self.traffic = profile.get("traffic", "right")
        if self.traffic not in ("right", "left"):
            raise InputError(f"{name}: settings.profile.traffic is {self.traffic!r}", "it must be \"right\" or \"left\"")
        self.summary: dict = plan.get("summary") or {}
        for i, s in enumerate(self.segments):
            if not isinstance(s, dict) or s.get("id") != i:
                raise InputError(f"{name}: segment at position {i} has id {s.get('id') if isinstance(s, dict) else s!r}",
                                 "segment ids must equal their positions; " + _FIX)
        for i, n in enumerate(self.nodes):
            if not isinstance(n, dict) or n.get("id") != i:
                raise InputError(f"{name}: node at position {i} is malformed", "node ids must equal their positions; " + _FIX)
        self.crews: list[dict] = _get(plan, "crews", list, name)
        seen: set[str] = set()
        for c in self.crews:
            cid = c.get("id") if isinstance(c, dict) else None
            if not isinstance(cid, str) or not cid:
                raise InputError(f"{name}: a crew has no id", _FIX)
            if cid in seen:
                raise InputError(f"{name}: crew id '{cid}' appears twice", "crew ids must be unique; " + _FIX)
            seen.add(cid)
            self._check_crew(c)

    # ------------------------------------------------------------ checks
    def _check_crew(self, c: dict) -> None:
        where = f"{self.name}: crew '{c['id']}'"
        depot = c.get("depot_node")
        if not isinstance(depot, int) or not 0 <= depot < len(self.nodes):
            raise InputError(f"{where}: depot node {depot!r} is not a node of the plan", _FIX)
        terr = c.get("territory")
        if not isinstance(terr, list) or any(not isinstance(s, int) or not 0 <= s < len(self.segments) for s in terr):
            raise InputError(f"{where}: territory lists a segment id that is not in the plan", _FIX)
        routes = c.get("routes")
        if not isinstance(routes, list):
            raise InputError(f"{where}: no 'routes' list", _FIX)
        for r in routes:
            rid = r.get("id", "?") if isinstance(r, dict) else "?"
            trav = r.get("traversals") if isinstance(r, dict) else None
            if not isinstance(trav, list):
                raise InputError(f"{where}, route '{rid}': no 'traversals' list", _FIX)
            for k, t in enumerate(trav):
                try:
                    s, a, b = t["segment"], t["from"], t["to"]
                    seg = self.segments[s]
                    ok = {a, b} == {seg["from"], seg["to"]} and t["mode"] in ("service", "deadhead")
                    ok = ok and math.isfinite(float(t["metres"])) and math.isfinite(float(t["minutes"]))
                except (KeyError, TypeError, IndexError, ValueError):
                    ok = False
                if not ok:
                    raise InputError(f"{where}, route '{rid}': traversal {k} is malformed or does not match "
                                     f"its segment's endpoints", _FIX)

    # ------------------------------------------------------------ lookups
    def crew_ids(self) -> list[str]:
        return [c["id"] for c in self.crews]

    def select(self, ids: list[str] | None) -> list[dict]:
        """The crews named in ``ids`` (plan order when ``ids`` is empty); unknown ids are an error."""
        if not ids:
            return list(self.crews)
        by_id = {c["id"]: c for c in self.crews}
        out = []
        for cid in ids:
            if cid not in by_id:
                raise InputError(f"{self.name}: no crew with id '{cid}'",
                                 f"crews in this plan: {', '.join(self.crew_ids()) or '(none)'}")
            if by_id[cid] not in out:
                out.append(by_id[cid])
        return out

    def steps(self, route: dict) -> list[Step]:
        return [Step(int(t["segment"]), int(t["from"]), int(t["to"]), t["mode"] == "service",
                     float(t["metres"]), float(t["minutes"]), str(t.get("turn", "unknown")),
                     float(t.get("turn_minutes", 0.0))) for t in route["traversals"]]

    def node_name(self, node: int) -> str:
        label = self.nodes[node].get("label") or ""
        return f"node {node}" + (f" ({label})" if label else "")

    def node_lonlat(self, node: int) -> tuple[float, float] | None:
        n = self.nodes[node]
        if n.get("lon") is None or n.get("lat") is None:
            return None
        return float(n["lon"]), float(n["lat"])

    def seg_coords(self, seg: int, from_node: int | None = None) -> list[list[float]]:
        """Lon/lat vertices of a segment, in driving order when ``from_node`` is given."""
        s = self.segments[seg]
        coords = s.get("coords")
        if coords is None:
            self.need_geometry()
        pts = [[float(x), float(y)] for x, y in coords]
        if from_node is not None and from_node != s["from"]:
            pts.reverse()
        return pts

    def route_coords(self, route: dict) -> list[list[float]]:
        """The route as one continuous lon/lat polyline in driving order (joints not repeated)."""
        out: list[list[float]] = []
        for st in self.steps(route):
            pts = self.seg_coords(st.segment, st.from_node)
            if out and out[-1] == pts[0]:
                pts = pts[1:]
            out.extend(pts)
        return out

    def need_geometry(self) -> None:
        if not self.has_geometry:
            raise InputError(f"{self.name}: the plan's network has no coordinates (it came from an edge list)",
                             "maps, GeoJSON and GPX need coordinates; plan from GeoJSON or OpenStreetMap data")


def _get(d: dict, key: str, typ: type, where: str):
    v = d.get(key) if isinstance(d, dict) else None
    if not isinstance(v, typ):
        raise InputError(f"{where}: no '{key}' section of the expected kind", _FIX)
    return v


def view(plan: dict, name: str = "plan") -> PlanView:
    """Check ``plan`` and return a :class:`PlanView` on it."""
    return PlanView(plan, name)


def load(path: str) -> PlanView:
    """Read and check a plan file (a clear :class:`InputError` when it is not one)."""
    from .planfile import read_plan

    return PlanView(read_plan(path), str(path))
