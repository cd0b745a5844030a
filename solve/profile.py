"""Work profiles: speeds, service rules, turn penalties, shift limits and crews, from TOML.

Parameters are validated up front, all of them, before any work starts: an
unknown key, a wrong type or an impossible value raises :class:`InputError`
naming the key and what is allowed.
"""
from __future__ import annotations

import math
import tomllib
from dataclasses import asdict, dataclass, field, fields, replace
from importlib import resources
from pathlib import Path

from crewcut.solve.calendar.cycle import Cycle, check_days, make_cycle
from crewcut.solve.errors import InputError
from crewcut.solve.network.model import SERVICE_NAMES
from crewcut.solve.trips.config import (Capacity, Facility, capacities_from_config, check_trip_settings,
                                        facilities_from_config)
from crewcut.solve.vehicle import Vehicle, vehicle_from_dict

UNSERVABLE_POLICIES = ("refuse", "leave_out")  # see crewcut.solve.network.scope
TURN_KINDS = ("u_turn", "across_traffic", "with_traffic", "straight")

# Keys allowed in each table, with the type each value must have.
_SCHEMA: dict[str, dict[str, type | tuple]] = {
    "profile": {
        "name": str,
        "description": str,
        "traffic": str,
        "ignore_oneway": bool,
        "shift_limit_min": (int, float),
        "depot_snap_max_m": (int, float),
    },
    "turn_penalty_s": {k: (int, float) for k in TURN_KINDS},
    "network": {"snap_tolerance_m": (int, float), "split_at_touch": bool, "unservable": str, "service_area": str},
    "osm": {"highways": list, "keep_service_kinds": list},
    "cycle": {"days": list, "shift_start": str},
}
_CLASS_TABLES = {
    "service_speed_kmh": (int, float),
    "deadhead_speed_kmh": (int, float),
    "default_service": str,
    "priority": int,
}
# The range each number may take (common practice, no source): a speed from a walking pace to a
# motorway's; a turn that costs at most ten minutes; snapping that joins line ends a few metres apart,
# not separate intersections; a depot at most 100 km from the network; a priority from 0 to 100.
SPEED_RANGE_KMH = (0.5, 200.0)
TURN_PENALTY_MAX_S = 600.0
SNAP_TOLERANCE_MAX_M = 50.0
DEPOT_SNAP_MAX_M = 100_000.0
PRIORITY_RANGE = (0, 100)
_CREW_KEYS = {"id": str, "depot": list, "depot_node": int, "shift_limit_min": (int, float), "days_off": list}
# A crew id names files, map labels and route sheets and is read on a screen in the cab:
# short and printable (common practice, no source; "printable" as Python's str.isprintable,
# which follows the Unicode categories: no control, format, surrogate, unassigned or
# separator character other than the space).
CREW_ID_MAX = 64
CREW_ID_HINT = f"use printable characters only, on one line, at most {CREW_ID_MAX} characters, e.g. north-1"


def crew_id_shown(cid: str) -> str:
    """A crew id quoted for a message: escapes visible, cut to 40 characters."""
    return repr(cid[:40]) + (f"... ({len(cid)} characters)" if len(cid) > 40 else "")


def crew_id_problem(cid) -> str | None:
    """What is wrong with a crew id (``"crew id '...' ..."``), or None when it is acceptable.

    Acceptable: a string, not empty after stripping spaces, at most
    :data:`CREW_ID_MAX` characters, without line breaks and printable.
    """
    if not isinstance(cid, str):
        return f"crew id {cid!r} is not text"
    if not cid.strip():
        return "crew id is empty"
    if len(cid) > CREW_ID_MAX:
        return f"crew id {crew_id_shown(cid)} is longer than {CREW_ID_MAX} characters"
    for ch in cid:
        if ch in "\n\r\v\f\x1c\x1d\x1e\x85\u2028\u2029":
            return f"crew id {crew_id_shown(cid)} holds a line break (U+{ord(ch):04X})"
        if not ch.isprintable():
            return f"crew id {crew_id_shown(cid)} holds a character that is not printable (U+{ord(ch):04X})"
    return None


@dataclass(frozen=True)
class Crew:
    """One crew: its id, its depot (lon/lat or node id) and its shift limit in minutes."""

    id: str
    shift_limit_min: float
    depot_lonlat: tuple[float, float] | None = None
    depot_node: int | None = None
    days_off: tuple[str, ...] = ()  # cycle days the crew does not work (cycle plans only)


