"""Trips for a planned route: the one call the fleet and cycle planners make."""
from __future__ import annotations

from crewcut.solve.calendar.clock import window_misses
from crewcut.solve.calendar.cycle import DEFAULT_SHIFT_START_MIN
from crewcut.solve.errors import InputError
from crewcut.solve.network.model import Network
from crewcut.solve.profile import Profile
from crewcut.solve.result import Route
from crewcut.solve.trips.place import place_facilities
from crewcut.solve.trips.tripsplit import split_route


def shift_start(profile: Profile, start_min: float | None) -> float:
    """The clock start of a route: its own, else the cycle's shift start, else 06:00."""
    if start_min is not None:
        return float(start_min)
    return float(profile.cycle.shift_start_min if profile.cycle is not None else DEFAULT_SHIFT_START_MIN)


def with_trips(net: Network, profile: Profile, route: Route, start_min: float | None = None) -> Route:
    """``route`` split into trips (:func:`crewcut.solve.trips.tripsplit.split_route`) at its clock start.

    A cycle route's posted windows must still be met after the split; where one would be
    missed, :class:`InputError` says so (trips and posted windows are not planned together yet).
    """
    if not route.traversals:
        return route
    out = split_route(net, profile, route, place_facilities(net, profile), shift_start(profile, start_min))
    if start_min is not None and out.visits:
        from crewcut.solve.calendar.dayroute import posted_windows

        segs = sorted({t.segment for t in out.traversals if t.service})
        wins = posted_windows(net, segs)
        if wins and _misses(out, start_min, wins):
            raise InputError("a trip to a facility would make a route miss a posted window",
                             "posted windows and trips are not planned together yet: raise the capacities, or "
                             "plan the posted streets without [[facilities]]")
    return out


def _misses(route: Route, start_min: float, wins) -> bool:
    # the visits' minutes enter the clock as waits before the traversal that follows each
    from dataclasses import replace

    tr = list(route.traversals)
    for v in route.visits:
        if v.after < len(tr):
            x = tr[v.after]
            tr[v.after] = replace(x, wait_minutes=x.wait_minutes + v.wait_min + v.minutes)
    return bool(window_misses(tr, start_min, wins))
