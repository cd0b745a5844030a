"""The crews of the day for a replan: the plan's crews less the absent ones, plus extra crews, with today's limits.

Everything is checked before any work starts: unknown or repeated crew ids,
depots that snap nowhere or sit on a closed street, shift limits that are not
positive minutes, and the replan's own settings.
"""
from __future__ import annotations

import dataclasses
import math
import numbers

import numpy as np

from crewcut.solve.errors import InputError
from crewcut.solve.seeds import check_seed
from crewcut.solve.network.model import Network
from crewcut.solve.profile import CREW_ID_HINT, crew_id_problem, Crew, Profile

from crewcut.fleet.changes import Changes
from crewcut.fleet.streets import StreetGraph
from crewcut.fleet.territories import describe_segment
from crewcut.plans.model import Plan

OVERFLOW_MODES = (None, "defer", "overtime")


def check_params(stability, overflow, tolerance, seed, time_limit_s) -> None:
    if isinstance(stability, bool) or not isinstance(stability, numbers.Real) or not math.isfinite(stability) \
            or stability < 0:
        raise InputError(f"`stability` is {stability!r}", "give minutes per segment, 0 or more (0: no stability)",
                         param="stability")
    if overflow not in OVERFLOW_MODES:
        raise InputError(f"overflow mode {overflow!r} is not known", "use 'defer', 'overtime' or nothing")
    if not (isinstance(tolerance, numbers.Real) and 0 <= tolerance < 1):
        raise InputError(f"balance tolerance {tolerance!r} is outside [0, 1)", "e.g. 0.03 for 3 %")
    check_seed(seed)
    if time_limit_s is not None and (isinstance(time_limit_s, bool) or not isinstance(time_limit_s, numbers.Real)
                                     or not math.isfinite(time_limit_s) or time_limit_s < 0):
        raise InputError(f"`time_limit_s` is {time_limit_s!r}", "give the seconds the balancer may use, 0 or more",
                         param="time_limit_s")


def crews_of_the_day(plan: Plan, today: Network, profile: Profile, changes: Changes) -> list[Crew]:
    """The crews at work today: the plan's crews less the absent ones, then the extra crews, with today's limits.

    Each crew has its depot node set; an extra crew's depot is snapped to today's
    network. A crew of the parent plan keeps its id, so its parent record is
    ``plan.crew(crew.id)``.
    """
    ids = plan.crew_ids()
    known = set(ids)
    absent = [str(a) for a in changes.absent]
    for a in absent:
        if a not in known:
            raise InputError(f"unknown crew id '{a}' (`absent`)", f"crews in the plan: {', '.join(ids)}",
                             param="absent")
    gone = set(absent)
    extra: list[Crew] = []
    for item in changes.added_crews:
        if not isinstance(item, Crew):
            raise InputError(f"extra crew {item!r} in `added_crews` is not a crew", "give each extra crew as a Crew",
                             param="added_crews")
        cid = str(item.id).strip()
        problem = crew_id_problem(cid) if cid else None
        if problem:
            raise InputError(f"extra {problem} (`added_crews`)", CREW_ID_HINT, param="added_crews")
        if not cid:
            raise InputError("an extra crew in `added_crews` has an empty id", "give each extra crew an id, e.g. relief",
                             param="added_crews")
        if cid in known or cid in {e.id for e in extra}:
            raise InputError(f"extra crew id '{cid}' is already used", "give the extra crew a new id")
        if item.depot_lonlat is None and item.depot_node is None:
            raise InputError(f"extra crew '{cid}' has no depot", "write it as ID@LON,LAT")
        extra.append(dataclasses.replace(item, id=cid))
    limits = dict(changes.shift_limits or {})
    all_ids = [i for i in ids if i not in gone] + [e.id for e in extra]
    for cid, value in limits.items():
        if cid not in all_ids:
            raise InputError(f"unknown crew id '{cid}' (`shift_limits`)" + (" : that crew is absent" if cid in gone else ""),
                             f"crews at work: {', '.join(all_ids) or 'none'}", param="shift_limits")
        if isinstance(value, bool) or not isinstance(value, numbers.Real) or not math.isfinite(value) or value <= 0:
            raise InputError(f"shift limit of crew '{cid}' is {value!r} minutes",
                             "give minutes above 0, e.g. 480 for 8 hours")
    if not all_ids:
        raise InputError(f"every crew of the plan is absent ({', '.join(ids)}) and no extra crew is given",
                         "leave at least one crew at work, or add one with `added_crews`")
    from crewcut.solve.network.depot import check_depot_node, snap_depot

    crews = [dataclasses.replace(c.crew, shift_limit_min=float(limits.get(c.id, c.shift_limit_min)))
             for c in plan.crews if c.id not in gone]
    for e in extra:
        who = f"depot of extra crew '{e.id}'"
        if e.depot_lonlat is not None:
            lon, lat = e.depot_lonlat
            node = snap_depot(today, float(lon), float(lat), profile.depot_snap_max_m, who=who)
        else:
            node = check_depot_node(today, e.depot_node, who=who, usable=True)
        crews.append(dataclasses.replace(e, depot_node=node, shift_limit_min=float(limits.get(e.id, e.shift_limit_min))))
    return crews


def check_depots(today: Network, crews: list[Crew], closed: np.ndarray, eligible: np.ndarray,
                  sg: StreetGraph) -> None:
    shut = ", ".join(f"{int(s)} ('{today.seg_source[int(s)]}')" for s in closed[:8]) or "none"
    for i, c in enumerate(crews):
        at = (today.seg_u == c.depot_node) | (today.seg_v == c.depot_node)
        if not (at & ~today.seg_closed).any():
            raise InputError(f"the closures cut the depot of crew '{c.id}' (node {c.depot_node}) off the network: every "
                             f"street at it is closed (closed today: {shut})",
                             f"keep a street at the depot open, or mark crew '{c.id}' absent")
        if not eligible[i].any():
            raise InputError(f"the closures cut the depot of crew '{c.id}' (node {c.depot_node}) off the network: from it "
                             f"no street that needs service can be reached and left again (closed today: {shut})",
                             f"keep a way out of the depot open, or mark crew '{c.id}' absent")
    cut = np.flatnonzero(sg.required & ~eligible.any(axis=0))
    if cut.size:
        raise InputError(f"{cut.size} segment(s) that need service are cut off from every depot: "
                         f"{describe_segment(today, cut)} (closed today: {shut})",
                         "keep a street open that joins them to the rest of the network, or add a crew whose "
                         "depot can reach them")
