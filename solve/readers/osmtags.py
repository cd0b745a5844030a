"""OpenStreetMap tags read as rules for one vehicle: access, service kind, direction, size limits, postings.

The rules are written out in :mod:`crewcut.solve.readers.osm`'s docstring; this
module applies them to one way's tags (an ``osmium`` TagList or a dict).
"""
from __future__ import annotations

import re
from dataclasses import dataclass

from crewcut.solve.calendar.postings import OSM_POSTED_KEYS, Posting, read_posted
from crewcut.solve.vehicle import SIZE_TAGS, Vehicle

ONEWAY_YES = ("yes", "1", "true")
ONEWAY_NO = ("no", "0", "false")
ONEWAY_UNPLANNABLE = ("reversible", "alternating")  # direction changes with the time of day
IMPLIED_ONEWAY_JUNCTIONS = ("roundabout", "circular")
IMPLIED_ONEWAY_HIGHWAYS = ("motorway", "motorway_link")
# Access values that shut the way to the vehicle. "agricultural"/"forestry" open a way
# only to farm or forest vehicles, "emergency" only to emergency services, "military"
# only to the armed forces. "discouraged" (allowed, not advised) keeps the way.
EXCLUDED_ACCESS = ("no", "private", "agricultural", "forestry", "emergency", "military")
# Values that allow service: "yes", "permissive", "designated", and also "destination",
# "delivery" and "customers": a sweeper, plough or refuse truck serves the street itself.
# Any other value (unknown, misspelt) keeps the way.
MOTOR_ACCESS_KEYS = ("motor_vehicle", "vehicle", "access")  # most specific first
HGV_KEY = "hgv"
FOOT_ACCESS_KEYS = ("foot", "access")
# service=* kinds left out by default: not streets a crew serves
EXCLUDED_SERVICE_KINDS = ("parking_aisle", "driveway", "drive-through", "emergency_access")
NO_LIMIT = ("none", "default", "unsigned", "no")
FOOT_M = 0.3048
INCH_M = 0.0254
WEIGHT_UNITS_T = {"t": 1.0, "kg": 0.001, "st": 0.90718474, "lbs": 0.00045359237}
LENGTH_UNITS_M = {"m": 1.0, "cm": 0.01, "ft": FOOT_M}
_NUMBER_UNIT = re.compile(r"^(\d+(?:\.\d+)?)\s*([a-z]*)$")
_FEET_INCHES = re.compile(r"""^(\d+(?:\.\d+)?)\s*'\s*(?:(\d+(?:\.\d+)?)\s*")?$""")


@dataclass(frozen=True)
class WayRules:
    """What the reader keeps, from the profile."""

    highways: frozenset
    vehicle: Vehicle
    excluded_service: frozenset


def rules_for(profile) -> WayRules:
    keep = set(profile.osm_keep_service_kinds)
    return WayRules(frozenset(profile.osm_highways), profile.vehicle,
                    frozenset(k for k in EXCLUDED_SERVICE_KINDS if k not in keep))


def access_keys(vehicle: Vehicle) -> tuple[str, ...]:
    """The access keys that speak for the vehicle, most specific first."""
    if vehicle.kind == "foot":
        return FOOT_ACCESS_KEYS
    return ((HGV_KEY,) if vehicle.heavy else ()) + MOTOR_ACCESS_KEYS


def access_refusal(tags, vehicle: Vehicle) -> str | None:
    """``"key=value"`` of the most specific access tag when it shuts the way, else None."""
    for key in access_keys(vehicle):
        value = tags.get(key)
        if value is not None:
            return f"{key}={value}" if value in EXCLUDED_ACCESS else None
    return None


def way_direction(tags) -> int | None:
    """1 one-way as drawn, -1 against the drawing, 0 two-way, None when it cannot be planned.

    ``oneway:conditional`` (one-way at some hours) and ``oneway:bicycle`` are not read.
    """
    ow = tags.get("oneway")
    if ow in ONEWAY_YES:
        return 1
    if ow == "-1":
        return -1
    if ow in ONEWAY_UNPLANNABLE:
        return None
    if ow is None and (tags.get("junction") in IMPLIED_ONEWAY_JUNCTIONS
                       or tags.get("highway") in IMPLIED_ONEWAY_HIGHWAYS):
        return 1
    return 0


def parse_limit(value: str, key: str) -> float | None:
    """A limit tag's value in tonnes (maxweight) or metres; ``inf`` for no limit; None if unreadable."""
    v = value.strip().lower()
    if v in NO_LIMIT:
        return float("inf")
    m = _NUMBER_UNIT.match(v)
    if m:
        units = WEIGHT_UNITS_T if key == "maxweight" else LENGTH_UNITS_M
        factor = units.get(m.group(2) or ("t" if key == "maxweight" else "m"))
        figure = float(m.group(1)) * factor if factor else 0.0
        return figure if figure > 0 else None
    m = _FEET_INCHES.match(v)
    if m and key != "maxweight":
        figure = float(m.group(1)) * FOOT_M + float(m.group(2) or 0) * INCH_M
        return figure if figure > 0 else None
    return None


def size_verdict(tags, vehicle: Vehicle) -> tuple[str | None, list[str]]:
    """(``"maxheight=3.2"`` when a limit is below the vehicle's figure, else None; unreadable limit tags)."""
    unreadable = []
    for setting, figure in vehicle.sizes().items():
        key = SIZE_TAGS[setting]
        raw = tags.get(key)
        if raw is None:
            continue
        limit = parse_limit(raw, key)
        if limit is None:
            unreadable.append(f"{key}={raw}")
        elif limit < figure:
            return f"{key}={raw}", unreadable
    return None, unreadable


def way_refusal(tags, rules: WayRules) -> str | None:
    """Why a way with a listed highway value is left out (``"access=private"``), or None to keep it.

    Size limits are judged apart (:func:`size_verdict`) so that a vehicle too big for
    every street can be told.
    """
    if tags.get("area") == "yes":
        return "area=yes"
    refusal = access_refusal(tags, rules.vehicle)
    if refusal:
        return refusal
    if tags.get("service") in rules.excluded_service:
        return f"service={tags.get('service')}"
    if rules.vehicle.kind == "motor" and way_direction(tags) is None:
        return f"oneway={tags.get('oneway')}"
    return None


def way_postings(tags, way_id: int) -> dict[str, Posting]:
    """Posted sweeping times of a way, keyed ``"both"``/``"left"``/``"right"`` as drawn.

    Read from ``parking:both|left|right:restriction:conditional`` (``no_parking @ (Tu 08:00-10:00)``;
    OpenStreetMap wiki "Key:parking": left and right are relative to the way's drawn direction,
    so the reader swaps them when it turns an ``oneway=-1`` way round). InputError names the way and the tag.
    """
    if not any(tags.get(k) is not None for k in OSM_POSTED_KEYS.values()):
        return {}
    return read_posted(tags, f"way/{way_id}", OSM_POSTED_KEYS, conditional=True)
