"""The vehicle a work profile sends out: its kind (motor or foot), whether it is heavy, its size.

Read from a profile's ``[vehicle]`` table and validated up front: an unknown
key, a wrong type or a figure outside the ranges below raises
:class:`InputError` naming the setting.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

from crewcut.solve.errors import InputError

VEHICLE_KINDS = ("motor", "foot")
# The largest figure each size setting may take (common practice, no source): beyond
# these a figure is a typing slip (a weight in kilograms, a length in feet), not a street vehicle.
SIZE_LIMITS = {"weight_t": (60.0, "tonnes"), "height_m": (6.0, "metres"), "width_m": (4.0, "metres"),
               "length_m": (30.0, "metres")}
# which OpenStreetMap limit tag each size setting is compared with
SIZE_TAGS = {"weight_t": "maxweight", "height_m": "maxheight", "width_m": "maxwidth", "length_m": "maxlength"}
VEHICLE_KEYS = ("kind", "heavy", *SIZE_LIMITS)


@dataclass(frozen=True)
class Vehicle:
    """Kind ("motor" or "foot"), heavy (an OpenStreetMap ``hgv``) and optional size figures."""

    kind: str = "motor"
    heavy: bool = False
    weight_t: float | None = None
    height_m: float | None = None
    width_m: float | None = None
    length_m: float | None = None

    def sizes(self) -> dict[str, float]:
        """The size settings that are given, setting name -> figure."""
        return {k: getattr(self, k) for k in SIZE_LIMITS if getattr(self, k) is not None}


def vehicle_from_dict(sub, source: str) -> Vehicle:
    """Validate a parsed ``[vehicle]`` table."""
    if not isinstance(sub, dict):
        raise InputError(f"{source}: 'vehicle' must be a table ([vehicle])")
    for key in sub:
        if key not in VEHICLE_KEYS:
            raise InputError(f"{source}: unknown key 'vehicle.{key}'", f"allowed in [vehicle]: {', '.join(VEHICLE_KEYS)}")
    kind = sub.get("kind", "motor")
    if kind not in VEHICLE_KINDS:
        raise InputError(f"{source}: setting 'vehicle.kind' is {kind!r}", "use \"motor\" or \"foot\"")
    heavy = sub.get("heavy", False)
    if not isinstance(heavy, bool):
        raise InputError(f"{source}: setting 'vehicle.heavy' must be true or false, got {heavy!r}")
    sizes = {}
    for key, (top, unit) in SIZE_LIMITS.items():
        if key not in sub:
            continue
        value = sub[key]
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise InputError(f"{source}: setting 'vehicle.{key}' must be a number (in {unit}), got {value!r}",
                             f"give a plain number of {unit}, e.g. {key} = 3.5; units are not written")
        if not math.isfinite(value) or value <= 0 or value > top:
            raise InputError(f"{source}: setting 'vehicle.{key}' is {value!r}",
                             f"give a number of {unit} greater than zero and at most {top:g}")
        sizes[key] = float(value)
    if kind == "foot" and (heavy or sizes):
        given = ", ".join(f"vehicle.{k}" for k in (["heavy"] if heavy else []) + list(sizes))
        raise InputError(f"{source}: {given} is set for a walking profile (vehicle.kind = \"foot\")",
                         "remove the size settings, or set kind = \"motor\"")
    return Vehicle(kind=kind, heavy=heavy, **sizes)
