"""Verify, part 1b: what the plan serves, re-derived: the service area and the left-out list.

The truth is the network file read with the profile. Its streets that need
service are cut to the service area (the plan's recorded area, which must equal
the config's ``network.service_area`` or the area given to verify when there is
one), then every street no closed route from the plan's depots can serve is
found again (:func:`crewcut.solve.network.scope.unservable_streets`, on the
network file, not on the plan's copy). The plan's ``left_out`` list must be
exactly those streets with exactly those reasons; under the policy ``refuse``
it may hold closed streets only. A street is accepted as unserved only so. The
network the later parts check against is the truth with those streets' service
set to none, as the planner planned on it. Streets a replan closed for the day
are the history's (``closed`` changes), not the list's; a plan written before
left-out lists were kept (no ``left_out``) may leave out closed streets only.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from crewcut.solve.costs import required_passes
from crewcut.solve.network.model import Network
from crewcut.solve.network.scope import REASONS, segments_inside, unservable_streets, without_service
from crewcut.solve.profile import Profile
from crewcut.solve.readers.area import ServiceArea

from crewcut.plans.model import Plan
from crewcut.plans.violation import Violation, is_id


@dataclass(frozen=True)
class ScopeTruth:
    """The network verify checks the rest against, or the violation that stopped the re-derivation."""

    network: Network
    violation: Violation | None = None


def _same_area(a: ServiceArea, b: ServiceArea) -> bool:
    return a.shape().equals(b.shape())


def scope_truth(plan: Plan, net: Network, profile: Profile, area: ServiceArea | None = None) -> ScopeTruth:
    """Re-derive what the plan may leave unserved (module notes) and the network to check the rest on."""
    recorded = plan.settings.options.area
    if area is None and profile.service_area is not None:
        from crewcut.solve.readers.area import read_area

        area = read_area(profile.service_area)
    if area is not None and (recorded is None or not _same_area(area, recorded)):
        what = "has no service area" if recorded is None else f"was made for another service area ({recorded.source})"
        return ScopeTruth(net, Violation("settings.area", f"the plan {what} than the one given "
                                         f"({area.source or 'the config'})", "network"))
    area = area or recorded
    if len(plan.network.segments) != net.n_segments:
        return ScopeTruth(net)  # a different network: part 2 names the difference
    if area is not None:
        need = required_passes(net, profile).total > 0
        net = without_service(net, np.flatnonzero(need & ~segments_inside(net, area)))
    depots = sorted({c.depot_node for c in plan.crews if is_id(c.crew.depot_node, net.n_nodes)})
    if not depots:
        return ScopeTruth(net)  # part 3 reports the depots
    shut_today = {s for c in plan.history.changes if c.kind == "closed" for s in c.segments}
    found = {s.segment: s for s in unservable_streets(net, profile, depots)
             if s.segment not in shut_today and (plan.left_out is not None or s.reason != "closed")}
    listed = {s.segment: s for s in plan.left_out or ()}
    policy = plan.settings.options.unservable or "refuse"
    v = _compare(found, listed, policy, net)
    trapped = [s for s in found.values() if s.reason != "closed"]
    if trapped:
        net = without_service(net, np.array(sorted(s.segment for s in trapped), np.int64))
    return ScopeTruth(net, v)


def _compare(found: dict, listed: dict, policy: str, net: Network) -> Violation | None:
    for seg, item in sorted(listed.items()):
        if item.reason not in REASONS:
            return Violation(f"left_out segment {seg}", f"reason {item.reason!r} is not one crewcut gives", "coverage")
        truth = found.get(seg)
        if truth is None:
            return Violation(f"left_out segment {seg}", f"'{item.source_id}' is listed as left out "
                             f"({item.reason}) but a closed route from a depot can serve it", "coverage")
        if truth.reason != item.reason:
            return Violation(f"left_out segment {seg}", f"'{item.source_id}' is listed as {item.reason}; "
                             f"re-derived: {truth.reason} ({REASONS[truth.reason]})", "coverage")
        if item.source_id != truth.source_id or item.name != truth.name or abs(item.length_m - truth.length_m) > 0.01:
            return Violation(f"left_out segment {seg}", "its feature id, name or length differs from the network's",
                             "coverage")
    for seg, truth in sorted(found.items()):
        if seg not in listed:
            return Violation(f"segment {seg}", f"'{truth.source_id}' needs service and no closed route from a "
                             f"depot can serve it ({truth.reason}), but the plan does not list it as left out",
                             "coverage")
        if policy == "refuse" and truth.reason != "closed":
            return Violation(f"left_out segment {seg}", f"'{truth.source_id}' is left out ({truth.reason}) but the "
                             "plan records the policy 'refuse'", "coverage")
    return None
