"""Small invented GeoJSON networks for reader, repair and check tests (Tallowmere area).

Positions are placed with pyproj's geodesic on WGS84 (``Geod.fwd``), so that a
test can state a length in metres independently of the project's own geodesy.
"""
from __future__ import annotations

import json
from pathlib import Path

import numpy as np
from pyproj import Geod

GEOD = Geod(ellps="WGS84")
LON0, LAT0 = -30.5, 45.2


def offset(east_m: float, north_m: float, lon: float = LON0, lat: float = LAT0) -> list[float]:
    """The position east_m, north_m metres from (lon, lat), placed with pyproj's Geod."""
    lon1, lat1, _ = GEOD.fwd(lon, lat, 90.0, east_m) if east_m else (lon, lat, 0)
    lon2, lat2, _ = GEOD.fwd(lon1, lat1, 0.0, north_m) if north_m else (lon1, lat1, 0)
    return [lon2, lat2]


def feature(coords, **props) -> dict:
    return {"type": "Feature", "properties": props, "geometry": {"type": "LineString", "coordinates": coords}}


def collection(features) -> dict:
    return {"type": "FeatureCollection", "features": list(features)}


def grid(nx: int = 3, ny: int = 3, spacing: float = 100.0, **props) -> dict:
    """An nx by ny lattice of two-way streets, one feature per block side, ids 'e<r>_<c>' and 'n<r>_<c>'."""
    feats = []
    for r in range(ny):
        for c in range(nx - 1):
            feats.append(feature([offset(c * spacing, r * spacing), offset((c + 1) * spacing, r * spacing)],
                                 id=f"e{r}_{c}", name=f"Reedmoor Row {r}", **props))
    for r in range(ny - 1):
        for c in range(nx):
            feats.append(feature([offset(c * spacing, r * spacing), offset(c * spacing, (r + 1) * spacing)],
                                 id=f"n{r}_{c}", name=f"Cobble Lane {c}", **props))
    return collection(feats)


def one_way_grid(seed: int, nx: int, ny: int, forward: float, against: float) -> dict:
    """:func:`grid` with a random share of its streets one-way: ``forward`` drawn way, ``against`` (-1) the other."""
    rng = np.random.default_rng(seed)
    doc = grid(nx, ny)
    for f in doc["features"]:
        r = rng.random()
        if r < forward:
            f["properties"]["oneway"] = "yes"
        elif r < forward + against:
            f["properties"]["oneway"] = "-1"
    return doc


def write(path: Path, doc) -> Path:
    path.write_text(doc if isinstance(doc, str) else json.dumps(doc), encoding="utf-8")
    return path


def write_geojson(path, lines) -> None:
    """Write RawLines (crewcut.solve.network.model) as a GeoJSON FeatureCollection the project's reader takes."""
    import json

    feats = [{"type": "Feature", "id": ln.source_id,
              "properties": {"id": ln.source_id, "name": ln.name, "class": ln.road_class, "oneway": bool(ln.oneway),
                             "service": ln.service, "closed": bool(ln.closed)},
              "geometry": {"type": "LineString", "coordinates": np.asarray(ln.coords).tolist()}} for ln in lines]
    with open(path, "w", encoding="utf-8") as fh:
        json.dump({"type": "FeatureCollection", "features": feats}, fh)