@dataclass(frozen=True)
class Profile:
    """Everything about how a kind of work is done. See ``configs/*.toml``."""

    name: str = "curb-sweeping"
    description: str = ""
    traffic: str = "right"  # "right" or "left": which side vehicles drive on
    ignore_oneway: bool = False  # walkers may go against one-way streets
    shift_limit_min: float = 480.0
    depot_snap_max_m: float = 500.0
    turn_penalty_s: dict[str, float] = field(default_factory=lambda: {
        "u_turn": 90.0, "across_traffic": 20.0, "with_traffic": 8.0, "straight": 0.0})
    service_speed_kmh: dict[str, float] = field(default_factory=lambda: {"default": 8.0})
    deadhead_speed_kmh: dict[str, float] = field(default_factory=lambda: {"default": 30.0})
    default_service: dict[str, str] = field(default_factory=lambda: {"default": "both_sides"})
    priority: dict[str, int] = field(default_factory=lambda: {"default": 1})
    snap_tolerance_m: float = 1.0
    split_at_touch: bool = True
    osm_highways: tuple[str, ...] = (
        "motorway", "trunk", "primary", "secondary", "tertiary", "unclassified",
        "residential", "living_street", "service", "motorway_link", "trunk_link",
        "primary_link", "secondary_link", "tertiary_link", "road")
    # OpenStreetMap service=* kinds left out unless osm.keep_service_kinds names them
    osm_keep_service_kinds: tuple[str, ...] = ()
    vehicle: Vehicle = field(default_factory=Vehicle)
    # streets no closed route from a depot can serve: "leave_out" (listed) or "refuse"
    unservable: str = "leave_out"
    service_area: str | None = None  # a GeoJSON polygon file (a config's relative path is taken from its folder)
    cycle: Cycle | None = None  # the sweeping cycle ([cycle]); None: one shift per crew
    crews: tuple[Crew, ...] = ()
    source: str = "<built-in defaults>"
    capacities: tuple[Capacity, ...] = ()  # [capacity.NAME]: what service uses up (crewcut.solve.trips.config)
    facilities: tuple[Facility, ...] = ()  # [[facilities]]: dump sites, water points, salt depots

    # ------------------------------------------------------------ lookups
    def _by_class(self, table: dict, road_class: str):
        return table.get(road_class, table["default"])

    def service_speed(self, road_class: str) -> float:
        return float(self._by_class(self.service_speed_kmh, road_class))

    def deadhead_speed(self, road_class: str) -> float:
        return float(self._by_class(self.deadhead_speed_kmh, road_class))

    def service_for(self, road_class: str) -> str:
        return str(self._by_class(self.default_service, road_class))

    def priority_for(self, road_class: str) -> int:
        return int(self._by_class(self.priority, road_class))

    def to_dict(self) -> dict:
        """Plain data, as recorded in plan files."""
        return {
            "name": self.name, "traffic": self.traffic, "ignore_oneway": self.ignore_oneway,
            "shift_limit_min": self.shift_limit_min, "depot_snap_max_m": self.depot_snap_max_m,
            "turn_penalty_s": dict(self.turn_penalty_s),
            "service_speed_kmh": dict(self.service_speed_kmh),
            "deadhead_speed_kmh": dict(self.deadhead_speed_kmh),
            "default_service": dict(self.default_service), "priority": dict(self.priority),
            "snap_tolerance_m": self.snap_tolerance_m, "split_at_touch": self.split_at_touch,
            # what decides which OpenStreetMap ways become streets: a plan's network is read again with these
            "osm_highways": list(self.osm_highways), "osm_keep_service_kinds": list(self.osm_keep_service_kinds),
            "vehicle": {k: v for k, v in asdict(self.vehicle).items() if v is not None},
            # only with trips, so that plans without them keep their bytes
            **({"capacity": {c.name: c.to_config() for c in self.capacities},
                "facilities": [f.to_config() for f in self.facilities]} if self.capacities else {}),
        }

    def with_recorded(self, base: "Profile") -> "Profile":
        """``base`` with this profile's recorded settings (those :meth:`to_dict` gives)."""
        return replace(base, **recorded_fields(self.to_dict()))


