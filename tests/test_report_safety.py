"""Every report and export of a plan whose names are hostile is still a valid document of its format.

The plan is a test plan (helpers.plans.make_plan) whose JSON is edited: street
names, the source name and crew ids hold markup, control characters, formulas, a
right-to-left override and a 3,000-character name; it is read back with
crewcut.plans.planfile.read_plan. Crew ids that the load check refuses are tested
for refusal instead.

Sources of the checks:
* W3C XML 1.0 (5th ed.) section 2.2: the characters a document may hold; checked
  by parsing with Python's xml.etree.ElementTree (expat) and, for GPX, with gpxpy.
* WHATWG HTML, "13.2.3.5 Preprocessing the input stream": control characters other
  than ASCII whitespace and noncharacters are parse errors; the report is read with
  Python's html.parser to see that hostile markup arrived as text, not as elements.
* OWASP, "CSV Injection": a cell beginning with = + - @ tab or CR is a formula to a
  spreadsheet program; checked with Python's csv reader.
* CommonMark 0.31 section 6.6 (raw HTML passes through Markdown) and the GFM table
  extension: rendered with markdown-it-py (a CommonMark implementation) to see that no
  element comes from a name and that every row keeps its cells.
"""
from __future__ import annotations

import csv
import dataclasses
import io
import json
import re
import xml.etree.ElementTree as ET
from html.parser import HTMLParser

import gpxpy
import pytest
from markdown_it import MarkdownIt

from crewcut.fleet.changes import Changes
from crewcut.fleet.day_crews import crews_of_the_day
from crewcut.plans.planfile import plan_to_json, read_plan
from crewcut.reports.exports import gpx_document, to_csv, to_gpx
from crewcut.reports.htmlreport import report_html
from crewcut.reports.sheets import SHEET_FORMATS, sheet_files, sheet_names, slug
from crewcut.reports.svgmap import route_map, territory_map, territory_svg
from crewcut.reports.workload import workload_text
from crewcut.solve.errors import InputError
from crewcut.solve.profile import Crew, Profile, profile_from_dict
from helpers.plans import make_plan

LONG = "Long Lane " + "x" * 2990  # a 3,000-character street name
NAMES = ["<script>alert(1)</script>", "\x1b]0;t\x07", "a\x00b", "x\ufffey", "=1+2", "@x", "-2+3", "\u202eevil",
         "[/]", LONG, "two\nlines", "tab\tand | pipe", "*em* _u_ `c` ~s~ [l](http://x)", "\x0c\x0b\x7f\x85"]
SOURCE = "<script>src</script>\x00=src\x1b"
# crew ids the load check lets through (printable, one line, at most 64 characters)
CREWS = ["=1+2<script>", "@x [/] & 'q'", "-2+3 | *b*"]
XML_ILLEGAL = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\ufffe\uffff\ud800-\udfff]")
HTML_ILLEGAL = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\x7f-\x9f\ufdd0-\ufdef\ufffe\uffff]")
FORMULA = ("=", "+", "-", "@", "\t", "\r")


def _hostile_doc() -> dict:
    doc = json.loads(plan_to_json(make_plan(k=3)))
    for i, seg in enumerate(doc["network"]["segments"]):
        seg["name"] = NAMES[i % len(NAMES)]
    for i, node in enumerate(doc["network"]["nodes"]):  # depot names are "node N (label)"
        node["label"] = NAMES[(i + 1) % len(NAMES)]
    doc["network"]["source"] = SOURCE
    text = json.dumps(doc)
    for old, new in zip(["crew-A", "crew-B", "crew-C"], CREWS):
        text = text.replace(json.dumps(old), json.dumps(new))
    return json.loads(text)


@pytest.fixture(scope="module")
def hostile(tmp_path_factory):
    path = tmp_path_factory.mktemp("hostile") / "plan.json"
    path.write_text(json.dumps(_hostile_doc(), ensure_ascii=False), encoding="utf-8")
    plan = read_plan(path)
    assert [c.id for c in plan.crews] == CREWS and any(s.name == LONG for s in plan.network.segments)
    return plan


@pytest.fixture(scope="module")
def hostile_path(hostile, tmp_path_factory):
    path = tmp_path_factory.mktemp("hostile-file") / "plan.json"
    path.write_text(json.dumps(_hostile_doc(), ensure_ascii=False), encoding="utf-8")
    return path


def test_terminal_table_holds_no_control_or_override_characters(hostile_path, capsys):
    from crewcut.cli.main import main
    assert main(["table", str(hostile_path)]) == 0
    out = capsys.readouterr().out
    assert "=1+2<script>" in out  # crew ids are shown as they are (the terminal runs no markup)
    assert not re.search("[\x00-\x08\x0b-\x1f\x7f-\x9f\u202a-\u202e\u2066-\u2069]", out)


