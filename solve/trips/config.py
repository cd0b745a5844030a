"""Vehicle capacities and intermediate facilities, read from a config and validated up front.

A *capacity* is one thing on the vehicle that service uses up: a hopper or body
that fills with what is swept or collected, a water tank or a salt load that
empties. Either way crewcut counts the amount *used since the last reset*; it
may never exceed ``limit``. ``per_km`` gives how much one service pass uses per
kilometre (per curb-km or lane-km: one required pass of a street), by road
class. ``end_empty``: what was used must be reset before the route returns to
its depot (a body is emptied at a dump site on the way home).

A *facility* (an intermediate facility: dump site, water point, salt depot) is
a place on the network where a vehicle spends ``minutes`` and which resets the
capacities it names, open ``hours`` (one clock interval a day).

Config (TOML)::

    [capacity.hopper]
    limit = 6.0                 # in the unit below
    unit = "m3"
    per_km = { default = 0.5, primary = 0.9 }
    end_empty = true

    [[facilities]]
    id = "east-tip"
    kind = "dump_site"          # dump_site | water_point | salt_depot | other
    location = [-30.51, 45.20]  # lon, lat; snapped to the network like a depot; or node = N
    hours = "05:00-22:00"
    minutes = 15
    resets = ["hopper"]
"""
from __future__ import annotations

import math
import re
from dataclasses import dataclass
from functools import cached_property

from crewcut.solve.calendar.postings import clock, parse_clock
from crewcut.solve.errors import InputError

FACILITY_KINDS = ("dump_site", "water_point", "salt_depot", "other")
_NAME_RE = re.compile(r"[A-Za-z][A-Za-z0-9_-]{0,31}")
_CAP_KEYS = {"limit", "unit", "per_km", "end_empty"}
_FAC_KEYS = {"id", "kind", "location", "node", "hours", "minutes", "resets"}
FACILITY_MINUTES_MAX = 600.0  # a stay of at most ten hours (common practice, no source)


@dataclass(frozen=True)
class Capacity:
    """One capacity of the vehicle (see the module docstring)."""

    name: str
    limit: float
    unit: str
    per_km: tuple[tuple[str, float], ...]  # (road class, amount per service-pass km); always has "default"
    end_empty: bool = False

    @cached_property
    def _table(self) -> dict[str, float]:
        return dict(self.per_km)

    def rate(self, road_class: str) -> float:
        """Amount one service pass uses per km on a street of ``road_class``."""
        table = self._table
        return float(table.get(road_class, table["default"]))

    def to_config(self) -> dict:
        return {"limit": self.limit, "unit": self.unit, "per_km": dict(self.per_km), "end_empty": self.end_empty}


@dataclass(frozen=True)
class Facility:
    """One intermediate facility as configured (its node is found by :func:`crewcut.solve.trips.place.place_facilities`)."""

    id: str
    kind: str
    resets: tuple[str, ...]
    minutes: float
    open_min: int
    close_min: int
    lonlat: tuple[float, float] | None = None
    node: int | None = None

    @property
    def hours(self) -> str:
        return f"{clock(self.open_min)}-{clock(self.close_min)}"

    def to_config(self) -> dict:
        d: dict = {"id": self.id, "kind": self.kind}
        if self.lonlat is not None:
            d["location"] = list(self.lonlat)
        else:
            d["node"] = self.node
        d.update(hours=self.hours, minutes=self.minutes, resets=list(self.resets))
        return d


def _number(where: str, value, *, positive: bool = True) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise InputError(f"{where} must be a number, got {value!r}")
    if value < 0 or (positive and value == 0):
        raise InputError(f"{where} is {value!r}; it must be {'greater than zero' if positive else 'zero or more'}")
    return float(value)


def capacities_from_config(data, source: str) -> tuple[Capacity, ...]:
    """The ``[capacity.NAME]`` tables, validated; ordered by name (so plans are deterministic)."""
    if not isinstance(data, dict):
        raise InputError(f"{source}: 'capacity' must be a table of [capacity.NAME] tables")
    out = []
    for name in sorted(data):
        where = f"{source}: capacity.{name}"
        if not _NAME_RE.fullmatch(name):
            raise InputError(f"{where}: the name is not allowed",
                             "a letter, then letters, digits, '-' or '_', at most 32 characters, e.g. hopper")
        sub = data[name]
        if not isinstance(sub, dict):
            raise InputError(f"{where} must be a table")
        for key in sub:
            if key not in _CAP_KEYS:
                raise InputError(f"{where}: unknown key '{key}'", f"allowed: {', '.join(sorted(_CAP_KEYS))}")
        if "limit" not in sub or "per_km" not in sub:
            raise InputError(f"{where} needs 'limit' and 'per_km'",
                             "e.g. limit = 6.0 and per_km = { default = 0.5 } (amount per km of service pass)")
        limit = _number(f"{where}.limit", sub["limit"])
        unit = sub.get("unit", "")
        if not isinstance(unit, str) or len(unit) > 16 or not unit.isprintable():
            raise InputError(f"{where}.unit must be a short text such as \"m3\" or \"t\", got {unit!r}")
        rates = sub["per_km"]
        if not isinstance(rates, dict) or not rates:
            raise InputError(f"{where}.per_km must be a table of road class = amount per km",
                             "e.g. per_km = { default = 0.5, primary = 0.9 }")
        table = {str(k): _number(f"{where}.per_km.{k}", v, positive=False) for k, v in rates.items()}
        table.setdefault("default", 0.0)
        end_empty = sub.get("end_empty", False)
        if not isinstance(end_empty, bool):
            raise InputError(f"{where}.end_empty must be true or false, got {end_empty!r}")
        out.append(Capacity(name, limit, unit, tuple(sorted(table.items())), end_empty))
    return tuple(out)


