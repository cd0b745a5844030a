"""The street network model: one immutable object, built once, read while planning.

Nodes are intersections and street ends; segments are the pieces of street between
them. Node and segment ids are their array positions (0..n-1, 0..m-1), which keeps
every hot loop in numpy. The id each segment had in the source file is kept in
``seg_source`` so that every message can name the user's own feature.

Direction convention: a one-way segment is always stored in its legal direction
(``seg_u -> seg_v``); readers reverse geometries drawn against the traffic
(OpenStreetMap's ``oneway=-1``) before building the model.

Units: metres, minutes, degrees (WGS84 lon/lat) for input coordinates, and a local
metric projection (``node_x``, ``node_y``, metres) for anything geometric.
"""
from __future__ import annotations

import hashlib
from dataclasses import dataclass, field
from functools import cached_property

import numpy as np

# Service kinds, stored as small ints in ``Network.seg_service``.
SERVICE_NONE = 0  # drive-through only, no work on it
SERVICE_ONE_PASS = 1  # one pass; either direction on a two-way street
SERVICE_BOTH_SIDES = 2  # one pass per curb, each with traffic
SERVICE_EACH_DIRECTION = 3  # one pass per direction of travel (ploughing lanes)
# One curb only, left or right as seen along seg_u -> seg_v: one pass in the direction that
# keeps that curb on the working side (see crewcut.solve.costs); a street whose curbs are posted
# for different times is stored as two parallel segments, one per curb.
SERVICE_RIGHT_CURB = 4
SERVICE_LEFT_CURB = 5

SERVICE_NAMES = {
    "none": SERVICE_NONE,
    "one_pass": SERVICE_ONE_PASS,
    "both_sides": SERVICE_BOTH_SIDES,
    "each_direction": SERVICE_EACH_DIRECTION,
    "right_curb": SERVICE_RIGHT_CURB,
    "left_curb": SERVICE_LEFT_CURB,
}
SERVICE_LABELS = {v: k for k, v in SERVICE_NAMES.items()}


@dataclass(frozen=True)
class Finding:
    """One problem or remark about the input, tied to the user's own feature id."""

    severity: str  # "error" (not plannable) | "warning" (repaired or worth a look)
    feature: str  # source feature id, segment id or setting name
    message: str
    hint: str = ""


@dataclass(frozen=True)
class RestrictionNote:
    """What became of one turn restriction of the source (OpenStreetMap ``type=restriction``).

    ``applied``: it bans ``bans`` turns of this network (0 when the turn it forbids
    cannot be driven anyway). Otherwise ``reason`` says why it was not applied (a
    key of :data:`crewcut.solve.readers.osmturns.NOT_APPLIED`) and ``detail`` says
    it in words; nothing was guessed.
    """

    source: str  # "relation/123"
    kind: str  # the restriction value for the vehicle, e.g. "no_left_turn" ("" when none applies)
    applied: bool
    reason: str = ""
    detail: str = ""
    bans: int = 0


@dataclass
class RawLine:
    """One line feature as a reader found it, before topology repair.

    Readers produce these; :func:`crewcut.solve.network.repair.build_network` turns them into a
    :class:`Network`. ``coords`` is an (k, 2) array of lon/lat, or ``None`` for
    inputs without geometry (CSV edge lists), which then give ``from_label``,
    ``to_label`` and ``length_m``.
    """

    source_id: str
    coords: np.ndarray | None
    name: str = ""
    road_class: str = ""
    oneway: int = 0  # 0 two-way, 1 one-way in drawn direction (readers reverse -1)
    service: str | None = None  # None: the profile's default for the road class
    speed_kmh: float | None = None
    from_label: str | None = None
    to_label: str | None = None
    length_m: float | None = None
    closed: bool = False  # cannot be driven or served (works, event)
    # Posted sweeping times (crewcut.solve.calendar.postings.Posting) keyed "both", "left", "right";
    # left and right as seen along coords (from_label -> to_label); readers swap them when they reverse a line
    posted: dict = field(default_factory=dict)