def _parse_xml(text: str) -> ET.Element:
    assert not XML_ILLEGAL.search(text)
    return ET.fromstring(text.encode("utf-8"))  # raises ParseError when not well-formed


def test_svg_maps_are_well_formed(hostile):
    maps = [territory_map(hostile)] + [route_map(hostile, c) for c in hostile.crews]
    svg = "{http://www.w3.org/2000/svg}"
    for m in maps:
        root = _parse_xml(m.text)
        assert root.tag == f"{svg}svg" and not list(root.iter(f"{svg}script"))
        assert m.replaced == 0 and "cannot hold" not in m.text  # crew ids that load hold nothing XML refuses
    # the legend names every crew exactly as given (escaped in the file, whole again when parsed)
    texts = ["".join(t.itertext()) for t in _parse_xml(maps[0].text).iter(f"{svg}text")]
    assert all(any(t.startswith(c + ":") for t in texts) for c in CREWS)
    assert territory_svg(hostile) == maps[0].text  # the text-returning function gives the same document


def test_svg_of_a_crew_built_in_memory_says_what_was_replaced():
    # the library's caller may build crews without the load check: the map must still be XML
    plan = make_plan(k=2)
    first = dataclasses.replace(plan.crews[0], crew=dataclasses.replace(plan.crews[0].crew, id="a\x00b\x1b"))
    plan = dataclasses.replace(plan, crews=(first,) + plan.crews[1:])
    terr, route = territory_map(plan), route_map(plan, plan.crews[0])
    for m in (terr, route):
        _parse_xml(m.text)
        assert m.text.count("<!-- ") == 1 and f"<!-- {m.note} -->" in m.text
    # the id is written in the crew group's attribute, the depot label and the legend: 3 times 2 characters
    assert terr.replaced == 6 and terr.note == "6 characters that XML 1.0 cannot hold were replaced by U+FFFD"
    # the route map: the title's text and aria-label, and the depot label
    assert route.replaced == 6
    assert gpx_document(plan).replaced == 2 * (1 + len(plan.crews[0].routes))  # waypoint and track names


def test_gpx_is_well_formed_and_readable_by_gpxpy(hostile):
    doc = gpx_document(hostile)
    assert to_gpx(hostile) == doc.text
    root = _parse_xml(doc.text)
    ns = "{http://www.topografix.com/GPX/1/1}"
    assert root.find(f"{ns}metadata/{ns}name").text == SOURCE.replace("\x00", "\ufffd").replace("\x1b", "\ufffd")
    assert doc.replaced == 2  # NUL and ESC of the source name: the only user text in XML that XML cannot hold
    assert root.find(f"{ns}metadata/{ns}desc").text == "2 characters that XML 1.0 cannot hold were replaced by U+FFFD"
    gpx = gpxpy.parse(doc.text)  # what an in-cab device's software would read
    assert [w.name for w in gpx.waypoints] == [f"{c} depot" for c in CREWS]
    assert [t.name.rsplit(" ", 1)[0] for t in gpx.tracks] == [c.id for c in hostile.crews for _ in c.routes]
    assert all(len(seg.points) >= 2 for t in gpx.tracks for seg in t.segments)


def test_gpx_without_replacements_has_no_note():
    doc = gpx_document(make_plan(k=2))
    assert doc.replaced == 0 and "<desc>" not in doc.text.split("</metadata>")[0]
    gpxpy.parse(doc.text)


class _Elements(HTMLParser):
    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.tags: list[str] = []
        self.data: list[str] = []

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)

    def handle_data(self, data):
        self.data.append(data)


def _check_html(text: str) -> _Elements:
    assert not HTML_ILLEGAL.search(text)
    assert "<script" not in text.lower()
    p = _Elements()
    p.feed(text)
    p.close()
    assert "script" not in p.tags
    return p


def test_html_report_holds_no_control_characters_or_markup_from_names(hostile):
    page = _check_html(report_html(hostile))
    text = "".join(page.data)
    assert "<script>alert(1)</script>" in text  # the street name arrives as text
    assert "=1+2<script>" in text  # and so does the crew id


def test_sheets_in_every_format(hostile):
    for form in SHEET_FORMATS:
        files = sheet_files(hostile, list(hostile.crews), form)
        for name, text in files:
            assert re.fullmatch(r"sheet-[A-Za-z0-9_-]{1,40}\.(txt|md)|sheets\.html", name), name
            if form == "html":
                _check_html(text)
            elif form == "txt":
                assert not re.search("[\x00-\x08\x0b-\x1f\x7f-\x9f\u202a-\u202e\u2066-\u2069]", text)
            else:
                _check_markdown(text)
        if form != "html":
            assert len(files) == len(CREWS)
        shown = "".join(_check_markdown(t) if form == "md" else _html_data(t) if form == "html" else t
                        for _n, t in files)
        # the names are still there, as text: markup shown, line breaks as spaces
        # (HTML shows a line break in text as a space)
        assert "<script>alert(1)</script>" in shown and "two lines" in " ".join(shown.split()) and "[/]" in shown


