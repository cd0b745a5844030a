"""The streets a plan leaves unserved, for every output: rows per feature and one summary line.

A street that needs service but lies on no closed route from a depot (or is
closed in the data) is never silent: the plan lists it (``Plan.left_out``), and
the workload table's footnote, the report, the GeoJSON export and ``check`` show
these rows. Reasons are :data:`crewcut.solve.network.scope.REASONS`.
"""
from __future__ import annotations

from typing import Iterable

from crewcut.solve.network.scope import REASONS, LeftOutStreet

COLUMNS = (("source_id", "feature"), ("name", "name"), ("segments", "segments (count)"),
           ("length_m", "length (m)"), ("reason", "reason"))


def left_out_rows(items: Iterable[LeftOutStreet]) -> list[dict]:
    """One row per feature and reason, in the order the segments come: segments, metres, the reason in words."""
    rows: dict[tuple[str, str], dict] = {}
    for s in items:
        key = (s.source_id, s.reason)
        row = rows.setdefault(key, {"source_id": s.source_id, "name": s.name, "segments": 0, "length_m": 0.0,
                                    "reason": s.reason, "why": REASONS.get(s.reason, s.reason)})
        row["segments"] += 1
        row["length_m"] += float(s.length_m)
    return list(rows.values())


def left_out_line(items: Iterable[LeftOutStreet] | None) -> str | None:
    """'left out (no crew serves them): N street segment(s), x km: k cannot_be_left, ...', or None when none."""
    items = list(items or ())
    if not items:
        return None
    km = sum(s.length_m for s in items) / 1000.0
    counts: dict[str, int] = {}
    for s in items:
        counts[s.reason] = counts.get(s.reason, 0) + 1
    why = ", ".join(f"{n} {REASONS[r]}" for r, n in sorted(counts.items()))
    return f"left out, no crew serves them: {len(items)} street segment(s), {km:.2f} km ({why})"
