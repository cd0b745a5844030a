"""GeoJSON reader (RFC 7946): a FeatureCollection of LineString and MultiLineString.

Properties read from each feature (all optional):

``id``
    The feature's own id (else the Feature's top-level ``id``, else its index).
``name``
    Street name.
``oneway``
    ``yes``/``true``/``1`` (one-way in the drawn direction), ``no``/``false``/``0``,
    or ``-1`` (one-way against the drawn direction: the line is reversed), as
    OpenStreetMap writes it; JSON booleans and numbers are accepted too.
``service``
    ``both_sides``, ``one_pass``, ``each_direction``, ``right_curb``, ``left_curb`` or ``none``; absent means the
    profile's default for the road class.
``class``
    Road class, free text, looked up in the profile's speed and service tables.
``speed_kmh``
    A speed cap for the street (km/h, greater than zero).
``closed``
    ``true`` when the street cannot be driven or served.
``posted``, ``posted:left``, ``posted:right``
    Posted sweeping times (``"tue 08:00-10:00"``, grammar in
    :mod:`crewcut.solve.calendar.postings`) for the whole street or one curb, left
    and right as seen along the drawn line (swapped when ``oneway=-1`` reverses it).

Each part of a MultiLineString becomes its own line with source id ``ID/partK``
(K counted from 1).
"""
from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np

from crewcut.solve.calendar.postings import read_posted, swap_sides
from crewcut.solve.errors import InputError
from crewcut.solve.network.model import SERVICE_NAMES, Network, RawLine
from crewcut.solve.profile import SPEED_RANGE_KMH, Profile
from crewcut.solve.network.repair import build_network

ONEWAY_VALUES = {"yes": 1, "true": 1, "1": 1, "no": 0, "false": 0, "0": 0, "-1": -1}


def parse_oneway(value, where: str) -> int:
    """OpenStreetMap-style oneway value -> 1 (drawn direction), 0 (two-way) or -1 (reversed)."""
    if value is None:
        return 0
    if isinstance(value, bool):
        return int(value)
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        key = str(int(value)) if float(value).is_integer() else str(value)
    else:
        key = str(value).strip().lower()
    if key not in ONEWAY_VALUES:
        raise InputError(f"{where}: unknown oneway value {value!r}",
                         "allowed: yes, no, -1 (one-way against the drawn direction), true, false, 1, 0")
    return ONEWAY_VALUES[key]


def parse_service(value, where: str) -> str | None:
    if value is None or value == "":
        return None
    if not isinstance(value, str) or value.strip() not in SERVICE_NAMES:
        raise InputError(f"{where}: unknown service value {value!r}",
                         f"allowed: {', '.join(SERVICE_NAMES)} (or leave it out for the profile's default)")
    return value.strip()


def parse_speed(value, where: str) -> float | None:
    if value is None or value == "":
        return None
    try:
        speed = float(value)
    except (TypeError, ValueError, OverflowError):
        speed = math.nan
    lo, hi = SPEED_RANGE_KMH
    if isinstance(value, bool) or not math.isfinite(speed) or not lo <= speed <= hi:
        raise InputError(f"{where}: speed_kmh {value!r} is not a speed between {lo:g} and {hi:g} km/h",
                         f"give the street's speed in km/h ({lo:g} to {hi:g}), or leave it out")
    return speed


def parse_closed(value, where: str) -> bool:
    if value is None:
        return False
    if isinstance(value, bool):
        return value
    if isinstance(value, str) and value.strip().lower() in ("yes", "true", "no", "false"):
        return value.strip().lower() in ("yes", "true")
    raise InputError(f"{where}: closed {value!r} is not true or false", "write closed: true or closed: false")


def _is_position(p) -> bool:
    # RFC 7946 section 3.1.1: a position is an array of numbers; JSON strings and booleans are not
    # (type() rather than isinstance(): True is an int to Python).
    return isinstance(p, list) and len(p) >= 2 and type(p[0]) in (int, float) and type(p[1]) in (int, float)


def parse_positions(coords, where: str, min_count: int = 2, shape: str = "a line") -> np.ndarray:
    """A GeoJSON position list -> (k, 2) float array, checked for shape, numbers and range.

    ``min_count`` positions at least (2 for a line, 4 for a polygon's ring), ``shape`` names it in messages.
    """
    if not isinstance(coords, list):
        raise InputError(f"{where}: 'coordinates' is not a list of positions")
    bad = next((j for j, p in enumerate(coords) if not _is_position(p)), None)
    if bad is not None:
        raise InputError(f"{where}: position {bad} is {_short(coords[bad])}, not a pair of JSON numbers",
                         "every position must be [longitude, latitude] in degrees, written as numbers "
                         "(RFC 7946 section 3.1.1), not text")
    try:
        arr = np.array([p[:2] if isinstance(p, list) and len(p) >= 2 else [math.nan] * 3 for p in coords],
                       dtype=np.float64)
    except (TypeError, ValueError):
        raise InputError(f"{where}: a position is not a pair of numbers",
                         "every position must be [longitude, latitude] in degrees") from None
    if arr.ndim != 2 or arr.shape[0] < min_count:
        raise InputError(f"{where}: {shape} needs at least {min_count} positions, found {len(coords)}",
                         "remove the feature or give it a start and an end position" if min_count == 2 else
                         "close each ring: at least 4 positions, the last the same as the first (RFC 7946 3.1.6)")
    if arr.shape[1] != 2 or not np.isfinite(arr).all():
        raise InputError(f"{where}: a position is not a pair of numbers",
                         "every position must be [longitude, latitude] in degrees")
    bad = (np.abs(arr[:, 0]) > 180) | (np.abs(arr[:, 1]) > 90)
    if bad.any():
        lon, lat = arr[int(np.argmax(bad))]
        raise InputError(
            f"{where}: position ({lon:g}, {lat:g}) is outside the longitude/latitude range; "
            "this looks like a projected file (metres), but GeoJSON positions are WGS84 degrees",
            "reproject the file to WGS84 longitude/latitude (EPSG:4326) before reading it")
    return arr


