"""The invented demo town Tallowmere as files: its GeoJSON, its depots and its config.

The streets come from :func:`crewcut.demo.layout.generate_town` (the method is
described there); this module turns a town into text and writes it, all at once
(:mod:`crewcut.files`). The layout's names are importable from here too.
"""
from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np

from crewcut.demo.layout import (CENTRE, EXAMPLE_SEGMENTS, GENERATOR, MAX_SEGMENTS, MIN_SEGMENTS, TOWN_NAME,
                                 check_town_args, generate_town)
from crewcut.files import atomic_write, atomic_write_many

__all__ = ["CENTRE", "EXAMPLE_SEGMENTS", "GENERATOR", "MAX_SEGMENTS", "MIN_SEGMENTS", "TOWN_NAME",
           "check_town_args", "dumps_town", "generate_town", "town_config", "town_depots", "write_town",
           "write_town_and_config"]


def dumps_town(town: dict) -> str:
    """Compact, deterministic JSON text of a town."""
    return json.dumps(town, ensure_ascii=False, separators=(",", ":"), allow_nan=False) + "\n"


def write_town(path: str | Path, n_segments: int, seed: int = 0) -> Path:
    """Generate a town and write it as GeoJSON, all at once (no partial file on failure)."""
    return atomic_write(path, dumps_town(generate_town(n_segments, seed)))


# ------------------------------------------------------------------------ config
def _intersections(town: dict) -> tuple[np.ndarray, np.ndarray]:
    """(n, 2) lon/lat of the street ends of a town and how many streets meet at each."""
    ends = np.array([c for f in town["features"] for c in
                     (f["geometry"]["coordinates"][0], f["geometry"]["coordinates"][-1])])
    pts, degree = np.unique(ends, axis=0, return_counts=True)
    return pts, degree


def town_depots(town: dict) -> list[tuple[str, tuple[float, float]]]:
    """Two depots on intersections of the town: one downtown, one to the south-east.

    Each is the intersection (three or more streets) nearest a target point: the
    centre, and a point south-east of it at about half the town's extent.
    """
    pts, degree = _intersections(town)
    cand = pts[degree >= 3]
    lon0, lat0 = CENTRE
    kx = 111_320.0 * math.cos(math.radians(lat0))  # metres per degree, near enough to rank points
    ky = 110_540.0
    x, y = (cand[:, 0] - lon0) * kx, (cand[:, 1] - lat0) * ky
    ext_x, ext_y = float(np.abs(x).max()), float(np.abs(y).max())
    out = []
    for label, tx, ty in (("downtown yard", 0.0, 0.0), ("south-east yard", 0.35 * ext_x, -0.6 * ext_y)):
        i = int(np.argmin(np.hypot(x - tx, y - ty)))  # lowest index on ties: deterministic
        out.append((label, (float(cand[i, 0]), float(cand[i, 1]))))
    return out


def town_config(town: dict) -> str:
    """A curb-sweeping config (TOML text) for a generated town: eleven crews, two depots.

    Everything but the crews is the shipped curb-sweeping profile, word for word,
    so its values keep their provenance comments.
    """
    from crewcut.solve.profile import builtin_profile_path

    text = builtin_profile_path("curb-sweeping").read_text(encoding="utf-8")
    lines = text.splitlines()
    cut = next((i for i, ln in enumerate(lines) if ln.strip() == "[[crews]]"), len(lines))
    while cut > 0 and (lines[cut - 1].startswith("#") or not lines[cut - 1].strip()):
        cut -= 1  # drop the comment that introduces the shipped crews
    head = "\n".join(lines[:cut]).rstrip() + "\n"
    (l1, d1), (l2, d2) = town_depots(town)
    # Eleven crews: the example town's curbs take 67 h of sweeping alone and about
    # 79 crew-hours once planned (crewcut plan, measured), so eleven 8-hour shifts
    # fit; six work from the downtown yard, five from the other.
    crews = [(f"sweeper-{i + 1}", d1, l1) if i < 6 else (f"sweeper-{i + 1}", d2, l2) for i in range(11)]
    out = [f"# Curb sweeping in {TOWN_NAME}, an invented town ({len(town['features']):,} street segments,",
           f"# seed {town['town']['seed']}), written by crewcut.demo.towngen.town_config. Not a real place.",
           "", head,
           f"# Crews of the invented demo town ({TOWN_NAME}): six work from the downtown yard,",
           "# five from the south-east yard. Each depot sits on an intersection."]
    for cid, (lon, lat), label in crews:
        out += ["", "[[crews]]", f'id = "{cid}"', f"depot = [{lon!r}, {lat!r}]   # {label}"]
    return "\n".join(out) + "\n"


def write_town_and_config(folder: str | Path, n_segments: int = EXAMPLE_SEGMENTS, seed: int = 0,
                          stem: str = "tallowmere") -> tuple[Path, Path]:
    """Write ``<stem>.geojson`` and ``<stem>.toml`` into a folder; returns both paths."""
    town = generate_town(n_segments, seed)
    folder = Path(folder)
    net, cfg = atomic_write_many([(folder / f"{stem}.geojson", dumps_town(town)),
                                  (folder / f"{stem}.toml", town_config(town))])
    return net, cfg
