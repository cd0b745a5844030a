"""What a replan changed, crew by crew: streets gained and lost, old and new shifts, who needs new sheets.

Plain data (:func:`change_report`) and plain lines (:func:`change_lines`); the
command line draws the table.
"""
from __future__ import annotations

def change_report(parent: dict, child: dict) -> dict:
    """Per crew: segments gained and lost (count, km), old and new shift; overall: segments that changed hands.

    A segment *changed hands* when it needs service in the new plan, had a crew
    in the parent plan, and now has another crew (every segment of an absent
    crew counts). Closed segments leave their crew (``lost``), added ones join
    one (``gained``); neither counts as changing hands. ``routes_changed``: crews
    whose route differs from the parent's (route sheets are needed only for them).
    """
    length = {int(s["id"]): float(s["length_m"]) for s in child["network"]["segments"]}
    for s in parent["network"]["segments"]:
        length.setdefault(int(s["id"]), float(s["length_m"]))
    old_owner = {int(s): str(c["id"]) for c in parent["crews"] for s in c["territory"]}
    new_owner = {int(s): str(c["id"]) for c in child["crews"] for s in c["territory"]}
    deferred = {int(d["segment"]) for d in child.get("deferred", [])}
    old_by = {str(c["id"]): c for c in parent["crews"]}
    new_by = {str(c["id"]): c for c in child["crews"]}
    order = [str(c["id"]) for c in parent["crews"]] + [i for i in new_by if i not in old_by]
    km = lambda segs: sum(length[s] for s in segs) / 1000.0  # noqa: E731
    rows = []
    for cid in order:
        o, n = old_by.get(cid), new_by.get(cid)
        before = set(int(s) for s in o["territory"]) if o else set()
        after = set(int(s) for s in n["territory"]) if n else set()
        gained, lost = sorted(after - before), sorted(before - after)
        status = "absent" if n is None else ("extra" if o is None else "kept")
        same_route = (o is not None and n is not None and o["depot_node"] == n["depot_node"]
                      and [r["traversals"] for r in o["routes"]] == [r["traversals"] for r in n["routes"]])
        rows.append({"crew": cid, "status": status, "gained": len(gained), "gained_km": km(gained),
                     "lost": len(lost), "lost_km": km(lost),
                     "old_shift_min": float(o["shift_min"]) if o else 0.0,
                     "new_shift_min": float(n["shift_min"]) if n else 0.0,
                     "old_limit_min": float(o["shift_limit_min"]) if o else None,
                     "new_limit_min": float(n["shift_limit_min"]) if n else None,
                     "route_changed": n is not None and not same_route})
    changed = sorted(s for s, c in old_owner.items() if s in new_owner and new_owner[s] != c)
    absent_ids = {r["crew"] for r in rows if r["status"] == "absent"}
    absent_segs = sorted(s for s, c in old_owner.items() if c in absent_ids)
    need = len(new_owner) + len(deferred)
    closed = sorted(s for s in old_owner if s not in new_owner and s not in deferred)
    added = sorted(s for s in new_owner if s not in old_owner)
    return {
        "crews": rows,
        "changed_hands": len(changed),
        "changed_hands_km": km(changed),
        "changed_hands_share": len(changed) / need if need else 0.0,
        "segments_needing_service": need,
        "absent_segments": len(absent_segs),
        "changed_over_absent": len(changed) / len(absent_segs) if absent_segs else None,
        "left_service": len(closed),
        "new_segments": len(added),
        "deferred": sorted(deferred),
        "routes_changed": [r["crew"] for r in rows if r["route_changed"]],
        "old_longest_min": max((float(c["shift_min"]) for c in parent["crews"]), default=0.0),
        "new_longest_min": max((float(c["shift_min"]) for c in child["crews"]), default=0.0),
        "over_limit": list(child.get("summary", {}).get("over_limit", [])),
    }


def change_lines(rep: dict) -> list[str]:
    """The overall figures of a change report as plain lines."""
    lines = [f"segments that changed hands: {rep['changed_hands']:,} of {rep['segments_needing_service']:,} needing "
             f"service ({100 * rep['changed_hands_share']:.1f} %, {rep['changed_hands_km']:.2f} km)"]
    if rep["absent_segments"]:
        lines.append(f"absent crews' segments: {rep['absent_segments']:,}; changed hands / absent crews' segments "
                     f"{rep['changed_over_absent']:.2f}")
    if rep["left_service"]:
        lines.append(f"segments that left service (closed): {rep['left_service']:,}")
    if rep["new_segments"]:
        lines.append(f"new segments (added streets): {rep['new_segments']:,}")
    lines.append(f"longest shift {rep['old_longest_min'] / 60:.2f} h -> {rep['new_longest_min'] / 60:.2f} h")
    changed = rep["routes_changed"]
    lines.append("new route sheets needed for: " + (", ".join(changed) if changed else "no crew"))
    if rep["over_limit"]:
        lines.append("the crews at work cannot do all the work within their shift limits: "
                     + ", ".join(f"{o['crew']} over by {o['over_min']:.0f} min" for o in rep["over_limit"]))
    if "overtime" in rep:
        tot = sum(o["overtime_min"] for o in rep["overtime"])
        lines.append(f"overtime needed: {tot:.0f} min in all: " + ", ".join(
            f"{o['crew']} {o['overtime_min']:.0f} min" for o in rep["overtime"]) if rep["overtime"]
            else "no overtime needed: every shift fits its limit")
    if rep["deferred"]:
        lines.append(f"deferred so that every shift fits: {len(rep['deferred']):,} segment(s) (the defer list is in "
                     f"the plan file under \"deferred\")")
    return lines
