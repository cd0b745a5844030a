"""The day's changes a replan is made for, as one value.

A :class:`Changes` says which crews are absent, which extra crews work today
(with their depots), which streets are closed (segment ids or feature ids),
which new streets are open, and today's shift limits of some crews. It is
checked against the parent plan by :func:`crewcut.fleet.day_crews.crews_of_the_day`
and :func:`crewcut.fleet.day_network.resolve_closures`.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Mapping, Sequence

from crewcut.solve.network.model import Network, RawLine
from crewcut.solve.profile import Crew


@dataclass(frozen=True)
class Changes:
    """What differs today from the day the parent plan was made for.

    Attributes
    ----------
    absent: ids of the parent plan's crews not at work today.
    added_crews: extra crews, each with a new id and its depot (``depot_lonlat``, snapped
        to the network, or ``depot_node``); their ``shift_limit_min`` applies unless
        ``shift_limits`` names them.
    closed: streets closed today: segment ids (ints or whole-number strings) or feature ids
        (see :func:`crewcut.fleet.day_network.resolve_closures`).
    opened: streets added today (a :class:`Network` or reader lines); they get new segment ids.
    shift_limits: crew id -> today's shift limit in minutes, for crews at work.
    """

    absent: tuple[str, ...] = ()
    added_crews: tuple[Crew, ...] = ()
    closed: tuple[int | str, ...] = ()
    opened: Network | Sequence[RawLine] | None = None
    shift_limits: Mapping[str, float] = field(default_factory=lambda: MappingProxyType({}))
