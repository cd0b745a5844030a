"""Hostile and careless input, generated: every command ends in exit 0 or 2, never a traceback.

Properties checked for every generated case (README, "Bad input"):

* the exit status is 0 or 2, and nothing escapes as an exception (no traceback);
* on exit 2 nothing is written (the output folder stays as it was) and stderr says
  "error:" (or, for ``check``, its report says "not plannable");
* the input files are byte-identical afterwards;
* every SVG and GPX output is well-formed XML 1.0 (W3C XML 1.0, section 2.2 lists
  the characters a document may hold), the HTML report parses, and every CSV text
  cell that a spreadsheet would take as a formula (first character ``=``, ``+``,
  ``-``, ``@``, tab or carriage return; OWASP, "CSV Injection") is neutralised.

Example budgets are fixed (``max_examples``), ``derandomize=True`` makes the
examples the same on every run and there is no shrinking phase, so the suite's
time is bounded and a failure repeats. The base plan is planned once from a small invented town (demo data).
"""
from __future__ import annotations

import contextlib
import csv
import hashlib
import html.parser
import io
import json
import random
import tempfile
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest
from hypothesis import HealthCheck, Phase, given, settings
from hypothesis import strategies as st

from crewcut.cli.main import main

# No shrinking phase: a failure is reported as generated, so a red run stays inside the suite's time budget.
FUZZ = settings(max_examples=40, deadline=None, derandomize=True, database=None,
                phases=[Phase.explicit, Phase.reuse, Phase.generate],
                suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])

# Strings that have broken terminals, markup, spreadsheets or XML before (common practice, no source).
NASTY = ["[/]", "[bold red]x[/]", "[link=file:///etc]y", "=1+2", "+SUM(A1)", "-2+3", "@cmd", "\tTab", "\rCR",
         "<script>alert(1)</script>", "<b>bold</b> & co", "]]>", "\x1b]0;title\x07", "\x1b[2J\x1b[H", "\x07\x08",
         "\u202eevil\u202c", "مرحبا", "line\nbreak", "nul\x00byte", "\ufffe\uffff", "\ud7ff", "a" * 3000, "",
         " ", "../../etc/passwd", "C:\\con", "%s%n", "{0}", "'; DROP TABLE x; --"]
hostile = st.one_of(st.sampled_from(NASTY), st.text(max_size=40),
                    st.lists(st.sampled_from(NASTY), min_size=2, max_size=3).map("".join))
json_values = st.recursive(
    st.none() | st.booleans() | st.integers(-2**70, 2**70) | st.floats(allow_nan=False) | hostile,
    lambda inner: st.lists(inner, max_size=3) | st.dictionaries(hostile, inner, max_size=3), max_leaves=6)


def run(argv: list[str]) -> tuple[int, str, str]:
    """The command line in-process; any exception but SystemExit fails the test (that is a traceback)."""
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        try:
            code = main(argv)
        except SystemExit as exc:  # argparse usage errors
            code = exc.code if isinstance(exc.code, int) else 2
    return int(code or 0), out.getvalue(), err.getvalue()


def _digest(paths: list[Path]) -> dict[str, str]:
    return {str(p): hashlib.sha256(p.read_bytes()).hexdigest() for p in paths if p.is_file()}


def _tree(folder: Path) -> set[str]:
    return {str(p.relative_to(folder)) for p in folder.rglob("*")}


@contextlib.contextmanager
def _fresh():
    """A new folder per generated example (pytest's tmp_path is shared by all examples of a test)."""
    with tempfile.TemporaryDirectory(prefix="crewcut-fuzz-") as d:
        yield Path(d)


def expect_clean(argv: list[str], inputs: list[Path], out_dir: Path) -> tuple[int, str, str]:
    before, files = _digest(inputs), _tree(out_dir)
    code, out, err = run(argv)
    assert code in (0, 2), f"exit {code} for {argv}:\n{err[-2000:]}"
    if code == 2:
        assert "error:" in err or "not plannable" in out, (out + err)[-2000:]  # check reports on stdout
        assert _tree(out_dir) == files, f"exit 2 but files were written: {_tree(out_dir) - files}"
    assert _digest(inputs) == before, "an input file changed"
    return code, out, err


@pytest.fixture(scope="module")
def base(tmp_path_factory) -> dict[str, Path]:
    root = tmp_path_factory.mktemp("fuzz")
    code, _, err = run(["demo", "--only-town", "--segments", "200", "--out", str(root / "town"), "-q"])
    assert code == 0, err
    town, config = root / "town" / "tallowmere.geojson", root / "town" / "tallowmere.toml"
    code, _, err = run(["plan", str(town), "--crews", "2", "--depot", "-30.5,45.2", "--out", str(root / "plan"),
                        "-q"])
    assert code == 0, err
    return {"town": town, "config": config, "plan": root / "plan" / "plan.json"}


