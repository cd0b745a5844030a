"""What ``verify`` reports: a :class:`Violation`, and the tolerances its checks share.

Plan files round metres to 3 decimals, minutes to 4 or 5, coordinates to 7:
the tolerances below are a little wider than that rounding, so a plan that
crewcut wrote never trips them, and any real change to a number does.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

TOL_M = 0.01  # metres (files keep 3 decimals)
TOL_MIN = 1e-3  # minutes on one traversal or one figure (files keep 4 or 5)
TOL_DEG = 1.5e-7  # degrees (files keep 7 decimals)
TOL_TURN_MIN = 2e-5  # a turn's minutes (files keep 5 decimals)
DAY_MIN = 24 * 60.0  # a shift limit must lie within one day

# The kinds of violation, so that a caller can tell them apart without reading the text.
KINDS = ("profile", "network", "coordinates", "drawn line", "name", "passes", "minutes", "crew", "depot",
         "shift limit", "deferred", "territory", "route", "turn", "forbidden turn", "totals", "coverage", "summary",
         "over limit", "lower bound")


@dataclass(frozen=True)
class Violation:
    """One broken invariant: where (a record of the plan), what is wrong, and its kind (one of :data:`KINDS`)."""

    where: str
    message: str
    kind: str = "route"

    def __str__(self) -> str:
        return f"{self.where}: {self.message}"


def is_id(x, n: int) -> bool:
    """A segment or node id: a whole number (not true/false) in [0, n)."""
    return isinstance(x, (int, np.integer)) and not isinstance(x, bool) and 0 <= x < n


def total_tol(n: int, unit: float) -> float:
    """The tolerance on a sum of ``n`` rounded numbers."""
    return unit + n * 5e-5
