"""Helpers shared by the tests (the fixtures are in tests/conftest.py).

- ``nets``: small invented street networks built for the tests (arrays, grids);
- ``geojson``: small invented GeoJSON documents, placed with pyproj's geodesic;
- ``plans``: hand-made plan documents walked with networkx, not the route engine;
- ``checks``: the independent checkers (networkx, pyproj and the trade's rules).

Each module's docstring says which outside source its checkers rely on.
"""
