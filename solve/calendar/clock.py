"""Clock times along a route, and the waits posted windows call for.

The rule every part of crewcut uses (the route engine, ``verify``, the sheets):
a route starts at its ``start_min`` (minutes after midnight); each traversal
first waits its ``wait_minutes``, then makes its turn (``turn_minutes``), then
drives (``minutes``); the next traversal starts where it ends. A pass inside a
posted window must start driving no earlier than the window opens and end no
later than it closes.
"""
from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from crewcut.solve.result import Traversal

TOL_MIN = 0.01  # slack on window edges, minutes: plan files round each step to 1e-5 min, and sums drift


@dataclass(frozen=True)
class Timing:
    """Clock minutes at which each traversal starts and ends driving (after its wait and turn)."""

    drive_start: np.ndarray
    drive_end: np.ndarray


def timing(traversals, start_min: float) -> Timing:
    """The drive start and end clock times of every traversal (the module's rule)."""
    w = np.array([t.wait_minutes for t in traversals], float)
    tm = np.array([t.turn_minutes for t in traversals], float)
    mi = np.array([t.minutes for t in traversals], float)
    step = w + tm + mi
    before = float(start_min) + np.concatenate([[0.0], np.cumsum(step)[:-1]]) if len(step) else np.zeros(0)
    ds = before + w + tm
    return Timing(ds, ds + mi)


def with_waits(traversals: list[Traversal], start_min: float,
               windows: dict[int, tuple[int, int]]) -> tuple[list[Traversal], float]:
    """Traversals with the least waits that let every windowed pass start when its window opens.

    ``windows``: segment -> (open, close) clock minutes, for the segments whose service
    passes are posted. Returns the traversals (with ``wait_minutes`` set) and the total
    lateness in minutes (0 when every windowed pass ends by its window's close).
    """
    out = []
    t = float(start_min)
    late = 0.0
    for x in traversals:
        wait = 0.0
        win = windows.get(x.segment) if x.service else None
        if win is not None and t + x.turn_minutes < win[0]:
            wait = win[0] - (t + x.turn_minutes)
        t += wait + x.turn_minutes + x.minutes
        if win is not None:
            late += max(0.0, t - win[1])
        out.append(replace(x, wait_minutes=wait) if wait or x.wait_minutes else x)
    return out, late


def window_misses(traversals, start_min: float, windows: dict[int, tuple[int, int]]) -> list[int]:
    """Positions of windowed service passes that start before their window or end after it."""
    tm = timing(traversals, start_min)
    bad = []
    for i, x in enumerate(traversals):
        win = windows.get(x.segment) if x.service else None
        if win is None:
            continue
        if tm.drive_start[i] < win[0] - TOL_MIN or tm.drive_end[i] > win[1] + TOL_MIN:
            bad.append(i)
    return bad
