"""crewcut's street network model and one-crew route engine.

Library use in three calls::

    from crewcut.solve import load_network, load_profile, plan_route
    profile = load_profile("configs/curb-sweeping.toml")      # or None for the default
    net = load_network("streets.geojson", profile)
    route = plan_route(net, profile, depot=net.nearest_node(-30.5, 45.2)[0])
    print(route.totals.total_min, route.method, route.lower_bound_min)

This package never imports ``partition`` (the many-crew layer and command line).
"""
from crewcut.solve.errors import InputError
from crewcut.solve.network.model import Network
from crewcut.solve.profile import Profile, builtin_profile, load_profile
from crewcut.solve.readers import read_network as load_network
from crewcut.solve.result import Route, RouteTotals, Traversal
from crewcut.solve.route import plan_route

__all__ = ["InputError", "Network", "Profile", "Route", "RouteTotals", "Traversal",
           "builtin_profile", "load_network", "load_profile", "plan_route"]