def _html_data(text: str) -> str:
    return "".join(_check_html(text).data)


def _check_markdown(text: str) -> str:
    assert "<" not in text
    md = MarkdownIt("commonmark").enable("table")
    rendered = md.render(text)
    tags = _check_html(rendered).tags
    assert not {"em", "code", "a", "img", "s", "del"} & set(tags)  # (bold is the table's own totals row)
    tables = [t for t in md.parse(text) if t.type == "table_open"]
    rows = re.findall(r"<tr>(.*?)</tr>", rendered, flags=re.S)
    assert tables and rows
    width = len(re.findall(r"<th", rows[0]))
    assert all(len(re.findall(r"<t[dh]", r)) == width for r in rows)  # no name split or merged a row
    return "".join(_check_html(rendered).data)


def test_workload_markdown(hostile):
    _check_markdown(workload_text(hostile, "md"))


def _check_csv(text: str) -> list[list[str]]:
    rows = list(csv.reader(io.StringIO(text)))
    for row in rows:
        for cell in row:
            try:
                float(cell)
                continue
            except ValueError:
                assert not cell.startswith(FORMULA), cell
    return rows


def test_csv_cells_are_not_formulas(hostile):
    rows = _check_csv(to_csv(hostile))
    assert len(rows) == len(hostile.network.segments) + 1
    names = {r[2] for r in rows[1:]}
    assert "'=1+2" in names and "'@x" in names and "'-2+3" in names and LONG in names
    table = _check_csv(workload_text(hostile, "csv"))
    assert [r[0] for r in table[1:-1]] == ["'" + c for c in CREWS]


# ---------------------------------------------------------------------- crew ids refused at load
BAD_IDS = ["\x1b]0;t\x07", "a\x00b", "x\ufffey", "\u202eevil", "two\nlines", "c" * 65, "c" * 100_000, "   "]


@pytest.mark.parametrize("bad", BAD_IDS, ids=lambda s: repr(s[:12]))
def test_plan_file_with_a_bad_crew_id_is_refused(tmp_path, bad):
    doc = json.loads(plan_to_json(make_plan(k=2)))
    doc["crews"][1]["id"] = bad
    path = tmp_path / "plan.json"
    path.write_text(json.dumps(doc), encoding="utf-8")
    before = path.read_bytes()
    with pytest.raises(InputError) as err:
        read_plan(path)
    assert "damaged plan file" in err.value.message and "crews[1]" in err.value.message
    assert len(err.value.message) < 400  # the 100,000-character id is cut in the message
    assert path.read_bytes() == before


@pytest.mark.parametrize("bad", BAD_IDS, ids=lambda s: repr(s[:12]))
def test_config_with_a_bad_crew_id_is_refused(bad):
    data = {"crews": [{"id": "north", "depot": [-30.5, 45.2]}, {"id": bad, "depot": [-30.5, 45.2]}]}
    with pytest.raises(InputError) as err:
        profile_from_dict(data, "town.toml")
    assert "town.toml: crews[1]" in err.value.message and len(str(err.value)) < 400


@pytest.mark.parametrize("bad", [b for b in BAD_IDS if b.strip()], ids=lambda s: repr(s[:12]))
def test_extra_crew_with_a_bad_id_is_refused(bad):
    changes = Changes(added_crews=(Crew(bad, 480.0, (-30.5, 45.2)),))
    with pytest.raises(InputError) as err:
        crews_of_the_day(make_plan(k=2), None, Profile(), changes)
    assert err.value.param == "added_crews" and "`added_crews`" in err.value.message


def test_good_crew_ids_still_load():
    data = {"crews": [{"id": i, "depot": [-30.5, 45.2]} for i in ("north", "Nord Ost 2", "équipe-3", "c" * 64)]}
    assert [c.id for c in profile_from_dict(data, "town.toml").crews] == ["north", "Nord Ost 2", "équipe-3", "c" * 64]


# ---------------------------------------------------------------------- file names from crew ids
SAFE_NAME = re.compile(r"[A-Za-z0-9_-]{1,40}")


@pytest.mark.parametrize("cid", ["x" * 100_000, "../../etc/x", "..", "", "\x00", "Crew A", "crew/a", "con",
                                 "\u202eevil", "a" * 41, "-rf"])
def test_slug_is_a_safe_short_name(cid):
    s = slug(cid)
    assert SAFE_NAME.fullmatch(s) and not s.startswith("-") and "." not in s and "/" not in s