@dataclass(frozen=True, eq=False)
class Network:
    """A street network. Build it with :func:`crewcut.solve.network.repair.build_network`.

    Attributes are numpy arrays indexed by node id or segment id.
    """

    node_lon: np.ndarray  # float64 (n,), NaN when the input had no geometry
    node_lat: np.ndarray
    node_x: np.ndarray  # float64 (n,), metres in the local projection (a path-length layout without geometry)
    node_y: np.ndarray
    node_label: list[str]  # the source's node id (OSM node, CSV label) or ""
    seg_source: list[str]  # source feature id of each segment
    seg_u: np.ndarray  # int64 (m,)
    seg_v: np.ndarray  # int64 (m,)
    seg_length: np.ndarray  # float64 (m,), metres (geodesic on WGS84)
    seg_oneway: np.ndarray  # bool (m,): only u -> v is legal
    seg_service: np.ndarray  # int8 (m,), SERVICE_* code
    seg_class: list[str]
    seg_name: list[str]
    seg_speed_kmh: np.ndarray  # float64 (m,), NaN when not given
    seg_closed: np.ndarray  # bool (m,): cannot be driven or served
    seg_coords: list[np.ndarray | None]  # (k, 2) lon/lat per segment, u end first
    has_geometry: bool = True
    origin: tuple[float, float] = (0.0, 0.0)  # lon/lat of the local projection's centre
    findings: tuple[Finding, ...] = field(default_factory=tuple)
    # Forbidden turns (legal restrictions such as OpenStreetMap's type=restriction):
    # rows (arrive_seg, arrive_fwd, depart_seg, depart_fwd), arriving along arrive_seg and
    # leaving along depart_seg at their shared node; *_fwd is 1 for seg_u -> seg_v.
    turn_bans: np.ndarray = field(default_factory=lambda: np.zeros((0, 4), np.int64))
    turn_ban_source: tuple[str, ...] = ()  # the restriction(s) each row comes from ("relation/123")
    # Posted sweeping times (crewcut.solve.calendar.postings.Posting or None) per segment; empty: none
    # posted anywhere. A segment's posting holds for every pass it needs.
    seg_posting: tuple = ()
    # every restriction the reader found and what became of it (not in the fingerprint: the bans are)
    restrictions: tuple[RestrictionNote, ...] = ()

    # ----------------------------------------------------------------- sizes
    @property
    def n_nodes(self) -> int:
        return int(self.node_lon.shape[0])

    @property
    def n_segments(self) -> int:
        return int(self.seg_u.shape[0])

    def posting(self, s: int):
        """The posted sweeping time of segment ``s`` (a Posting), or None."""
        return self.seg_posting[s] if self.seg_posting else None

    # ------------------------------------------------------------ adjacency
    def arcs(self, ignore_oneway: bool = False) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """Legal driving directions of every usable (not closed) segment.

        Returns ``(tail, head, segment, forward)`` arrays: one row per legal
        direction; ``forward`` is True for ``seg_u -> seg_v``.
        """
        key = bool(ignore_oneway)
        cache = self._arc_cache
        if key not in cache:
            usable = np.flatnonzero(~self.seg_closed)
            back = usable if ignore_oneway else usable[~self.seg_oneway[usable]]
            tail = np.concatenate([self.seg_u[usable], self.seg_v[back]])
            head = np.concatenate([self.seg_v[usable], self.seg_u[back]])
            seg = np.concatenate([usable, back])
            fwd = np.concatenate([np.ones(usable.size, bool), np.zeros(back.size, bool)])
            cache[key] = (tail, head, seg, fwd)
        return cache[key]

    @cached_property
    def _arc_cache(self) -> dict:
        return {}

    @cached_property
    def bearings(self) -> tuple[np.ndarray, np.ndarray]:
        """Compass bearings in degrees (0 = north, clockwise) of each segment.

        ``start[s]``: heading when leaving ``seg_u`` along the segment;
        ``end[s]``: heading when arriving at ``seg_v``. Driving the segment
        backwards reverses both by 180 degrees. NaN without geometry.
        """
        m = self.n_segments
        start = np.full(m, np.nan)
        end = np.full(m, np.nan)
        if not self.has_geometry:
            return start, end
        first = np.array([c[0] for c in self.seg_coords])
        second = np.array([c[1] for c in self.seg_coords])
        before_last = np.array([c[-2] for c in self.seg_coords])
        last = np.array([c[-1] for c in self.seg_coords])
        start = _bearing(first, second)
        end = _bearing(before_last, last)
        return start, end

    # -------------------------------------------------------- identity, io
    @cached_property
    def fingerprint(self) -> str:
        """SHA-256 over topology, lengths, directions, service, closures and source ids.

        Road classes and speed caps are not covered, so two networks with the same
        fingerprint may still differ in minutes; compare per-segment minutes where that matters.
        """
        h = hashlib.sha256()
        for arr in (self.seg_u, self.seg_v):
            h.update(np.ascontiguousarray(arr, dtype="<i8").tobytes())
        h.update(np.round(self.seg_length, 3).astype("<f8").tobytes())
        for arr in (self.seg_oneway, self.seg_closed):
            h.update(np.ascontiguousarray(arr, dtype="u1").tobytes())
        h.update(np.ascontiguousarray(self.seg_service, dtype="u1").tobytes())
        h.update("\x1f".join(self.seg_source).encode())
        if self.turn_bans.size:  # networks without bans keep the fingerprint they always had
            h.update(np.ascontiguousarray(self.turn_bans, dtype="<i8").tobytes())
        if any(p is not None for p in self.seg_posting):  # likewise for networks without postings
            h.update("\x1f".join("" if p is None else f"{p.day} {p.open_min} {p.close_min}"
                                  for p in self.seg_posting).encode())
        return h.hexdigest()

    def to_networkx(self):
        """Export as a ``networkx.MultiDiGraph``: one edge per legal direction.

        Edge keys are segment ids; attributes ``segment``, ``length`` (m),
        ``oneway``, ``name``, ``road_class``, ``service``, ``source``. Node
        attributes ``lon``, ``lat``, ``x``, ``y``. Closed segments are left out.
        """
        import networkx as nx

        g = nx.MultiDiGraph()
        for i in range(self.n_nodes):
            g.add_node(i, lon=float(self.node_lon[i]), lat=float(self.node_lat[i]),
                       x=float(self.node_x[i]), y=float(self.node_y[i]))
        tail, head, seg, _ = self.arcs()
        for t, h, s in zip(tail.tolist(), head.tolist(), seg.tolist()):
            g.add_edge(t, h, key=s, segment=s, length=float(self.seg_length[s]),
                       oneway=bool(self.seg_oneway[s]), name=self.seg_name[s],
                       road_class=self.seg_class[s],
                       service=SERVICE_LABELS[int(self.seg_service[s])],
                       source=self.seg_source[s])
        return g

    def nearest_node(self, lon: float, lat: float, usable_only: bool = True) -> tuple[int, float]:
        """The node nearest to a lon/lat point and its distance in metres.

        With ``usable_only`` only nodes touching a usable segment qualify.
        """
        from crewcut.solve.network.geodesy import project

        if not self.has_geometry:
            raise ValueError("this network has no coordinates")
        x, y = project(np.array([lon]), np.array([lat]), self.origin)
        cand = np.arange(self.n_nodes)
        if usable_only:
            open_ = ~self.seg_closed
            mask = np.zeros(self.n_nodes, bool)
            mask[self.seg_u[open_]] = True
            mask[self.seg_v[open_]] = True
            cand = np.flatnonzero(mask)
        if cand.size == 0:
            raise ValueError("the network has no usable segment")
        d = np.hypot(self.node_x[cand] - x[0], self.node_y[cand] - y[0])
        i = int(np.argmin(d))  # argmin takes the lowest id on ties: deterministic
        return int(cand[i]), float(d[i])


def _bearing(p: np.ndarray, q: np.ndarray) -> np.ndarray:
    """Initial compass bearing from p to q (lon/lat rows), degrees in [0, 360)."""
    lon1, lat1 = np.radians(p[:, 0]), np.radians(p[:, 1])
    lon2, lat2 = np.radians(q[:, 0]), np.radians(q[:, 1])
    dlon = lon2 - lon1
    x = np.sin(dlon) * np.cos(lat2)
    y = np.cos(lat1) * np.sin(lat2) - np.sin(lat1) * np.cos(lat2) * np.cos(dlon)
    return np.degrees(np.arctan2(x, y)) % 360.0
