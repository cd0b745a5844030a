"""Street network readers: one entry point, dispatching on the file's extension.

=================== ============================================== ==========================
extension           format                                         module
=================== ============================================== ==========================
.geojson, .json     RFC 7946 FeatureCollection of (Multi)LineString :mod:`crewcut.solve.readers.geojson`
.osm                OpenStreetMap XML                               :mod:`crewcut.solve.readers.osm`
.osm.pbf, .pbf      OpenStreetMap protocol buffer binary            :mod:`crewcut.solve.readers.osm`
.csv                edge list ``from,to,length_m[,...]``            :mod:`crewcut.solve.readers.csvedges`
.graphml            a street graph as networkx writes it            :mod:`crewcut.solve.readers.nxgraph`
=================== ============================================== ==========================

A networkx street graph in memory is read with
:func:`crewcut.solve.readers.nxgraph.network_from_graph`.

Every reader produces :class:`~crewcut.solve.network.model.RawLine` objects and hands them to
:func:`crewcut.solve.network.repair.build_network`. Files are only read, never written.
"""
from __future__ import annotations

from pathlib import Path

from crewcut.solve.errors import InputError
from crewcut.solve.network.model import Network
from crewcut.solve.profile import Profile

ALLOWED = ".geojson, .json, .osm, .osm.pbf, .pbf, .csv, .graphml"


def file_kind(path: str | Path) -> str:
    """'geojson', 'osm', 'pbf', 'csv' or 'graphml' from the file name; InputError otherwise."""
    name = Path(path).name.lower()
    if name.endswith((".geojson", ".json")):
        return "geojson"
    if name.endswith(".pbf"):
        return "pbf"
    if name.endswith(".osm"):
        return "osm"
    if name.endswith(".csv"):
        return "csv"
    if name.endswith(".graphml"):
        return "graphml"
    ext = "".join(Path(path).suffixes[-2:]) or "(none)"
    raise InputError(f"{path}: cannot read files with extension '{ext}'",
                     f"give a street network as one of: {ALLOWED}")


def read_network(path: str | Path, profile: Profile) -> Network:
    """Read a street network file and repair its topology.

    Raises :class:`~crewcut.solve.errors.InputError` for a missing file, an unknown
    extension or any problem in the data, naming the feature concerned.
    """
    path = Path(path)
    if not path.exists():
        raise InputError(f"street network file '{path}' not found",
                         "check the path; the file must exist and be readable")
    if not path.is_file():
        raise InputError(f"'{path}' is not a file", f"give a street network file ({ALLOWED})")
    kind = file_kind(path)
    if kind == "geojson":
        from crewcut.solve.readers.geojson import read_geojson

        return read_geojson(path, profile)
    if kind == "csv":
        from crewcut.solve.readers.csvedges import read_csv_edges

        return read_csv_edges(path, profile)
    if kind == "graphml":
        from crewcut.solve.readers.nxgraph import read_graphml

        return read_graphml(path, profile)
    from crewcut.solve.readers.osm import read_osm

    return read_osm(path, profile)
