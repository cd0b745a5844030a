"""Lengths and a local metric projection for WGS84 lon/lat input.

Lengths are geodesic on the WGS84 ellipsoid (Karney's algorithm through
``pyproj.Geod``), summed over each polyline's vertices: accurate to well under a
millimetre per segment. The local projection (azimuthal equidistant centred on
the network) is used only for geometry (snapping, clustering, maps); over a town
of 20 km its distortion is below 0.01 % (scale error of the azimuthal
equidistant projection grows as (d/R)^2/6 radially).
"""
from __future__ import annotations

import numpy as np
from pyproj import Geod, Transformer

_GEOD = Geod(ellps="WGS84")


def geodesic_lengths(coords: list[np.ndarray]) -> np.ndarray:
    """Geodesic length in metres of each (k, 2) lon/lat polyline, vectorised."""
    if not coords:
        return np.zeros(0)
    counts = np.fromiter((len(c) for c in coords), dtype=np.int64, count=len(coords))
    pts = np.concatenate(coords, axis=0).astype(np.float64)
    if len(pts) < 2:
        return np.zeros(len(coords))
    _, _, d = _GEOD.inv(pts[:-1, 0], pts[:-1, 1], pts[1:, 0], pts[1:, 1])
    d = np.asarray(d, dtype=np.float64)
    # zero out the pairs that join the end of one line to the start of the next
    ends = np.cumsum(counts)[:-1] - 1
    d[ends] = 0.0
    starts = np.concatenate([[0], np.cumsum(counts)[:-1]])
    out = np.add.reduceat(np.concatenate([d, [0.0]]), starts)
    out[counts < 2] = 0.0
    return out


def _transformer(origin: tuple[float, float]) -> Transformer:
    lon0, lat0 = origin
    return Transformer.from_crs(
        "EPSG:4326",
        f"+proj=aeqd +lat_0={lat0} +lon_0={lon0} +datum=WGS84 +units=m",
        always_xy=True,
    )


def project(lon: np.ndarray, lat: np.ndarray, origin: tuple[float, float]) -> tuple[np.ndarray, np.ndarray]:
    """lon/lat degrees -> x/y metres in the azimuthal equidistant projection at origin."""
    x, y = _transformer(origin).transform(np.asarray(lon, float), np.asarray(lat, float))
    return np.asarray(x, float), np.asarray(y, float)


def unproject(x: np.ndarray, y: np.ndarray, origin: tuple[float, float]) -> tuple[np.ndarray, np.ndarray]:
    """Inverse of :func:`project`."""
    lon, lat = _transformer(origin).transform(np.asarray(x, float), np.asarray(y, float), direction="INVERSE")
    return np.asarray(lon, float), np.asarray(lat, float)