def recorded_fields(record: dict) -> dict:
    """A recorded profile (:meth:`Profile.to_dict`, or a plan file's record of it) as Profile field values.

    Keys that are not Profile fields are dropped; lists become tuples, tables dicts, the vehicle a Vehicle.
    """
    names = {f.name for f in fields(Profile)} | {"capacity"}
    out: dict = {}
    for key, value in record.items():
        if key not in names:
            continue
        if key == "facilities":
            continue  # read with "capacity"
        if key == "capacity":
            caps = capacities_from_config(value, "settings")
            out["capacities"] = caps
            out["facilities"] = facilities_from_config(record.get("facilities", []), caps, "settings")
            continue
        if key == "vehicle":
            value = Vehicle(**value)
        elif key in ("osm_highways", "osm_keep_service_kinds"):
            value = tuple(value)
        elif isinstance(value, dict):
            value = dict(value)
        out[key] = value
    return out


def _type_name(t) -> str:
    if isinstance(t, tuple):
        return "a number"
    return {str: "a string", bool: "true or false", int: "an integer", list: "a list"}[t]


def _check_type(where: str, key: str, value, t) -> None:
    ok = isinstance(value, t) and not (t != bool and t != (bool,) and isinstance(value, bool))
    if not ok:
        raise InputError(f"{where}: setting '{key}' must be {_type_name(t)}, got {value!r}")


def _positive(where: str, key: str, value: float, allow_zero: bool = False) -> None:
    if not math.isfinite(value) or value < 0 or (value == 0 and not allow_zero):
        need = "zero or more" if allow_zero else "greater than zero"
        raise InputError(f"{where}: setting '{key}' is {value!r}; it must be a finite number {need}")


def _at_most(where: str, key: str, value: float, top: float, unit: str) -> None:
    if value > top:
        raise InputError(f"{where}: setting '{key}' is {value:g} {unit}; it must be at most {top:g} {unit}")


