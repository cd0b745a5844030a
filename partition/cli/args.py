"""Reading the words of the command line that argparse cannot read alone: LON,LAT positions."""
from __future__ import annotations

import re

from crewcut.solve.errors import InputError


def parse_lonlat(text: str, what: str = "--depot") -> tuple[float, float]:
    """'LON,LAT' -> (lon, lat), with a clear message when malformed."""
    try:
        lon_s, lat_s = text.split(",")
        lon, lat = float(lon_s), float(lat_s)
    except ValueError:
        raise InputError(f"{what} '{text}' is not LON,LAT", "write it as two numbers, e.g. -30.5,45.2") from None
    if not (-180 <= lon <= 180 and -90 <= lat <= 90):
        raise InputError(f"{what} '{text}' is outside lon/lat range", "longitude first, then latitude, in degrees")
    return lon, lat


def glue_negative_lonlat(argv: list[str]) -> list[str]:
    """'--depot -30.5,45.2' -> '--depot=-30.5,45.2': argparse takes '-30.5,45.2' for an option."""
    out: list[str] = []
    for a in argv:
        if out and out[-1].startswith("--") and "=" not in out[-1] and re.fullmatch(r"-\d[\d.]*,.*", a):
            out[-1] = f"{out[-1]}={a}"
        else:
            out.append(a)
    return out
