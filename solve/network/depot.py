"""Placing a depot on the network."""
from __future__ import annotations

import numbers

import numpy as np

from crewcut.solve.errors import InputError
from crewcut.solve.network.model import Network


def snap_depot(net: Network, lon: float, lat: float, max_m: float, who: str = "depot") -> int:
    """The usable node nearest to (lon, lat); :class:`InputError` when farther than ``max_m``."""
    if not (-180 <= lon <= 180 and -90 <= lat <= 90):
        raise InputError(f"{who} {lon},{lat} is not a lon/lat position",
                         "give longitude first, then latitude, in degrees, e.g. -30.5,45.2")
    if not net.has_geometry:
        raise InputError(f"{who} is given as lon/lat but the network has no coordinates (CSV edge list)",
                         "give the depot as a node id (depot_node in the config)")
    try:
        node, dist = net.nearest_node(lon, lat)
    except ValueError as exc:
        raise InputError(f"{who}: {exc}") from None
    if dist > max_m:
        raise InputError(
            f"{who} at {lon:.6f},{lat:.6f} is {dist:,.0f} m from the nearest usable street "
            f"(the limit is {max_m:,.0f} m)",
            "check the depot's coordinates (longitude first), or raise profile.depot_snap_max_m")
    return node


def check_depot_node(net: Network, node, who: str = "depot", usable: bool = False) -> int:
    """``node`` as an int when it is a node of ``net`` (and, with ``usable``, touches an open street).

    The one depot check of the package: the command line, the route engine and the
    bounds all call it.
    """
    if isinstance(node, bool) or not isinstance(node, (numbers.Integral, np.integer)):
        raise InputError(f"{who} must be a node id (an integer), got {node!r}")
    node = int(node)
    if not 0 <= node < net.n_nodes:
        raise InputError(f"{who} node {node} does not exist (the network has nodes 0 to {net.n_nodes - 1})",
                         "give an existing node id, or place the depot by lon/lat")
    if usable:
        open_ = ~net.seg_closed
        if not ((net.seg_u[open_] == node).any() or (net.seg_v[open_] == node).any()):
            raise InputError(f"{who} node {node} ('{net.node_label[node]}') touches no usable street",
                             "place the depot on an open street")
    return node
