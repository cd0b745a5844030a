"""Placing a depot on the network."""
from __future__ import annotations

from .errors import InputError
from .network import Network


def snap_depot(net: Network, lon: float, lat: float, max_m: float, who: str = "depot") -> int:
    """The usable node nearest to (lon, lat); :class:`InputError` when farther than ``max_m``."""
    if not (-180 <= lon <= 180 and -90 <= lat <= 90):
        raise InputError(f"{who} {lon},{lat} is not a lon/lat position",
                         "give longitude first, then latitude, in degrees, e.g. --depot -30.5,45.2")
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


def check_depot_node(net: Network, node: int, who: str = "depot") -> int:
    if not (0 <= node < net.n_nodes):
        raise InputError(f"{who}: node {node} does not exist (the network has nodes 0 to {net.n_nodes - 1})")
    return node
