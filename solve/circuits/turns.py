"""Turns between an arriving traversal and a departing one at a node.

Problem
-------
A crew that arrives at a node along one segment and leaves along another makes a
turn. Heavy vehicles avoid U-turns, and a turn across oncoming traffic (a left
turn where vehicles keep right) costs more time and risk than a turn with the
traffic. The route engine needs, for any number of (arrival, departure) pairs,
the kind of turn and its penalty in seconds.

Method
------
The heading on arrival and the heading on departure come from the segments'
compass bearings at the node (:attr:`crewcut.solve.network.model.Network.bearings`); a
traversal driven backwards (``v -> u``) has its bearings turned by 180 degrees.
The signed heading change ``d`` in [-180, 180) (positive = clockwise = to the
right) is classified:

* leaving along the same segment it arrived on, the other way round: U-turn;
* ``|d| >= UTURN_MIN_DEG``: U-turn (a hairpin is driven like a U-turn);
* ``|d| <= STRAIGHT_MAX_DEG``: straight on;
* otherwise a right turn (``d > 0``) is *with traffic* in right-hand traffic and
  *across traffic* in left-hand traffic, and a left turn the other way round.

Without geometry (CSV edge lists) bearings are NaN: only a U-turn back along the
same segment can be told; every other turn is ``"unknown"`` and costs nothing,
so turn-aware routing on such networks only avoids those U-turns.

Everything is vectorised over numpy arrays of pairs.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from crewcut.solve.network.model import Network
from crewcut.solve.profile import Profile
from crewcut.solve.result import TURNS

# Integer codes of the turn kinds, positions in crewcut.solve.result.TURNS.
START, STRAIGHT, WITH_TRAFFIC, ACROSS_TRAFFIC, U_TURN, UNKNOWN = (TURNS.index(k) for k in (
    "start", "straight", "with_traffic", "across_traffic", "u_turn", "unknown"))

# Thresholds on the heading change, degrees: common practice, no source.
STRAIGHT_MAX_DEG = 30.0  # up to this much either way still reads as "straight on"
UTURN_MIN_DEG = 150.0  # from this much on, the vehicle turns back on itself


@dataclass(frozen=True)
class TurnModel:
    """Headings of every segment and the penalty of every turn kind.

    Build it with :meth:`from_network`. ``penalty_s[code]`` is the penalty in
    seconds of turn kind ``code`` (``START`` and ``UNKNOWN`` cost nothing).
    """

    start_bearing: np.ndarray  # (m,) degrees, heading leaving seg_u; NaN without geometry
    end_bearing: np.ndarray  # (m,) degrees, heading arriving at seg_v
    right_hand: bool  # True: vehicles keep right, so right turns go with traffic
    penalty_s: np.ndarray  # (len(TURNS),) seconds per turn kind

    @classmethod
    def from_network(cls, net: Network, profile: Profile) -> "TurnModel":
        start, end = net.bearings
        pen = np.zeros(len(TURNS))
        for kind, sec in profile.turn_penalty_s.items():
            pen[TURNS.index(kind)] = float(sec)
        return cls(np.asarray(start, float), np.asarray(end, float), profile.traffic != "left", pen)

    # ------------------------------------------------------------------ headings
    def arrival_heading(self, seg: np.ndarray, forward: np.ndarray) -> np.ndarray:
        """Heading (degrees) when arriving at the end of a traversal."""
        return np.where(forward, self.end_bearing[seg], (self.start_bearing[seg] + 180.0) % 360.0)

    def departure_heading(self, seg: np.ndarray, forward: np.ndarray) -> np.ndarray:
        """Heading (degrees) when leaving the start of a traversal."""
        return np.where(forward, self.start_bearing[seg], (self.end_bearing[seg] + 180.0) % 360.0)

    # ------------------------------------------------------------------ classify
    def classify(self, arr_seg, arr_fwd, dep_seg, dep_fwd) -> np.ndarray:
        """Turn codes (int8) for arrays of (arriving, departing) traversals.

        ``*_seg`` are segment ids, ``*_fwd`` True when driven ``seg_u -> seg_v``.
        """
        arr_seg = np.asarray(arr_seg, np.int64)
        dep_seg = np.asarray(dep_seg, np.int64)
        arr_fwd = np.asarray(arr_fwd, bool)
        dep_fwd = np.asarray(dep_fwd, bool)
        a = self.arrival_heading(arr_seg, arr_fwd)
        d = self.departure_heading(dep_seg, dep_fwd)
        change = (d - a + 540.0) % 360.0 - 180.0  # in [-180, 180): > 0 turns right
        mag = np.abs(change)
        right = change > 0
        with_traffic = right if self.right_hand else ~right
        code = np.where(with_traffic, WITH_TRAFFIC, ACROSS_TRAFFIC)
        code = np.where(mag <= STRAIGHT_MAX_DEG, STRAIGHT, code)
        code = np.where(mag >= UTURN_MIN_DEG, U_TURN, code)
        code = np.where(np.isnan(change), UNKNOWN, code)
        # back along the same segment: a U-turn whatever the geometry (or its absence)
        code = np.where((arr_seg == dep_seg) & (arr_fwd != dep_fwd), U_TURN, code)
        return code.astype(np.int8)

    def seconds(self, codes: np.ndarray) -> np.ndarray:
        """Penalty seconds of turn codes."""
        return self.penalty_s[np.asarray(codes, np.int64)]

    def pair_seconds(self, arr_seg, arr_fwd, dep_seg, dep_fwd) -> np.ndarray:
        """Penalty seconds for arrays of (arriving, departing) traversals."""
        return self.seconds(self.classify(arr_seg, arr_fwd, dep_seg, dep_fwd))


def turns_along_walk(net: Network, model: TurnModel, walk: list) -> list:
    """A walk of :class:`~crewcut.solve.result.Traversal` with every turn classified again from its
    neighbours (the first is the start): for walks joined from pieces (window blocks, trips)."""
    from dataclasses import replace

    if not walk:
        return list(walk)
    seg = np.array([t.segment for t in walk], np.int64)
    fwd = np.array([t.from_node for t in walk], np.int64) == net.seg_u[seg]
    codes = np.zeros(len(walk), np.int64)
    codes[1:] = model.classify(seg[:-1], fwd[:-1], seg[1:], fwd[1:])
    sec = model.seconds(codes)
    sec[0] = 0.0
    return [replace(t, turn=TURNS[int(c)], turn_minutes=float(x) / 60.0) for t, c, x in zip(walk, codes, sec)]
