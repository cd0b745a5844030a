"""Geodesic lengths against the reference library (pyproj.Geod) and published values."""
from __future__ import annotations

import numpy as np
import pytest
from pyproj import Geod

from crewcut.solve.network.geodesy import geodesic_lengths, project, unproject

GEOD = Geod(ellps="WGS84")


def _line(lon0: float, lat0: float, az: float, step_m: float, n: int) -> np.ndarray:
    """n+1 positions, each step_m further along azimuth az (placed with Geod.fwd)."""
    lons, lats = [lon0], [lat0]
    for _ in range(n):
        lon, lat, _ = GEOD.fwd(lons[-1], lats[-1], az, step_m)
        lons.append(lon)
        lats.append(lat)
    return np.column_stack([lons, lats])


@pytest.mark.parametrize("lat", [-60.0, -33.9, 0.0, 45.2, 60.17, 78.2])
@pytest.mark.parametrize("step_m,n", [(0.5, 3), (12.0, 8), (2_500.0, 40)])  # short and long lines
def test_lengths_match_pyproj_line_length(lat, step_m, n):
    lines = [_line(-30.5, lat, az, step_m, n) for az in (0.0, 37.0, 90.0, 211.0)]
    got = geodesic_lengths(lines)
    # reference library: pyproj.Geod.line_length sums geodesic distances (Karney 2013)
    ref = np.array([GEOD.line_length(c[:, 0], c[:, 1]) for c in lines])
    np.testing.assert_allclose(got, ref, rtol=1e-12, atol=1e-9)
    # and each line is as long as the steps that built it (Geod.fwd, same library)
    np.testing.assert_allclose(got, step_m * n, rtol=1e-9, atol=1e-6)


def test_lengths_of_mixed_lines_are_independent():
    # many lines of different sizes in one call must not leak into each other
    rng = np.random.default_rng(3)
    lines = [np.column_stack([24.9 + rng.uniform(0, 0.01, k), 60.1 + rng.uniform(0, 0.01, k)])
             for k in rng.integers(2, 9, 200)]
    ref = np.array([GEOD.line_length(c[:, 0], c[:, 1]) for c in lines])  # reference library: pyproj
    np.testing.assert_allclose(geodesic_lengths(lines), ref, rtol=1e-12)


def test_published_degree_lengths():
    # One degree of latitude from the equator on WGS84 is 110,574.4 m, and near the
    # pole (89 to 90 degrees) 111,693.9 m: standard meridian-arc tables, from memory.
    # One degree of longitude along the equator is 2*pi*a/360 with a = 6,378,137 m
    # (WGS84 defining constant): 111,319.49 m.
    got = geodesic_lengths([np.array([[0.0, 0.0], [0.0, 1.0]]), np.array([[0.0, 89.0], [0.0, 90.0]]),
                            np.array([[0.0, 0.0], [1.0, 0.0]])])
    assert got[0] == pytest.approx(110_574.4, abs=1.0)
    assert got[1] == pytest.approx(111_693.9, abs=1.0)
    assert got[2] == pytest.approx(2 * np.pi * 6_378_137.0 / 360, abs=0.01)


def test_local_projection_round_trip_and_scale():
    origin = (-30.5, 45.2)
    pts = _line(-30.5, 45.2, 60.0, 1_000.0, 10)  # 10 km from the origin
    x, y = project(pts[:, 0], pts[:, 1], origin)
    lon, lat = unproject(x, y, origin)
    np.testing.assert_allclose(lon, pts[:, 0], atol=1e-9)
    np.testing.assert_allclose(lat, pts[:, 1], atol=1e-9)
    # azimuthal equidistant: distance from the centre is exact (the projection's definition)
    np.testing.assert_allclose(np.hypot(x, y), 1_000.0 * np.arange(11), atol=1e-3)