# ------------------------------------------------------------------ malformed inputs
def _mutate(doc, rng: random.Random, value):
    """Replace one randomly chosen value somewhere inside ``doc`` by ``value`` (in place); returns doc."""
    node, path = doc, []
    while isinstance(node, (dict, list)) and node and rng.random() < 0.85:
        key = rng.choice(list(node.keys())) if isinstance(node, dict) else rng.randrange(len(node))
        path.append((node, key))
        node = node[key]
    if not path:
        return value
    parent, key = path[-1]
    parent[key] = value
    return doc


@FUZZ
@given(seed=st.integers(0, 2**32 - 1), value=json_values)
def test_malformed_geojson(base, seed, value):
    with _fresh() as tmp_path:
        doc = json.loads(base["town"].read_text())
        doc["features"] = doc["features"][:40]
        doc = _mutate(doc, random.Random(seed), value)
        path = tmp_path / "streets.geojson"
        path.write_text(json.dumps(doc, ensure_ascii=False, allow_nan=True), encoding="utf-8", errors="surrogatepass")
        expect_clean(["check", str(path)], [path], tmp_path)
        expect_clean(["plan", str(path), "--crews", "2", "--depot", "-30.5,45.2", "--out", str(tmp_path / "o")],
                     [path], tmp_path)


@FUZZ
@given(seed=st.integers(0, 2**32 - 1), value=json_values)
def test_malformed_service_area(base, seed, value):
    """A damaged --area file: a plan or a message and exit 2, never a crash, nothing half-written."""
    with _fresh() as tmp_path:
        lon, lat = -30.5, 45.2
        ring = [[lon - 0.01, lat - 0.01], [lon + 0.01, lat - 0.01], [lon + 0.01, lat + 0.01],
                [lon - 0.01, lat + 0.01], [lon - 0.01, lat - 0.01]]
        doc = {"type": "FeatureCollection", "features": [
            {"type": "Feature", "properties": {}, "geometry": {"type": "Polygon", "coordinates": [ring]}}]}
        doc = _mutate(doc, random.Random(seed), value)
        path = tmp_path / "district.geojson"
        path.write_text(json.dumps(doc, ensure_ascii=False, allow_nan=True), encoding="utf-8", errors="surrogatepass")
        expect_clean(["plan", str(base["town"]), "--area", str(path), "--crews", "2", "--depot", "-30.5,45.2",
                      "--workers", "1", "--out", str(tmp_path / "o")], [path, base["town"]], tmp_path)


@FUZZ
@given(posted=hostile | st.sampled_from(["tue 08:00-10:00", "tu 8:00-10:00", "sat", "mon 23:00-24:00",
                                         "no_parking @ (Tu 08:00-10:00)", "tue 10:00-08:00", ""]),
       side=st.sampled_from(["posted", "posted:left", "posted:right"]),
       days=hostile | st.sampled_from(["mon,tue,wed", "mon1,tue1,mon2", "tue", "mon,,tue", "x" * 40]),
       start=st.none() | hostile | st.sampled_from(["06:00", "24:00", "7:5", "-1:00"]))
def test_hostile_postings_and_cycles(base, posted, side, days, start):
    """Posted times and cycle settings as anyone might write them: a cycle plan or exit 2, nothing half-written."""
    with _fresh() as tmp_path:
        doc = json.loads(base["town"].read_text())
        doc["features"] = doc["features"][:40]
        for f in doc["features"][::5]:
            f["properties"][side] = posted
        path = tmp_path / "streets.geojson"
        path.write_text(json.dumps(doc, ensure_ascii=False), encoding="utf-8", errors="surrogatepass")
        argv = ["plan", str(path), "--crews", "2", "--depot", "-30.5,45.2", "--workers", "1", f"--days={days}",
                "--out", str(tmp_path / "o")]
        if start is not None:
            argv.append(f"--shift-start={start}")
        expect_clean(argv, [path], tmp_path)


@FUZZ
@given(rows=st.lists(st.lists(hostile | st.sampled_from(["1", "-1", "1e309", "nan", "yes", '"', 'a"b']),
                              max_size=6), max_size=6),
       header=st.sampled_from(["from,to,length_m", "from,to,length_m,oneway,name,speed_kmh", "from,to", ""]))
def test_malformed_csv(rows, header):
    with _fresh() as tmp_path:
        path = tmp_path / "edges.csv"
        body = "\n".join(",".join(r) for r in rows)
        path.write_bytes((header + "\n" + body).encode("utf-8", "surrogatepass"))
        expect_clean(["check", str(path)], [path], tmp_path)


