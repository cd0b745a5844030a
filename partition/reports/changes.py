"""What a replan changed, crew by crew: streets gained and lost, old and new shifts, who needs new sheets.

Typed data (:func:`change_report`, a :class:`ChangeReport`) and plain lines (:func:`change_lines`); the
command line draws the table.
"""
from __future__ import annotations

from dataclasses import dataclass

from crewcut.plans.model import OverLimit, Plan


@dataclass(frozen=True)
class CrewChange:
    """One crew's row of a change report: ``status`` is ``kept``, ``absent`` or ``extra``."""

    crew: str
    status: str
    gained: int
    gained_km: float
    lost: int
    lost_km: float
    old_shift_min: float
    new_shift_min: float
    old_limit_min: float | None
    new_limit_min: float | None
    route_changed: bool


@dataclass(frozen=True)
class Overtime:
    crew: str
    overtime_min: float


@dataclass(frozen=True)
class ChangeReport:
    """What a replan changed (see :func:`change_report`); ``overtime`` is None unless the replan kept all
    work as overtime (``overflow="overtime"``)."""

    crews: tuple[CrewChange, ...]
    changed_hands: int
    changed_hands_km: float
    changed_hands_share: float
    segments_needing_service: int
    absent_segments: int
    changed_over_absent: float | None
    left_service: int
    new_segments: int
    deferred: tuple[int, ...]
    routes_changed: tuple[str, ...]
    old_longest_min: float
    new_longest_min: float
    over_limit: tuple[OverLimit, ...]
    overtime: tuple[Overtime, ...] | None = None


def change_report(parent: Plan, child: Plan) -> ChangeReport:
    """Per crew: segments gained and lost (count, km), old and new shift; overall: segments that changed hands.

    A segment *changed hands* when it needs service in the new plan, had a crew
    in the parent plan, and now has another crew (every segment of an absent
    crew counts). Closed segments leave their crew (``lost``), added ones join
    one (``gained``); neither counts as changing hands. ``routes_changed``: crews
    whose route differs from the parent's (route sheets are needed only for them).
    """
    length = {s.id: float(s.length_m) for s in child.network.segments}
    for s in parent.network.segments:
        length.setdefault(s.id, float(s.length_m))
    old_owner = {s: c.id for c in parent.crews for s in c.territory}
    new_owner = {s: c.id for c in child.crews for s in c.territory}
    deferred = {d.segment for d in child.deferred or ()}
    old_by = {c.id: c for c in parent.crews}
    new_by = {c.id: c for c in child.crews}
    order = [c.id for c in parent.crews] + [i for i in new_by if i not in old_by]
    km = lambda segs: sum(length[s] for s in segs) / 1000.0  # noqa: E731
    rows = []
    for cid in order:
        o, n = old_by.get(cid), new_by.get(cid)
        before = set(o.territory) if o else set()
        after = set(n.territory) if n else set()
        gained, lost = sorted(after - before), sorted(before - after)
        status = "absent" if n is None else ("extra" if o is None else "kept")
        same_route = (o is not None and n is not None and o.depot_node == n.depot_node
                      and [r.traversals for r in o.routes] == [r.traversals for r in n.routes])
        rows.append(CrewChange(cid, status, len(gained), km(gained), len(lost), km(lost),
                               o.shift_min if o else 0.0, n.shift_min if n else 0.0,
                               o.shift_limit_min if o else None, n.shift_limit_min if n else None,
                               n is not None and not same_route))
    changed = sorted(s for s, c in old_owner.items() if s in new_owner and new_owner[s] != c)
    absent_ids = {r.crew for r in rows if r.status == "absent"}
    absent_segs = sorted(s for s, c in old_owner.items() if c in absent_ids)
    need = len(new_owner) + len(deferred)
    closed = sorted(s for s in old_owner if s not in new_owner and s not in deferred)
    added = sorted(s for s in new_owner if s not in old_owner)
    over = tuple(getattr(child.summary, "over_limit", ()) or ())
    overtime = (tuple(Overtime(o.crew, o.over_min) for o in over) if child.history.overflow == "overtime"
                and child.history.generation is not None else None)
    return ChangeReport(
        crews=tuple(rows), changed_hands=len(changed), changed_hands_km=km(changed),
        changed_hands_share=len(changed) / need if need else 0.0, segments_needing_service=need,
        absent_segments=len(absent_segs),
        changed_over_absent=len(changed) / len(absent_segs) if absent_segs else None,
        left_service=len(closed), new_segments=len(added), deferred=tuple(sorted(deferred)),
        routes_changed=tuple(r.crew for r in rows if r.route_changed),
        old_longest_min=max((c.shift_min for c in parent.crews), default=0.0),
        new_longest_min=max((c.shift_min for c in child.crews), default=0.0),
        over_limit=over, overtime=overtime)


def change_lines(rep: ChangeReport) -> list[str]:
    """The overall figures of a change report as plain lines."""
    lines = [f"segments that changed hands: {rep.changed_hands:,} of {rep.segments_needing_service:,} needing "
             f"service ({100 * rep.changed_hands_share:.1f} %, {rep.changed_hands_km:.2f} km)"]
    if rep.absent_segments:
        lines.append(f"absent crews' segments: {rep.absent_segments:,}; changed hands / absent crews' segments "
                     f"{rep.changed_over_absent:.2f}")
    if rep.left_service:
        lines.append(f"segments that left service (closed): {rep.left_service:,}")
    if rep.new_segments:
        lines.append(f"new segments (added streets): {rep.new_segments:,}")
    lines.append(f"longest shift {rep.old_longest_min / 60:.2f} h -> {rep.new_longest_min / 60:.2f} h")
    changed = rep.routes_changed
    lines.append("new route sheets needed for: " + (", ".join(changed) if changed else "no crew"))
    if rep.over_limit:
        lines.append("the crews at work cannot do all the work within their shift limits: "
                     + ", ".join(f"{o.crew} over by {o.over_min:.0f} min" for o in rep.over_limit))
    if rep.overtime is not None:
        tot = sum(o.overtime_min for o in rep.overtime)
        lines.append(f"overtime needed: {tot:.0f} min in all: " + ", ".join(
            f"{o.crew} {o.overtime_min:.0f} min" for o in rep.overtime) if rep.overtime
            else "no overtime needed: every shift fits its limit")
    if rep.deferred:
        lines.append(f"deferred so that every shift fits: {len(rep.deferred):,} segment(s) (the defer list is in "
                     f"the plan file under \"deferred\")")
    return lines