def facilities_from_config(data, capacities: tuple[Capacity, ...], source: str) -> tuple[Facility, ...]:
    """The ``[[facilities]]`` list, validated against the capacities it resets."""
    if not isinstance(data, list):
        raise InputError(f"{source}: 'facilities' must be an array of tables ([[facilities]])")
    names = {c.name for c in capacities}
    seen: set[str] = set()
    out = []
    for i, f in enumerate(data):
        where = f"{source}: facilities[{i}]"
        if not isinstance(f, dict):
            raise InputError(f"{where} must be a table")
        for key in f:
            if key not in _FAC_KEYS:
                raise InputError(f"{where}: unknown key '{key}'", f"allowed: {', '.join(sorted(_FAC_KEYS))}")
        fid = f.get("id")
        if not isinstance(fid, str) or not fid.strip() or len(fid) > 64 or not fid.isprintable():
            raise InputError(f"{where} has no usable 'id'", "give each facility a short printable id, e.g. \"east-tip\"")
        where = f"{where} ('{fid}')"
        if fid in seen:
            raise InputError(f"{where}: facility id used twice", "facility ids must be unique")
        seen.add(fid)
        kind = f.get("kind")
        if kind not in FACILITY_KINDS:
            raise InputError(f"{where}: kind is {kind!r}", f"allowed: {', '.join(FACILITY_KINDS)}")
        resets = f.get("resets")
        if not isinstance(resets, list) or not resets or not all(isinstance(r, str) for r in resets):
            raise InputError(f"{where}: 'resets' must be a non-empty list of capacity names",
                             f"capacities of this config: {', '.join(sorted(names)) or 'none ([capacity.NAME])'}")
        unknown = [r for r in resets if r not in names]
        if unknown:
            raise InputError(f"{where}: resets {', '.join(unknown)}, which is not a capacity of this config",
                             f"capacities: {', '.join(sorted(names)) or 'none: add [capacity.NAME] tables'}")
        minutes = _number(f"{where}.minutes", f.get("minutes", 0), positive=False)
        if minutes > FACILITY_MINUTES_MAX:
            raise InputError(f"{where}.minutes is {minutes:g}; at most {FACILITY_MINUTES_MAX:g} minutes")
        hours = f.get("hours", "00:00-24:00")
        if not isinstance(hours, str) or hours.count("-") != 1:
            raise InputError(f"{where}.hours is {hours!r}", "write opening hours as HH:MM-HH:MM, e.g. \"05:00-22:00\"")
        a, b = (parse_clock(h, f"{where}.hours") for h in hours.split("-"))
        if b <= a:
            raise InputError(f"{where}.hours {hours!r} closes before it opens",
                             "write the opening time first; hours across midnight are not supported")
        lonlat, node = f.get("location"), f.get("node")
        if (lonlat is None) == (node is None):
            raise InputError(f"{where} needs exactly one of 'location' = [lon, lat] and 'node' = N")
        if lonlat is not None:
            if not isinstance(lonlat, list) or len(lonlat) != 2 or not all(
                    isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v) for v in lonlat) \
                    or not (-180 <= lonlat[0] <= 180 and -90 <= lonlat[1] <= 90):
                raise InputError(f"{where}: location {lonlat!r} is not [lon, lat]",
                                 "give [longitude, latitude] in degrees, longitude first")
            lonlat = (float(lonlat[0]), float(lonlat[1]))
        elif isinstance(node, bool) or not isinstance(node, int) or node < 0:
            raise InputError(f"{where}: node {node!r} is not a node id")
        out.append(Facility(fid, kind, tuple(sorted(set(resets))), minutes, a, b, lonlat, node))
    return tuple(out)


def check_trip_settings(capacities: tuple[Capacity, ...], facilities: tuple[Facility, ...], source: str) -> None:
    """Every capacity can be reset somewhere; facilities only with capacities."""
    if facilities and not capacities:
        raise InputError(f"{source}: facilities are given but no capacity", "add [capacity.NAME] tables, or remove "
                         "the [[facilities]]")
    for c in capacities:
        if not any(c.name in f.resets for f in facilities):
            raise InputError(f"{source}: capacity.{c.name}: no facility resets it",
                             f"add a [[facilities]] entry with resets = [\"{c.name}\"], or remove the capacity")
