"""CSV edge list reader, for networks without geometry.

The first row is a header. Required columns: ``from``, ``to`` (node labels, any
text) and ``length_m`` (metres, greater than zero). Optional columns: ``id``
(source id, default ``row N`` with N the file's line number), ``oneway``
(as in GeoJSON: yes/no/-1/true/false/1/0; ``-1`` means from ``to`` to ``from``),
``name``, ``service``, ``class``, ``speed_kmh``, ``closed``, and the posted
sweeping times ``posted``, ``posted:left``, ``posted:right`` (the GeoJSON property
names; grammar in :mod:`crewcut.solve.calendar.postings`; left and right as seen
from ``from`` to ``to``, swapped when ``oneway=-1`` turns the edge round). Other
columns are ignored. The network has no coordinates: node lon/lat are NaN and
``has_geometry`` is False.
"""
from __future__ import annotations

import csv
import io
import math
from pathlib import Path

from crewcut.solve.calendar.postings import POSTED_KEYS, read_posted, swap_sides
from crewcut.solve.errors import InputError
from crewcut.solve.network.model import Network, RawLine
from crewcut.solve.profile import Profile
from crewcut.solve.network.repair import build_network
from crewcut.solve.readers.geojson import parse_closed, parse_oneway, parse_service, parse_speed

REQUIRED = ("from", "to", "length_m")
OPTIONAL = ("id", "oneway", "name", "service", "class", "speed_kmh", "closed") + tuple(POSTED_KEYS.values())


def read_csv_edges(path: str | Path, profile: Profile) -> Network:
    """Read a CSV edge list into a :class:`~crewcut.solve.network.model.Network` without geometry."""
    path = Path(path)
    try:
        text = path.read_bytes().decode("utf-8-sig")
    except UnicodeDecodeError:
        raise InputError(f"{path}: not a UTF-8 text file", "save the CSV as UTF-8") from None
    except OSError as exc:
        raise InputError(f"{path}: cannot be read ({exc.strerror})") from None
    if "\x00" in text:
        line = text.count("\n", 0, text.index("\x00")) + 1
        raise InputError(f"{path}: line {line} holds a NUL byte; this is not a text CSV file",
                         "export the edge list again as plain UTF-8 comma-separated text")
    try:
        # strict: an unterminated quote or a stray quote is an error, not a cell that swallows the rest
        reader = csv.reader(io.StringIO(text, newline=""), strict=True)
        return _parse(path, reader, profile)
    except csv.Error as exc:
        raise InputError(f"{path}: line {reader.line_num}: not readable as CSV ({exc})",
                         "close every quoted cell with a quote (RFC 4180) and save as plain comma-separated "
                         "text") from None


def _parse(path: Path, reader, profile: Profile) -> Network:
    header = next(reader, None)
    if not header or not any(h.strip() for h in header):
        raise InputError(f"{path}: empty file, no header row",
                         f"the first row must name the columns: {','.join(REQUIRED)}[,{','.join(OPTIONAL)}]")
    cols = [h.strip().lower() for h in header]
    twice = sorted({c for c in cols if c and cols.count(c) > 1})
    if twice:
        raise InputError(f"{path}: the header names column {', '.join(repr(c) for c in twice)} more than once",
                         "keep one column of each name; which one is meant cannot be told")
    missing = [c for c in REQUIRED if c not in cols]
    if missing:
        raise InputError(f"{path}: header has no column {', '.join(repr(c) for c in missing)} "
                         f"(found: {', '.join(cols)})",
                         f"the header must contain {','.join(REQUIRED)}; optional: {','.join(OPTIONAL)}")
    pos = {c: cols.index(c) for c in REQUIRED + OPTIONAL if c in cols}
    lines: list[RawLine] = []
    for row in reader:
        rownum = reader.line_num
        if not row or not any(cell.strip() for cell in row):
            continue  # blank line
        where = f"{path}: row {rownum}"

        def cell(col: str, _row=row, _where=where) -> str | None:
            j = pos.get(col)
            if j is None:
                return None
            if j >= len(_row):
                if col in REQUIRED:
                    raise InputError(f"{_where} has no value for column '{col}' "
                                     f"({len(_row)} values, the header has {len(cols)})",
                                     "give every row a value for each column of the header")
                return None
            return _row[j].strip()

        a, b, raw_len = cell("from"), cell("to"), cell("length_m")
        for col, val in (("from", a), ("to", b)):
            if not val:
                raise InputError(f"{where}: column '{col}' is empty", "give both end labels of every edge")
        try:
            length = float(raw_len)
        except ValueError:
            raise InputError(f"{where}: length_m {raw_len!r} is not a number",
                             "give the length in metres, e.g. 125.4") from None
        if not math.isfinite(length) or length <= 0:
            raise InputError(f"{where}: length_m is {raw_len!r}; it must be a finite number greater than zero",
                             "give the edge's real length in metres, or remove the row")
        sid = cell("id") or f"row {rownum}"
        if a == b:
            raise InputError(f"{where}: edge '{sid}' is a self-loop (from and to are both '{a}')",
                             "a street must join two different nodes; split the loop into two edges")
        oneway = parse_oneway(cell("oneway") or None, where)
        posted = read_posted({k: cell(k) or None for k in POSTED_KEYS.values()}, f"{where}: edge '{sid}'")
        if oneway == -1:
            a, b = b, a
            posted = swap_sides(posted)
        lines.append(RawLine(
            source_id=sid, coords=None, name=cell("name") or "", road_class=cell("class") or "",
            oneway=1 if oneway else 0, service=parse_service(cell("service"), where),
            speed_kmh=parse_speed(cell("speed_kmh") or None, where),
            closed=parse_closed(cell("closed") or None, where),
            from_label=a, to_label=b, length_m=length, posted=posted))
    return build_network(lines, profile, has_geometry=False, source=str(path))
