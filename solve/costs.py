"""Required passes and traversal times of every segment under a profile.

A *pass* is one required traversal of a segment. How many passes a segment needs,
and in which directions, follows from its service kind and one-way status:

============== ================================ ==============================
service        two-way street                   one-way street
============== ================================ ==============================
none           no pass                          no pass
one_pass       1 pass, either direction         1 pass, legal direction
both_sides     1 pass each direction (curbs,    2 passes, legal direction
               each with traffic)
each_direction 1 pass each direction (lanes)    1 pass, legal direction
right_curb     1 pass, the direction that puts  1 pass, legal direction
left_curb      that curb on the working side
============== ================================ ==============================

The working side is the curb side of the direction of travel: the right in
right-hand traffic, so there ``right_curb`` is driven ``u -> v`` and ``left_curb``
``v -> u`` (the other way round in left-hand traffic).

When the profile ignores one-way streets (walkers) every street counts as
two-way, and ``both_sides`` gives 2 passes in either direction. Closed segments
need no pass (they cannot be served) and cannot be driven.

Times are minutes: service at the class's service speed, deadheading at its
deadhead speed; a segment's own ``speed_kmh`` caps both.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from crewcut.solve.network.model import (SERVICE_BOTH_SIDES, SERVICE_EACH_DIRECTION, SERVICE_LEFT_CURB,
                                         SERVICE_ONE_PASS, SERVICE_RIGHT_CURB, Network)
from crewcut.solve.profile import Profile


@dataclass(frozen=True)
class Passes:
    """Required passes per segment: ``forward`` (u -> v), ``backward`` (v -> u), ``either``."""

    forward: np.ndarray  # int64 (m,)
    backward: np.ndarray
    either: np.ndarray

    @property
    def total(self) -> np.ndarray:
        return self.forward + self.backward + self.either


def required_passes(net: Network, profile: Profile) -> Passes:
    """Required passes of every segment under ``profile`` (see the module table)."""
    m = net.n_segments
    fwd = np.zeros(m, np.int64)
    bwd = np.zeros(m, np.int64)
    eit = np.zeros(m, np.int64)
    svc = net.seg_service
    oneway = net.seg_oneway & (not profile.ignore_oneway)
    open_ = ~net.seg_closed
    one = (svc == SERVICE_ONE_PASS) & open_
    eit[one & ~oneway] = 1
    fwd[one & oneway] = 1
    both = (svc == SERVICE_BOTH_SIDES) & open_
    if profile.ignore_oneway:
        eit[both] = 2
    else:
        fwd[both & oneway] = 2
        fwd[both & ~oneway] = 1
        bwd[both & ~oneway] = 1
    each = (svc == SERVICE_EACH_DIRECTION) & open_
    fwd[each] = 1
    bwd[each & ~oneway] = 1
    curb = ((svc == SERVICE_RIGHT_CURB) | (svc == SERVICE_LEFT_CURB)) & open_
    if profile.ignore_oneway:
        eit[curb] = 1
    else:
        with_uv = (svc == SERVICE_RIGHT_CURB) == (profile.traffic != "left")
        fwd[curb & (oneway | with_uv)] = 1
        bwd[curb & ~oneway & ~with_uv] = 1
    return Passes(fwd, bwd, eit)


def _speeds(net: Network, table_lookup) -> np.ndarray:
    classes = sorted(set(net.seg_class))
    by_class = {c: table_lookup(c) for c in classes}
    v = np.fromiter((by_class[c] for c in net.seg_class), dtype=np.float64, count=net.n_segments)
    given = ~np.isnan(net.seg_speed_kmh)
    v[given] = np.minimum(v[given], net.seg_speed_kmh[given])
    return v


def service_minutes(net: Network, profile: Profile) -> np.ndarray:
    """Minutes to serve one pass of each segment."""
    return net.seg_length / 1000.0 / _speeds(net, profile.service_speed) * 60.0


def deadhead_minutes(net: Network, profile: Profile) -> np.ndarray:
    """Minutes to drive each segment without servicing it."""
    return net.seg_length / 1000.0 / _speeds(net, profile.deadhead_speed) * 60.0
