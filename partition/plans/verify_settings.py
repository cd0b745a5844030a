"""Verify, part 2: the plan's settings, crews and defer list against the truth.

* Profile: the plan's recorded profile (:meth:`crewcut.solve.profile.Profile.to_dict`)
  must equal the profile verify checks against; each differing setting is named
  with the plan's value and the truth's.
* Crews: every shift limit is a number greater than zero and at most a day
  (1,440 minutes); the run options' record of the crews (when there is one)
  agrees with the crews' own records; with a config that defines crews, every
  plan crew whose id the config defines has the config's depot (its node, or its
  lon/lat snapped as the planner snaps it) and, in a fresh plan or a first
  replan, the config's shift limit unless the history records a new limit for it.
* Defer list: only in a replanned plan (``history.generation`` 1 or more, changes
  recorded, ``overflow`` "defer"); each entry a distinct segment that needs
  service, of a crew of the plan, with the priority the profile gives its road
  class and the work its passes take at the profile's service speed, and the policy of :mod:`crewcut.fleet.replan` (lowest priority waits
  first): no deferred street has a higher priority than any street its crew
  still serves.
"""
from __future__ import annotations

import math

import numpy as np

from crewcut.solve.costs import required_passes, service_minutes
from crewcut.solve.errors import InputError
from crewcut.solve.network.depot import check_depot_node, snap_depot
from crewcut.solve.network.model import Network
from crewcut.solve.profile import Profile

from crewcut.plans.model import Plan, recorded_profile
from crewcut.plans.violation import DAY_MIN, Violation, is_id


def profile_differences(plan: Plan, truth: Profile) -> list[tuple[str, object, object]]:
    """(setting, plan value, truth value) for every recorded setting that differs."""
    got = plan.settings.profile.to_dict()
    want = recorded_profile(truth).to_dict()
    return [(key, got.get(key), want[key]) for key in want if got.get(key) != want[key]]


def check_profile(plan: Plan, truth: Profile):
    """Yield one violation naming every recorded setting that differs from ``truth`` (none when equal).

    Parameters
    ----------
    plan : the plan as read from its file.
    truth : the profile verify checks against (the config's, or the plan's own).
    """
    diffs = profile_differences(plan, truth)
    if diffs:
        shown = "; ".join(f"{k}: plan {_show(a)}, config {_show(b)}" for k, a, b in diffs)
        yield Violation("settings.profile", f"the plan's recorded profile differs from the config in "
                        f"{len(diffs)} setting(s): {shown}", "profile")


def _number(x) -> bool:
    return isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x)


def _show(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, dict):
        return "{" + ", ".join(f"{k}: {_show(x)}" for k, x in v.items()) + "}"
    return f"{v:g}" if isinstance(v, float) else repr(v)


def check_crews(plan: Plan, net: Network, truth: Profile, from_config: bool):
    """Yield the crews' violations: shift limits, depots, the run options' record, the config's crews.

    Parameters
    ----------
    plan, net : the plan and the network read from the network file.
    truth : the profile verify checks against.
    from_config : ``truth`` came from a config, so its crews (if any) are the truth too.
    """
    if not plan.crews:
        yield Violation("crews", "the plan has no crew", "crew")
        return
    for c in plan.crews:
        lim = c.crew.shift_limit_min
        if not (isinstance(lim, (int, float)) and math.isfinite(lim) and 0 < lim <= DAY_MIN):
            yield Violation(f"crew '{c.id}'", f"shift limit {lim!r} minutes; a shift limit must be greater than "
                            f"zero and at most a day ({DAY_MIN:g} minutes)", "shift limit")
            return
        if not is_id(c.crew.depot_node, net.n_nodes):
            yield Violation(f"crew '{c.id}'", f"depot node {c.crew.depot_node!r} does not exist", "depot")
            return
    recorded = plan.settings.options.crews
    if recorded is not None:
        opts = {o.id: o for o in recorded}
        for c in plan.crews:
            o = opts.get(c.id)
            if (o is None or o.depot_node != c.depot_node or not _number(o.shift_limit_min)
                    or abs(float(o.shift_limit_min) - c.shift_limit_min) > 1e-3):
                yield Violation(f"crew '{c.id}'", "its depot or shift limit differs from the run options' record "
                                "of the crews (settings.crews)", "depot")
                return
    if from_config and truth.crews and plan.settings.options.command is None:
        yield from _against_config(plan, net, truth)


