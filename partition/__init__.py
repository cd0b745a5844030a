"""crewcut: plan street-coverage work for a fleet of crews.

Balanced connected territories, one per crew; a closed, turn-aware route per
crew from its depot at least deadhead (the Chinese postman problem, exact where it
is polynomial, a stated heuristic with a lower bound and gap where it is not);
replanning when the day changes; workload tables, route sheets, maps and GIS
files. The face for Python users is :mod:`crewcut.api`, re-exported here:

>>> import crewcut
>>> sorted(crewcut.__all__)[:4]
['Changes', 'Crew', 'CrewPlan', 'InputError']

The names are loaded on first use, so ``import crewcut.solve`` (the one-crew
engine) does not load the many-crew layer.
"""
from __future__ import annotations

import importlib

__version__ = "0.1.0"

# public name -> module that defines it
_FACE = {
    **{name: "crewcut.api" for name in (
        "Changes", "export", "load_profile", "plan", "read_network", "read_plan", "replan", "report",
        "route_map", "sheets", "table", "territory_map", "verify", "write_demo_town", "write_plan",
        "write_text")},
    "network_from_graph": "crewcut.solve.readers.nxgraph",
    "Crew": "crewcut.solve.profile",
    "Profile": "crewcut.solve.profile",
    "Network": "crewcut.solve.network.model",
    "Route": "crewcut.solve.result",
    "InputError": "crewcut.solve.errors",
    "Plan": "crewcut.plans.model",
    "CrewPlan": "crewcut.plans.model",
}
__all__ = sorted(_FACE)


def __getattr__(name: str):
    module = _FACE.get(name)
    if module is None:
        raise AttributeError(f"module 'crewcut' has no attribute {name!r}")
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value  # later look-ups skip this function
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__))