def _short(value, limit: int = 60) -> str:
    text = repr(value)
    return text if len(text) <= limit else text[:limit - 3] + "..."


def features_to_lines(doc, source: str) -> list[RawLine]:
    """Validate a parsed GeoJSON document and turn its features into RawLines."""
    if not isinstance(doc, dict) or doc.get("type") != "FeatureCollection":
        kind = doc.get("type") if isinstance(doc, dict) else type(doc).__name__
        raise InputError(f"{source}: not a GeoJSON FeatureCollection (found type {kind!r})",
                         'the file must be {"type": "FeatureCollection", "features": [...]} with line features')
    feats = doc.get("features")
    if not isinstance(feats, list):
        raise InputError(f"{source}: 'features' is missing or not a list")
    lines: list[RawLine] = []
    for i, f in enumerate(feats):
        if not isinstance(f, dict) or f.get("type") != "Feature":
            raise InputError(f"{source}: features[{i}] is not a GeoJSON Feature")
        props = f.get("properties") or {}
        if not isinstance(props, dict):
            raise InputError(f"{source}: features[{i}]: 'properties' is not an object")
        fid = next((x for x in (props.get("id"), f.get("id")) if x is not None), i)
        fid = str(fid)
        for key, text in (("id", fid), ("name", props.get("name")), ("class", props.get("class"))):
            # RFC 8259 section 8.2: JSON lets a \uD800-\uDFFF escape stand alone, but it is no character
            # and no UTF-8 output (the plan file, a report) could hold it
            if isinstance(text, str) and any("\ud800" <= ch <= "\udfff" for ch in text):
                raise InputError(f"{source}: features[{i}]: '{key}' holds an unpaired surrogate escape "
                                 "(\\uD800-\\uDFFF without its pair), which is not a character",
                                 "write the character itself, or its full surrogate pair")
        where = f"{source}: feature '{fid}'"
        geom = f.get("geometry")
        gtype = geom.get("type") if isinstance(geom, dict) else None
        if gtype not in ("LineString", "MultiLineString"):
            raise InputError(f"{where}: geometry is {gtype or 'missing'}, not a line",
                             "keep only LineString or MultiLineString features (streets as lines)")
        oneway = parse_oneway(props.get("oneway"), where)
        posted = read_posted(props, where)
        common = dict(
            name="" if props.get("name") is None else str(props["name"]),
            road_class="" if props.get("class") is None else str(props["class"]),
            oneway=1 if oneway else 0,
            service=parse_service(props.get("service"), where),
            speed_kmh=parse_speed(props.get("speed_kmh"), where),
            closed=parse_closed(props.get("closed"), where),
            posted=swap_sides(posted) if oneway == -1 else posted,
        )
        coords = geom.get("coordinates")
        if gtype == "LineString":
            parts = [(fid, coords)]
        else:
            if not isinstance(coords, list) or not coords:
                raise InputError(f"{where}: MultiLineString has no parts")
            parts = [(f"{fid}/part{k + 1}", c) for k, c in enumerate(coords)]
        for sid, c in parts:
            arr = parse_positions(c, f"{source}: feature '{sid}'")
            if oneway == -1:  # drawn against the traffic: store it in its legal direction
                arr = arr[::-1].copy()
            lines.append(RawLine(source_id=sid, coords=arr, **common))
    return lines


def read_json_document(path: str | Path, what: str = "a street file"):
    """The parsed JSON document of a UTF-8 file; InputError naming the file for anything else."""
    path = Path(path)
    try:
        with open(path, "rb") as fh:
            return json.loads(fh.read().decode("utf-8-sig"))
    except json.JSONDecodeError as exc:
        raise InputError(f"{path}: not valid JSON (line {exc.lineno}, column {exc.colno}: {exc.msg})",
                         "fix the JSON syntax there; a GIS export usually gets it right") from None
    except RecursionError:
        raise InputError(f"{path}: JSON nested too deeply to be {what}",
                         "GeoJSON nests a few levels deep; check that this is the right file") from None
    except UnicodeDecodeError:
        raise InputError(f"{path}: not a UTF-8 text file", "GeoJSON must be UTF-8 encoded (RFC 7946)") from None
    except OSError as exc:
        raise InputError(f"{path}: cannot be read ({exc.strerror})") from None


def read_geojson(path: str | Path, profile: Profile) -> Network:
    """Read a GeoJSON street file into a repaired :class:`~crewcut.solve.network.model.Network`."""
    lines = features_to_lines(read_json_document(path), str(path))
    return build_network(lines, profile, has_geometry=True, source=str(path))
