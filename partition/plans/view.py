"""A checked, read-only view of a plan file for the reports (table, sheets, map, exports).

The reports read nothing but the plan document (a dict as
:func:`crewcut.plans.planfile.read_plan` returns it). This module checks up front
that the parts they use are there and consistent (every traversal names a known
segment and node, every crew id is unique, coordinates are numbers) and answers the questions all reports
ask: which crews, in which order, which points does a route pass in driving
order, what is a node called. A malformed plan raises
:class:`crewcut.solve.errors.InputError` naming the crew, route or traversal at fault.
"""
from __future__ import annotations

import math
from functools import cached_property

import numpy as np

from crewcut.solve.errors import InputError
from crewcut.solve.network.geodesy import project
from crewcut.solve.result import Traversal

from crewcut.plans.planfile import record_problem, traversals_from_section

_FIX = "re-create the plan with 'crewcut plan' or 'crewcut route'"


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
        problem = record_problem(plan)  # the one structural check, shared with read_plan
        if problem:
            raise InputError(f"{name}: {problem}", _FIX)
        if self.has_geometry:
            self._check_geometry()
        self.crews: list[dict] = plan["crews"]

    # ------------------------------------------------------------ checks
    def _check_geometry(self) -> None:
        """Node and segment coordinates as finite float arrays (kept for the maps and exports)."""
        where = f"{self.name}: network"
        nodes = _float_pairs([[n.get("lon"), n.get("lat")] for n in self.nodes])
        bad = np.flatnonzero(~np.isfinite(nodes).all(axis=1))
        if bad.size:
            raise InputError(f"{where}: node {int(bad[0])} has no valid lon/lat", _FIX)
        counts, flat = [], []
        for i, s in enumerate(self.segments):
            c = s.get("coords")
            if not isinstance(c, list) or len(c) < 2 or any(not isinstance(q, list) or len(q) != 2 for q in c):
                raise InputError(f"{where}: segment {i} has no valid coordinates (a list of two or more "
                                 f"[lon, lat])", _FIX)
            counts.append(len(c))
            flat.extend(c)
        xy = _float_pairs(flat)
        starts = np.concatenate([[0], np.cumsum(counts)]).astype(np.int64)
        bad = np.flatnonzero(~np.isfinite(xy).all(axis=1))
        if bad.size:
            seg = int(np.searchsorted(starts, bad[0], side="right") - 1)
            raise InputError(f"{where}: segment {seg} has a coordinate that is not a number", _FIX)
        self._node_ll, self._vertices, self._starts = nodes, xy, starts

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

    def steps(self, route: dict) -> list[Traversal]:
        """The route's traversals as :class:`crewcut.solve.result.Traversal` (the plan file's ``mode`` as ``service``)."""
        return list(traversals_from_section(route))

    def node_name(self, node: int) -> str:
        label = self.nodes[node].get("label") or ""
        return f"node {node}" + (f" ({label})" if label else "")

    def node_lonlat(self, node: int) -> tuple[float, float] | None:
        if not self.has_geometry:
            return None
        return float(self._node_ll[node, 0]), float(self._node_ll[node, 1])

    def seg_coords(self, seg: int, from_node: int | None = None) -> list[list[float]]:
        """Lon/lat vertices of a segment, in driving order when ``from_node`` is given."""
        self.need_geometry()
        pts = self._vertices[self._starts[seg]:self._starts[seg + 1]].tolist()
        if from_node is not None and from_node != self.segments[seg]["from"]:
            pts.reverse()
        return pts

    @cached_property
    def projected(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """Every segment vertex and node in the plan's local projection (metres), computed once.

        ``(x, y, starts, node_xy)``: the vertices of segment ``s`` are
        ``x[starts[s]:starts[s + 1]]``; ``node_xy`` is an (n, 2) array.
        """
        self.need_geometry()
        allp = np.concatenate([self._vertices, self._node_ll])
        x, y = project(allp[:, 0], allp[:, 1], self.origin)
        n = len(self._vertices)
        return x[:n], y[:n], self._starts, np.stack([x[n:], y[n:]], 1)

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


def _float_pairs(rows: list[list]) -> np.ndarray:
    """An (n, 2) float array; a pair that is not two numbers becomes NaN (so the caller can name it)."""
    try:
        return np.array(rows, dtype=float).reshape(-1, 2)
    except (TypeError, ValueError):
        def pair(r):
            try:
                return [float(r[0]), float(r[1])]
            except (TypeError, ValueError):
                return [math.nan, math.nan]
        return np.array([pair(r) for r in rows], dtype=float).reshape(-1, 2)


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
    from crewcut.plans.planfile import read_plan

    return PlanView(read_plan(path), str(path))
