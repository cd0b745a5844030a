"""Trip settings checked against the network and the crews before any work starts."""
from __future__ import annotations

import numpy as np

from crewcut.solve.calendar.postings import clock
from crewcut.solve.costs import required_passes
from crewcut.solve.errors import InputError
from crewcut.solve.network.model import Network
from crewcut.solve.profile import Profile
from crewcut.solve.trips.loads import pass_demand
from crewcut.solve.trips.place import check_reachable, place_facilities
from crewcut.solve.trips.route_trips import shift_start


def check_trips(net: Network, profile: Profile, depots: list[int], shift_limits: list[float],
                start_min: float | None = None) -> None:
    """Raise :class:`InputError` for trip settings no plan can meet.

    Checked: every facility lies on the network (snapped as depots are); every capacity
    can be reset at a facility each depot can reach and leave; some facility resetting
    each capacity is open during the shift (shift start to start plus the longest shift
    limit); no single pass of a street needs more than a capacity holds.
    """
    if not profile.capacities:
        return
    placed = place_facilities(net, profile)
    for d in sorted(set(int(x) for x in depots)):
        check_reachable(net, profile, d, placed, f"the depot at node {d} ('{net.node_label[d]}')")
    t0 = shift_start(profile, start_min)
    t1 = t0 + max(shift_limits, default=profile.shift_limit_min)
    for c in profile.capacities:
        fs = [p.facility for p in placed if c.name in p.facility.resets]
        if not any(f.open_min < t1 and f.close_min > t0 and f.close_min - max(f.open_min, t0) >= f.minutes
                   for f in fs):
            hours = ", ".join(f"'{f.id}' {f.hours}" for f in fs)
            raise InputError(f"facilities: no facility that resets capacity '{c.name}' is open during the shift "
                             f"{clock(t0)}-{clock(min(t1, 1440))}: {hours}",
                             "set the facilities' hours to meet the shift, or change the shift start")
    p = required_passes(net, profile)
    need = np.flatnonzero((p.forward + p.backward + p.either) > 0)
    if need.size:
        d = pass_demand(net, profile.capacities, need)
        for c, cap in enumerate(profile.capacities):
            over = np.flatnonzero(d[:, c] > cap.limit * (1 + 1e-9))
            if over.size:
                s = int(need[over[0]])
                raise InputError(f"capacity.{cap.name}: one pass of street '{net.seg_source[s]}' (segment {s}, "
                                 f"{net.seg_length[s]:.0f} m, class {net.seg_class[s]}) needs {d[over[0], c]:.4g} "
                                 f"{cap.unit}, more than the limit {cap.limit:g}"
                                 + (f" ({over.size} streets in all)" if over.size > 1 else ""),
                                 f"raise capacity.{cap.name}.limit or lower its per_km, or split the street in "
                                 "the data")
