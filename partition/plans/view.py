"""A thin helper the reports (table, sheets, map, exports) build from a :class:`crewcut.plans.model.Plan`.

The plan is already checked when it is read (:func:`crewcut.plans.planfile.read_plan`
refuses damaged files, naming the record), so this module only answers the
questions all reports ask: which crews, in which order, what is a node called,
which points does a route pass in driving order, where is everything in the
plan's local projection.
"""
from __future__ import annotations

from functools import cached_property

import numpy as np

from crewcut.solve.errors import InputError
from crewcut.solve.network.geodesy import project
from crewcut.solve.result import Route, Traversal

from crewcut.plans.model import CrewPlan, Plan, SegmentRecord


class PlanView:
    """Geometry arrays and lookups over a plan. Build with :func:`view` or :func:`load`."""

    def __init__(self, plan: Plan, name: str = "plan") -> None:
        self.plan = plan
        self.name = name
        net = plan.network
        self.nodes = net.nodes
        self.segments: tuple[SegmentRecord, ...] = net.segments
        self.has_geometry = net.has_geometry
        # a title for reports that depends on the plan only, not on where the file lies
        self.title = net.source or "street plan"
        self.origin = (float(net.origin[0]), float(net.origin[1]))
        self.traffic = plan.settings.profile.traffic
        self.summary = plan.summary
        self.crews: tuple[CrewPlan, ...] = plan.crews
        if self.has_geometry:
            self._node_ll = np.array([[n.lon, n.lat] for n in self.nodes], dtype=float).reshape(-1, 2)
            counts = [len(s.coords) for s in self.segments]
            self._vertices = np.array([q for s in self.segments for q in s.coords], dtype=float).reshape(-1, 2)
            self._starts = np.concatenate([[0], np.cumsum(counts)]).astype(np.int64)

    # ------------------------------------------------------------ lookups
    def crew_ids(self) -> list[str]:
        return [c.id for c in self.crews]

    def select(self, ids: list[str] | None) -> list[CrewPlan]:
        """The crews named in ``ids`` (plan order when ``ids`` is empty); unknown ids are an error."""
        if not ids:
            return list(self.crews)
        by_id = {c.id: c for c in self.crews}
        out = []
        for cid in ids:
            if cid not in by_id:
                raise InputError(f"{self.name}: no crew with id '{cid}'",
                                 f"crews in this plan: {', '.join(self.crew_ids()) or '(none)'}")
            if by_id[cid] not in out:
                out.append(by_id[cid])
        return out

    def steps(self, route: Route) -> list[Traversal]:
        """The route's traversals in driving order."""
        return list(route.traversals)

    def node_name(self, node: int) -> str:
        label = self.nodes[node].label
        return f"node {node}" + (f" ({label})" if label else "")

    def node_lonlat(self, node: int) -> tuple[float, float] | None:
        if not self.has_geometry:
            return None
        return float(self._node_ll[node, 0]), float(self._node_ll[node, 1])

    def seg_coords(self, seg: int, from_node: int | None = None) -> list[list[float]]:
        """Lon/lat vertices of a segment, in driving order when ``from_node`` is given."""
        self.need_geometry()
        pts = self._vertices[self._starts[seg]:self._starts[seg + 1]].tolist()
        if from_node is not None and from_node != self.segments[seg].from_node:
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

    def route_coords(self, route: Route) -> list[list[float]]:
        """The route as one continuous lon/lat polyline in driving order (joints not repeated)."""
        out: list[list[float]] = []
        for st in route.traversals:
            pts = self.seg_coords(st.segment, st.from_node)
            if out and out[-1] == pts[0]:
                pts = pts[1:]
            out.extend(pts)
        return out

    def need_geometry(self) -> None:
        if not self.has_geometry:
            raise InputError(f"{self.name}: the plan's network has no coordinates (it came from an edge list)",
                             "maps, GeoJSON and GPX need coordinates; plan from GeoJSON or OpenStreetMap data")


def view(plan: Plan | PlanView, name: str = "plan") -> PlanView:
    """A :class:`PlanView` on ``plan`` (a view is returned as it is)."""
    return plan if isinstance(plan, PlanView) else PlanView(plan, name)


def load(path: str) -> PlanView:
    """Read and check a plan file (a clear :class:`InputError` when it is not one) and view it."""
    from crewcut.plans.planfile import read_plan

    return PlanView(read_plan(path), str(path))