def test_slug_keeps_plain_ids_and_tags_changed_ones():
    assert slug("sweeper-1") == slug("sweeper-1") == "sweeper-1"  # the demo's ids keep their file names
    assert slug("../../etc/x") != slug("etc_x") and slug("../../etc/x").startswith("etc_x-")
    assert slug("x" * 100_000) != slug("x" * 99_999)  # shortened alike, told apart by the hash


def test_sheet_names_are_unique_even_ignoring_case():
    ids = ["North", "north", "NORTH", "n-1", "n_1", "n.1", "n 1", "n/1", "n_1-" + "0" * 8]
    names = sheet_names(ids)
    assert len({n.lower() for n in names.values()}) == len(ids)
    assert all(SAFE_NAME.fullmatch(n) for n in names.values())
    assert names["n-1"] == "n-1" and names == sheet_names(ids)  # no clash, no change; same ids, same names


@pytest.mark.parametrize("where, edit", [
    ("network.segments[0].name", lambda d: d["network"]["segments"][0].__setitem__("name", "a\ud800b")),
    ("network.nodes[1].label", lambda d: d["network"]["nodes"][1].__setitem__("label", "\udfff")),
])
def test_plan_file_with_an_unpaired_surrogate_is_refused(tmp_path, where, edit):
    # RFC 8259 section 8.2: a lone \uD800-\uDFFF escape is allowed by JSON's grammar but is no character,
    # so no UTF-8 output could hold it; Python's json reads it, the plan reader refuses the file
    doc = json.loads(plan_to_json(make_plan(k=2)))
    edit(doc)
    path = tmp_path / "plan.json"
    path.write_text(json.dumps(doc), encoding="ascii")  # ensure_ascii: the surrogate as a \\u escape
    with pytest.raises(InputError, match=re.escape(where) + ".*unpaired surrogate"):
        read_plan(path)


def test_plan_file_with_escaped_pairs_still_reads(tmp_path):
    doc = json.loads(plan_to_json(make_plan(k=2)))
    doc["network"]["segments"][0]["name"] = "Rose Street \U0001f339"  # written as a surrogate pair escape
    path = tmp_path / "plan.json"
    path.write_text(json.dumps(doc), encoding="ascii")
    assert read_plan(path).network.segments[0].name == "Rose Street \U0001f339"


def test_command_line_refuses_a_bad_crew_id_and_notes_replacements(tmp_path, capsys):
    from crewcut.cli.main import main
    doc = json.loads(plan_to_json(make_plan(k=2)))
    doc["crews"][0]["id"] = "\x1b]0;t\x07"
    bad = tmp_path / "bad.json"
    bad.write_text(json.dumps(doc), encoding="utf-8")
    before = bad.read_bytes()
    for argv in (["map", str(bad), "--out", str(tmp_path / "m.svg")],
                 ["sheets", str(bad), "--format", "txt", "--out", str(tmp_path / "s")]):
        assert main(argv) == 2
        err = capsys.readouterr().err
        assert "crews[0]" in err and "not printable" in err and "Traceback" not in err and "\x1b" not in err
    assert bad.read_bytes() == before and not (tmp_path / "m.svg").exists() and not (tmp_path / "s").exists()
    # a source name holding NUL and ESC: the GPX is written, valid, and the command says what was replaced
    doc = json.loads(plan_to_json(make_plan(k=2)))
    doc["network"]["source"] = "town\x00\x1b.geojson"
    src = tmp_path / "src.json"
    src.write_text(json.dumps(doc), encoding="utf-8")
    assert main(["export", str(src), "--format", "gpx", "--out", str(tmp_path / "r.gpx")]) == 0
    assert "2 characters that XML 1.0 cannot hold were replaced" in capsys.readouterr().err
    gpxpy.parse((tmp_path / "r.gpx").read_text(encoding="utf-8"))


@pytest.mark.parametrize("key", ["name", "id", "class"])
def test_street_file_with_an_unpaired_surrogate_is_refused(tmp_path, key):
    # RFC 8259 section 8.2, as above: the reader refuses it, naming the feature and the property,
    # instead of failing later when the plan file is written
    from crewcut.solve.readers import read_network
    props = {"id": "elm", "name": "Elm Street", "class": "residential", key: "Elm \ud800"}
    feature = {"type": "Feature", "properties": props,
               "geometry": {"type": "LineString", "coordinates": [[-30.5, 45.2], [-30.5, 45.201]]}}
    path = tmp_path / "streets.geojson"
    path.write_text(json.dumps({"type": "FeatureCollection", "features": [feature]}), encoding="ascii")
    before = path.read_bytes()
    with pytest.raises(InputError, match=rf"features\[0\]: '{key}' holds an unpaired surrogate"):
        read_network(str(path), Profile())
    assert path.read_bytes() == before