@FUZZ
@given(text=st.one_of(
    st.text(max_size=200),
    st.sampled_from(["[profile]\nshift_limit_min = 1e400\n", "[[crews]]\nid = \"a\"\n", "a = [" * 3000,
                     "[profile]\nname = \"[/]\"\n", "[turn_penalty_s]\nu_turn = -1\n", "[service_speed_kmh]\n"
                     "default = 1e-300\n", "[priority]\ndefault = 1e30\n", "[network]\nsnap_tolerance_m = 1e9\n",
                     "[[crews]]\nid = \"x\"\ndepot = [-30.5, 45.2]\ndepot_node = 3\n"])))
def test_malformed_config(base, text):
    with _fresh() as tmp_path:
        path = tmp_path / "profile.toml"
        path.write_text(text, encoding="utf-8", errors="surrogatepass")
        expect_clean(["check", str(base["town"]), "--config", str(path)], [path, base["town"]], tmp_path)


READERS = [["table", "{p}", "--format", "csv"], ["sheets", "{p}", "--out", "{o}/sheets"], ["map", "{p}", "--out",
           "{o}/map.svg"], ["export", "{p}", "--format", "gpx", "--out", "{o}/r.gpx"], ["report", "{p}", "--out",
           "{o}/report.html"], ["verify", "{p}", "{n}"]]


@FUZZ
@given(seed=st.integers(0, 2**32 - 1), value=json_values, cmd=st.sampled_from(READERS))
def test_damaged_plan(base, seed, value, cmd):
    with _fresh() as tmp_path:
        doc = _mutate(json.loads(base["plan"].read_text()), random.Random(seed), value)
        path = tmp_path / "plan.json"
        path.write_text(json.dumps(doc, ensure_ascii=False), encoding="utf-8", errors="surrogatepass")
        (tmp_path / "o").mkdir()
        argv = [a.format(p=path, o=tmp_path / "o", n=base["town"]) for a in cmd]
        expect_clean(argv, [path, base["town"]], tmp_path / "o")


# ------------------------------------------------------------------ hostile names in a sound plan
class _HTMLCheck(html.parser.HTMLParser):
    def error(self, message):  # pragma: no cover - older Pythons only
        raise AssertionError(message)


def _safe_csv(text: str) -> None:
    for row in csv.reader(io.StringIO(text, newline="")):
        for cell in row:
            if cell and cell[0] in "=+-@\t\r":
                try:
                    float(cell)  # a number such as -30.5 is data, not a formula
                except ValueError:
                    raise AssertionError(f"CSV cell {cell[:40]!r} would start a formula") from None


@FUZZ
@given(street=hostile, crew=hostile, source=hostile)
def test_hostile_names_give_safe_outputs(base, street, crew, source):
    with _fresh() as tmp_path:
        doc = json.loads(base["plan"].read_text())
        for seg in doc["network"]["segments"][::3]:
            seg["name"] = street
        doc["network"]["source"] = source
        doc["crews"][0]["id"] = crew or "x"
        path = tmp_path / "plan.json"
        path.write_text(json.dumps(doc, ensure_ascii=False), encoding="utf-8", errors="surrogatepass")
        o = tmp_path / "o"
        o.mkdir()
        inputs = [path]
        for fmt in ("txt", "md", "html"):
            expect_clean(["sheets", str(path), "--format", fmt, "--out", str(o / f"sheets-{fmt}")], inputs, o)
        code, out, _ = expect_clean(["table", str(path), "--format", "csv"], inputs, o)
        if code == 0:
            _safe_csv(out)
        for argv, name in ((["map", str(path), "--out", str(o / "map.svg")], "map.svg"),
                           (["export", str(path), "--format", "gpx", "--out", str(o / "r.gpx")], "r.gpx"),
                           (["export", str(path), "--format", "csv", "--out", str(o / "r.csv")], "r.csv"),
                           (["report", str(path), "--out", str(o / "report.html")], "report.html")):
            code, _, _ = expect_clean(argv, inputs, o)
            target = o / name
            if code != 0:
                continue
            data = target.read_bytes()
            if name.endswith((".svg", ".gpx")):
                ET.fromstring(data)  # well-formed XML 1.0 or a ParseError
            elif name.endswith(".csv"):
                _safe_csv(data.decode("utf-8"))
            else:
                _HTMLCheck().feed(data.decode("utf-8"))
        for p in (o / "sheets-html").glob("*.html"):
            _HTMLCheck().feed(p.read_text(encoding="utf-8"))
