"""Crews for a plan: from the config's ``[[crews]]`` tables or the shortcut of k crews sharing one depot.

Every crew is a :class:`crewcut.solve.profile.Crew` that ends up with a depot *node*
(a lon/lat depot is snapped to the nearest usable node with
:func:`crewcut.solve.network.depot.snap_depot`) and a shift limit in minutes (a float).
Crews may have different shift limits and different depots. Everything is checked
up front, before any planning starts, with messages that name the crew or setting.
"""
from __future__ import annotations

import dataclasses

import numpy as np

from crewcut.solve.costs import required_passes
from crewcut.solve.network.depot import check_depot_node, snap_depot
from crewcut.solve.errors import InputError
from crewcut.solve.network.model import Network
from crewcut.solve.profile import Crew, Profile


def resolve_crews(net: Network, profile: Profile, *, k: int | None = None,
                  depot_lonlat: tuple[float, float] | None = None,
                  only: list[str] | None = None) -> list[Crew]:
    """The crews to plan for, each with its depot node set (``Crew.depot_node``) and its shift limit in minutes.

    Parameters
    ----------
    net, profile:
        The street network and the work profile (its ``crews`` are the config's crews).
    k, depot_lonlat:
        The shortcut: ``k`` crews sharing one depot at ``depot_lonlat``, each with the
        profile's shift limit. When ``k`` is given without a depot, the k crews share
        the depot of the config's first crew.
    only:
        Crew ids from the config to keep (for a day when only some crews work);
        an id the config does not define is an error.
    """
    n_required = int(np.count_nonzero(required_passes(net, profile).total))
    if k is not None:
        if isinstance(k, bool) or not isinstance(k, (int, np.integer)) or k < 1:
            raise InputError(f"`k` is {k!r}; a plan needs at least one crew",
                             "give a whole number of crews of 1 or more, e.g. 4", param="k")
        _check_count(int(k), n_required)
        if only:
            raise InputError("`k` and `only` cannot be combined",
                             "use `k` for k identical crews, or pick config crews with `only`", param="only")
        if depot_lonlat is not None:
            node = snap_depot(net, depot_lonlat[0], depot_lonlat[1], profile.depot_snap_max_m, who="`depot_lonlat`")
        elif profile.crews:
            node = _crew_depot(net, profile, profile.crews[0])
        else:
            raise InputError("`k` was given without a depot and the config defines no crews",
                             "add `depot_lonlat` (the yard's position), or [[crews]] tables to the config",
                             param="depot_lonlat")
        width = len(str(int(k)))
        crews = [Crew(f"crew-{i + 1:0{width}d}", float(profile.shift_limit_min), depot_lonlat, node)
                 for i in range(int(k))]
    else:
        if depot_lonlat is not None:
            raise InputError("`depot_lonlat` was given without `k`",
                             "give `k` too, or define the crews and their depots in the config", param="k")
        if not profile.crews:
            raise InputError(f"{profile.source}: no crews to plan for",
                             "add [[crews]] tables (id, depot, shift_limit_min) to the config, "
                             "or give `k` and `depot_lonlat`")
        chosen = list(profile.crews)
        if only:
            known = {c.id: c for c in profile.crews}
            for cid in only:
                if cid not in known:
                    raise InputError(f"unknown crew id '{cid}'",
                                     f"crews defined in {profile.source}: {', '.join(sorted(known))}")
            if len(set(only)) != len(only):
                raise InputError("a crew id is given twice in `only`", "name each crew once", param="only")
            keep = set(only)
            chosen = [c for c in profile.crews if c.id in keep]
        _check_count(len(chosen), n_required)
        crews = [dataclasses.replace(c, shift_limit_min=float(c.shift_limit_min), depot_node=_crew_depot(net, profile, c))
                 for c in chosen]
    return crews


def _check_count(count: int, n_required: int) -> None:
    """Before any depot is snapped: at most one crew per segment that needs service."""
    if n_required == 0:
        raise InputError("the network has no segment that needs service under this profile",
                         "check the profile's default_service per road class and the data's service tags")
    if count > n_required:
        raise InputError(f"{count:,} crews but only {n_required:,} segments need service",
                         f"plan for at most {n_required:,} crews")


def _crew_depot(net: Network, profile: Profile, crew) -> int:
    who = f"depot of crew '{crew.id}'"
    if crew.depot_node is not None:
        return check_depot_node(net, crew.depot_node, who=who, usable=True)
    lon, lat = crew.depot_lonlat
    return snap_depot(net, lon, lat, profile.depot_snap_max_m, who=who)