def profile_from_dict(data: dict, source: str = "<dict>") -> Profile:
    """Validate a parsed TOML document and build a :class:`Profile`."""
    allowed = set(_SCHEMA) | set(_CLASS_TABLES) | {"crews", "vehicle", "capacity", "facilities"}
    for key in data:
        if key not in allowed:
            raise InputError(f"{source}: unknown table or key '{key}'",
                             f"allowed at the top level: {', '.join(sorted(allowed))}")
    kw: dict = {"source": source}
    for table, keys in _SCHEMA.items():
        sub = data.get(table, {})
        if not isinstance(sub, dict):
            raise InputError(f"{source}: '{table}' must be a table ([{table}])")
        for key, value in sub.items():
            if key not in keys:
                raise InputError(f"{source}: unknown key '{table}.{key}'",
                                 f"allowed in [{table}]: {', '.join(sorted(keys))}")
            _check_type(source, f"{table}.{key}", value, keys[key])
    p = data.get("profile", {})
    for key in ("name", "description", "traffic", "ignore_oneway"):
        if key in p:
            kw[key] = p[key]
    if kw.get("traffic", "right") not in ("right", "left"):
        raise InputError(f"{source}: setting 'profile.traffic' is {kw['traffic']!r}",
                         "use \"right\" (vehicles keep right) or \"left\"")
    for key in ("shift_limit_min", "depot_snap_max_m"):
        if key in p:
            _positive(source, f"profile.{key}", float(p[key]))
            kw[key] = float(p[key])
    if "depot_snap_max_m" in kw:
        _at_most(source, "profile.depot_snap_max_m", kw["depot_snap_max_m"], DEPOT_SNAP_MAX_M, "m")
    if "shift_limit_min" in kw and kw["shift_limit_min"] > 24 * 60:
        raise InputError(f"{source}: setting 'profile.shift_limit_min' is {kw['shift_limit_min']:g} minutes, "
                         "longer than a day", "give the shift length in minutes, e.g. 480 for 8 hours")
    tp = data.get("turn_penalty_s", {})
    if tp:
        pen = dict(Profile().turn_penalty_s)
        for key, value in tp.items():
            _positive(source, f"turn_penalty_s.{key}", float(value), allow_zero=True)
            _at_most(source, f"turn_penalty_s.{key}", float(value), TURN_PENALTY_MAX_S, "s")
            pen[key] = float(value)
        kw["turn_penalty_s"] = pen
    net = data.get("network", {})
    if "snap_tolerance_m" in net:
        _positive(source, "network.snap_tolerance_m", float(net["snap_tolerance_m"]), allow_zero=True)
        _at_most(source, "network.snap_tolerance_m", float(net["snap_tolerance_m"]), SNAP_TOLERANCE_MAX_M, "m")
        kw["snap_tolerance_m"] = float(net["snap_tolerance_m"])
    if "split_at_touch" in net:
        kw["split_at_touch"] = net["split_at_touch"]
    if "unservable" in net:
        if net["unservable"] not in UNSERVABLE_POLICIES:
            raise InputError(f"{source}: setting 'network.unservable' is {net['unservable']!r}",
                             f"allowed: {', '.join(UNSERVABLE_POLICIES)} (what to do with streets no closed route "
                             "from a depot can serve)")
        kw["unservable"] = net["unservable"]
    if "service_area" in net:
        if not net["service_area"].strip():
            raise InputError(f"{source}: setting 'network.service_area' is empty",
                             "give the GeoJSON file of the district's polygon, or remove the setting")
        kw["service_area"] = net["service_area"]
    if "highways" in data.get("osm", {}):
        hw = data["osm"]["highways"]
        if not hw or not all(isinstance(h, str) for h in hw):
            raise InputError(f"{source}: 'osm.highways' must be a non-empty list of highway values")
        kw["osm_highways"] = tuple(hw)
    if "keep_service_kinds" in data.get("osm", {}):
        ks = data["osm"]["keep_service_kinds"]
        if not all(isinstance(k, str) and k.strip() for k in ks):
            raise InputError(f"{source}: 'osm.keep_service_kinds' must be a list of service values",
                             'e.g. keep_service_kinds = ["driveway"]')
        kw["osm_keep_service_kinds"] = tuple(ks)
    if "vehicle" in data:
        kw["vehicle"] = vehicle_from_dict(data["vehicle"], source)
    for table, t in _CLASS_TABLES.items():
        sub = data.get(table)
        if sub is None:
            continue
        if not isinstance(sub, dict):
            raise InputError(f"{source}: '{table}' must be a table of road class = value")
        out = {}
        for cls, value in sub.items():
            _check_type(source, f"{table}.{cls}", value, t)
            if table.endswith("_kmh"):
                lo, hi = SPEED_RANGE_KMH
                if not (math.isfinite(value) and lo <= value <= hi):
                    raise InputError(f"{source}: setting '{table}.{cls}' is {value:g} km/h, not a working speed",
                                     f"give speeds in km/h, from {lo:g} to {hi:g}")
                value = float(value)
            if table == "priority" and not PRIORITY_RANGE[0] <= value <= PRIORITY_RANGE[1]:
                raise InputError(f"{source}: setting '{table}.{cls}' is {value}",
                                 f"give a whole number from {PRIORITY_RANGE[0]} to {PRIORITY_RANGE[1]} "
                                 "(lower numbers can wait first)")
            if table == "default_service" and value not in SERVICE_NAMES:
                raise InputError(f"{source}: setting '{table}.{cls}' is {value!r}",
                                 f"allowed: {', '.join(SERVICE_NAMES)}")
            out[cls] = value
        if "default" not in out:
            out["default"] = getattr(Profile(), table)["default"]
        kw[table] = out
    cyc = data.get("cycle")
    if cyc is not None:
        if "days" not in cyc:
            raise InputError(f"{source}: [cycle] has no 'days'", "e.g. days = [\"mon\", \"tue\", \"wed\", \"thu\", \"fri\"]")
        kw["cycle"] = make_cycle(cyc["days"], cyc.get("shift_start"), f"{source}: [cycle]")
    crews = data.get("crews", [])
    if not isinstance(crews, list):
        raise InputError(f"{source}: 'crews' must be an array of tables ([[crews]])")
    shift = kw.get("shift_limit_min", Profile.shift_limit_min)
    seen: set[str] = set()
    built = []
    for i, c in enumerate(crews):
        where = f"{source}: crews[{i}]"
        if not isinstance(c, dict):
            raise InputError(f"{where} must be a table")
        for key, value in c.items():
            if key not in _CREW_KEYS:
                raise InputError(f"{where}: unknown key '{key}'", f"allowed: {', '.join(_CREW_KEYS)}")
            _check_type(where, key, value, _CREW_KEYS[key])
        if "id" not in c or not c["id"].strip():
            raise InputError(f"{where} has no 'id'", "give each crew a unique id, e.g. id = \"north\"")
        cid = c["id"].strip()
        problem = crew_id_problem(cid)
        if problem:
            raise InputError(f"{where}: {problem}", CREW_ID_HINT)
        if cid in seen:
            raise InputError(f"{where}: crew id '{cid}' is used twice", "crew ids must be unique")
        seen.add(cid)
        limit = float(c.get("shift_limit_min", shift))
        _positive(where, "shift_limit_min", limit)
        if limit > 24 * 60:
            raise InputError(f"{where}: shift_limit_min {limit:g} is longer than a day",
                             "give the shift length in minutes, e.g. 480 for 8 hours")
        lonlat = None
        if "depot" in c:
            d = c["depot"]
            if len(d) != 2 or not all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in d):
                raise InputError(f"{where}: 'depot' must be [lon, lat], got {d!r}")
            lonlat = (float(d[0]), float(d[1]))
            if not (-180 <= lonlat[0] <= 180 and -90 <= lonlat[1] <= 90):
                raise InputError(f"{where}: depot {list(lonlat)} is not a lon/lat position",
                                 "give [longitude, latitude] in degrees, longitude first")
        node = c.get("depot_node")
        if lonlat is not None and node is not None:
            raise InputError(f"{where} ('{cid}') has both 'depot' and 'depot_node'; which one is meant cannot be told",
                             "keep one: depot = [lon, lat] (snapped to the nearest street) or depot_node = N")
        if lonlat is None and node is None:
            raise InputError(f"{where} ('{cid}') has no depot", "add depot = [lon, lat] or depot_node = N")
        off = check_days(c["days_off"], f"{where}: days_off") if c.get("days_off") else ()
        if off and kw.get("cycle") is None:
            raise InputError(f"{where} ('{cid}') has days_off but the config has no [cycle]",
                             "add [cycle] days = [...] to the config, or remove days_off")
        bad = [d for d in off if kw.get("cycle") is not None and d not in kw["cycle"].days]
        if bad:
            raise InputError(f"{where} ('{cid}'): days_off {', '.join(bad)} not in the cycle "
                             f"({', '.join(kw['cycle'].days)})", "name days of the cycle")
        built.append(Crew(id=cid, shift_limit_min=limit, depot_lonlat=lonlat, depot_node=node, days_off=off))
    kw["crews"] = tuple(built)
    if "capacity" in data or "facilities" in data:
        kw["capacities"] = capacities_from_config(data.get("capacity", {}), source)
        kw["facilities"] = facilities_from_config(data.get("facilities", []), kw["capacities"], source)
        check_trip_settings(kw["capacities"], kw["facilities"], source)
    return Profile(**kw)


