"""Service areas: the district a run serves, from a GeoJSON Polygon or MultiPolygon.

A planner extracts a wider buffer of streets for driving than the district the
crews serve. The area says which streets need service; the others may be driven
on, never served (the rural postman case: required and optional streets).

Accepted files (RFC 7946): a bare Polygon or MultiPolygon geometry, a Feature
with one, or a FeatureCollection of them (their union is the area). Rings may
wind either way (RFC 7946 section 3.1.6 asks for counter-clockwise outer rings,
but says readers should not reject others). A polygon that crosses itself, has
no area or a ring that is not closed is refused with the feature and the place.
"""
from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from crewcut.solve.errors import InputError
from crewcut.solve.readers.geojson import parse_positions, read_json_document

_HINT = "give a GeoJSON Polygon or MultiPolygon (a bare geometry, a Feature or a FeatureCollection of them)"


@dataclass(frozen=True)
class ServiceArea:
    """A service area: polygons of rings of (lon, lat) positions, and where it came from.

    ``polygons[i][0]`` is the outer ring of polygon i, the others its holes; each
    ring is closed (last position = first). Use :meth:`shape` for a shapely geometry.
    """

    polygons: tuple[tuple[tuple[tuple[float, float], ...], ...], ...]
    source: str = ""

    def shape(self):
        """The area as one shapely (Multi)Polygon in lon/lat (the union of its polygons)."""
        import shapely

        parts = [shapely.Polygon(p[0], p[1:]) for p in self.polygons]
        return shapely.union_all(parts) if len(parts) > 1 else parts[0]

    def to_geojson(self) -> dict:
        """The area as a GeoJSON MultiPolygon geometry (lists, as a JSON writer wants them)."""
        return {"type": "MultiPolygon",
                "coordinates": [[[list(pt) for pt in ring] for ring in poly] for poly in self.polygons]}


def area_from_geojson(doc, source: str) -> ServiceArea:
    """Validate a parsed GeoJSON document and build a :class:`ServiceArea`."""
    geoms = _geometries(doc, source)
    if not geoms:
        raise InputError(f"{source}: holds no polygon", _HINT, param="area")
    polygons = []
    for where, geom in geoms:
        kind = geom.get("type") if isinstance(geom, dict) else None
        coords = geom.get("coordinates") if isinstance(geom, dict) else None
        if kind == "Polygon":
            polys = [coords]
        elif kind == "MultiPolygon" and isinstance(coords, list):
            polys = coords
        else:
            raise InputError(f"{where}: geometry is {kind or 'missing'}, not a Polygon or MultiPolygon", _HINT,
                             param="area")
        for j, poly in enumerate(polys):
            at = where if kind == "Polygon" else f"{where}, polygon {j + 1}"
            polygons.append(_polygon(poly, at))
    if not polygons:
        raise InputError(f"{source}: the area is empty (a MultiPolygon without polygons)", _HINT, param="area")
    area = ServiceArea(tuple(polygons), source)
    _check_valid(area, source)
    return area


def read_area(path: str | Path) -> ServiceArea:
    """Read a service area from a GeoJSON file (see the module notes); the file is only read."""
    path = Path(path)
    if not path.is_file():
        raise InputError(f"service area file '{path}' not found" if not path.exists() else f"'{path}' is not a file",
                         "give a GeoJSON file with the district's Polygon or MultiPolygon", param="area")
    return area_from_geojson(read_json_document(path, "a service area"), str(path))


def _geometries(doc, source: str) -> list[tuple[str, dict]]:
    if not isinstance(doc, dict):
        raise InputError(f"{source}: not a GeoJSON object", _HINT, param="area")
    kind = doc.get("type")
    if kind == "FeatureCollection":
        feats = doc.get("features")
        if not isinstance(feats, list):
            raise InputError(f"{source}: 'features' is missing or not a list", _HINT, param="area")
        out = []
        for i, f in enumerate(feats):
            if not isinstance(f, dict) or f.get("type") != "Feature":
                raise InputError(f"{source}: features[{i}] is not a GeoJSON Feature", _HINT, param="area")
            out.append((f"{source}: features[{i}]", f.get("geometry")))
        return out
    if kind == "Feature":
        return [(f"{source}: the feature", doc.get("geometry"))]
    return [(source, doc)]


def _polygon(rings, where: str) -> tuple:
    if not isinstance(rings, list) or not rings:
        raise InputError(f"{where}: a polygon needs at least its outer ring", _HINT, param="area")
    out = []
    for r, ring in enumerate(rings):
        name = "the outer ring" if r == 0 else f"hole {r}"
        arr = parse_positions(ring, f"{where}, {name}", min_count=4, shape="a polygon's ring")
        if not np.array_equal(arr[0], arr[-1]):
            raise InputError(f"{where}, {name}: the ring is not closed (its last position differs from its first)",
                             "repeat the first position at the end of the ring (RFC 7946 section 3.1.6)",
                             param="area")
        out.append(tuple((float(x), float(y)) for x, y in arr))
    return tuple(out)


def _check_valid(area: ServiceArea, source: str) -> None:
    import shapely

    for i, poly in enumerate(area.polygons):
        shape = shapely.Polygon(poly[0], poly[1:])
        where = source if len(area.polygons) == 1 else f"{source}: polygon {i + 1}"
        degenerate = shape.is_empty or shapely.area(shapely.make_valid(shape)) == 0.0
        if not shape.is_valid and not degenerate:
            why = shapely.is_valid_reason(shape)  # e.g. "Self-intersection[24.94 60.17]"
            raise InputError(f"{where}: the polygon is not valid: {why}",
                             "redraw the outline so that it does not cross itself (a GIS 'make valid' or "
                             "'fix geometries' step does it); holes must lie inside their polygon", param="area")
        if degenerate:
            raise InputError(f"{where}: the polygon has no area (all its corners lie on one line)",
                             "draw the district's outline with at least three corners that are not in line",
                             param="area")
