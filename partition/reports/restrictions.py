"""The turn restrictions a network file holds, for ``check`` and ``plan``: what was applied and what not.

Every ``type=restriction`` relation of an OpenStreetMap file ends up in
:attr:`crewcut.solve.network.model.Network.restrictions`, applied (it bans turns
the routes never make) or not applied with a reason
(:data:`crewcut.solve.readers.osmturns.NOT_APPLIED`). Nothing is left silent: this
module gives one summary line and one row per reason with the relations named.
"""
from __future__ import annotations

from typing import Iterable

from crewcut.solve.network.model import RestrictionNote
from crewcut.solve.readers.osmturns import NOT_APPLIED

SHOWN = 8  # relation ids named per reason


def restriction_rows(notes: Iterable[RestrictionNote]) -> list[dict]:
    """One row per outcome: "applied" first, then each reason not applied; count, relations, words."""
    notes = list(notes)
    rows: dict[str, dict] = {}
    for n in notes:
        key = "applied" if n.applied else n.reason
        row = rows.setdefault(key, {"outcome": key, "count": 0, "bans": 0, "relations": [],
                                    "why": "applied: the routes never make the turns it forbids" if n.applied
                                    else NOT_APPLIED.get(n.reason, n.reason)})
        row["count"] += 1
        row["bans"] += n.bans
        row["relations"].append(n.source)
    out = [rows.pop("applied")] if "applied" in rows else []
    return out + [rows[k] for k in sorted(rows)]


def shown_relations(row: dict) -> str:
    rel = row["relations"]
    return ", ".join(rel[:SHOWN]) + (f" and {len(rel) - SHOWN} more" if len(rel) > SHOWN else "")


def restriction_line(notes: Iterable[RestrictionNote] | None) -> str | None:
    """'turn restrictions: 45 read, 40 applied (41 turns banned), 5 not applied (...)', or None when none were read."""
    notes = list(notes or ())
    if not notes:
        return None
    applied = [n for n in notes if n.applied]
    text = (f"turn restrictions: {len(notes)} read, {len(applied)} applied "
            f"({sum(n.bans for n in applied)} turn(s) banned), {len(notes) - len(applied)} not applied")
    missed = [r for r in restriction_rows(notes) if r["outcome"] != "applied"]
    if missed:
        text += " (" + "; ".join(f"{r['count']} {r['outcome']}: {shown_relations(r)}" for r in missed) + ")"
    return text