def load_profile(path: str | Path | None) -> Profile:
    """Read a TOML profile; ``None`` gives the built-in curb-sweeping profile."""
    if path is None:
        return builtin_profile("curb-sweeping")
    path = Path(path)
    if not path.is_file():
        names = ", ".join(builtin_profile_names())
        raise InputError(f"config file '{path}' not found", f"give a TOML file; shipped profiles: {names}")
    try:
        data = tomllib.loads(path.read_text(encoding="utf-8"))
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise InputError(f"{path}: not valid TOML ({exc})") from None
    except RecursionError:
        raise InputError(f"{path}: TOML nested too deeply to be a work profile") from None
    profile = profile_from_dict(data, source=str(path))
    if profile.service_area is not None and not Path(profile.service_area).is_absolute():
        return replace(profile, service_area=str(path.parent / profile.service_area))
    return profile


def _configs_dir() -> Path:
    try:  # installed: configs/ is shipped as the package crewcut.solve.configs
        return Path(str(resources.files("crewcut.solve.configs")))
    except ModuleNotFoundError:  # running from a source checkout
        return Path(__file__).resolve().parent.parent / "configs"


def builtin_profile_names() -> list[str]:
    return sorted(p.stem for p in _configs_dir().glob("*.toml"))


def builtin_profile_path(name: str) -> Path:
    path = _configs_dir() / f"{name}.toml"
    if not path.is_file():
        raise InputError(f"no shipped profile named '{name}'", f"shipped: {', '.join(builtin_profile_names())}")
    return path


def builtin_profile(name: str) -> Profile:
    return load_profile(builtin_profile_path(name))