def _against_config(plan: Plan, net: Network, truth: Profile):
    conf = {c.id: c for c in truth.crews}
    h = plan.history
    new_limits = {ch.crew: ch.to_min for ch in h.changes if ch.kind == "shift_limit"}
    for c in plan.crews:
        cc = conf.get(c.id)
        if cc is None:
            continue  # a crew of the k-crews shortcut, or an extra crew of a replan
        try:
            if cc.depot_node is not None:
                node = check_depot_node(net, cc.depot_node, who=f"depot of crew '{cc.id}'")
            else:
                node = snap_depot(net, cc.depot_lonlat[0], cc.depot_lonlat[1], truth.depot_snap_max_m,
                                  who=f"depot of crew '{cc.id}'")
        except InputError as exc:
            yield Violation(f"crew '{c.id}'", f"the config's depot cannot be placed: {exc.message}", "depot")
            return
        if node != c.depot_node:
            yield Violation(f"crew '{c.id}'", f"depot node {c.depot_node} in the plan, node {node} from the config",
                            "depot")
            return
        if h.generation is not None and not (isinstance(h.generation, int) and h.generation < 2):
            continue  # an earlier replan's new limits are not recorded in this file
        want = new_limits.get(c.id, cc.shift_limit_min)
        if not _number(want):
            yield Violation("history", f"the recorded new shift limit of crew '{c.id}' is {want!r}, not a number",
                            "shift limit")
            return
        want = float(want)
        if abs(c.shift_limit_min - want) > 1e-3:
            yield Violation(f"crew '{c.id}'", f"shift limit {c.shift_limit_min:g} minutes in the plan, {want:g} "
                            f"{'in the recorded change' if c.id in new_limits else 'in the config'}", "shift limit")
            return


def check_deferred(plan: Plan, net: Network, profile: Profile, need: np.ndarray):
    """The defer list's rules (module notes); ``need``: segments that need service under the profile."""
    if plan.deferred is None:
        return
    h = plan.history
    if h.generation is not None and (isinstance(h.generation, bool) or not isinstance(h.generation, int)):
        yield Violation("history", f"generation {h.generation!r} is not a whole number", "deferred")
        return
    if not plan.deferred and h.generation is None:
        yield Violation("deferred", "the plan has a defer list but was never replanned", "deferred")
        return
    if plan.deferred and ((h.generation or 0) < 1 or not h.changes or h.overflow != "defer"):
        yield Violation("deferred", f"{len(plan.deferred)} street(s) deferred, but only a replan for the day's "
                        f"changes with overflow \"defer\" may defer streets (this plan's history: generation "
                        f"{h.generation}, {len(h.changes)} change(s), overflow {h.overflow!r})", "deferred")
        return
    crews = {c.id: c for c in plan.crews}
    work = service_minutes(net, profile) * required_passes(net, profile).total
    seen: set[int] = set()
    for d in plan.deferred:
        s = d.segment
        if not (is_id(s, net.n_segments) and need[s]):
            yield Violation("deferred", f"the defer list names {s!r}, which is not a segment needing service",
                            "deferred")
            return
        if s in seen:
            yield Violation("deferred", f"segment {s} is deferred twice", "deferred")
            return
        seen.add(s)
        if not isinstance(d.crew, str) or d.crew not in crews:
            yield Violation("deferred", f"segment {s} is deferred by crew '{d.crew}', which is not in the plan",
                            "deferred")
            return
        want = profile.priority_for(net.seg_class[s])
        if d.priority != want or d.source_id != net.seg_source[s]:
            yield Violation("deferred", f"segment {s} is deferred with priority {d.priority} and feature id "
                            f"{d.source_id!r}; the network and profile give {want} and {net.seg_source[s]!r}",
                            "deferred")
            return
        if not (_number(d.work_min) and abs(float(d.work_min) - float(work[s])) <= 1e-3 + 1e-6 * float(work[s])):
            yield Violation("deferred", f"segment {s} is deferred with work_min {d.work_min!r}; its passes at the "
                            f"profile's service speed take {float(work[s]):.4f} minutes", "deferred")
            return
    for cid, crew in crews.items():
        mine = [d for d in plan.deferred if d.crew == cid]
        if not mine or not crew.territory:
            continue
        kept = min(crew.territory, key=lambda s: (profile.priority_for(net.seg_class[s]), s))
        low = profile.priority_for(net.seg_class[kept])
        top = max(mine, key=lambda d: (d.priority, -d.segment))
        if top.priority > low:
            yield Violation("deferred", f"crew '{cid}' deferred segment {top.segment} (priority {top.priority}) "
                            f"but still serves segment {kept} (priority {low}); the lowest priority waits first",
                            "deferred")
            return
