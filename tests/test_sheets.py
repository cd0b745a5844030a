"""Route sheets (``crewcut.reports.sheets`` and ``crewcut sheets``)."""
from __future__ import annotations

import itertools

import pytest
from pyproj import Geod

from crewcut.cli.main import main
from crewcut.plans.planfile import plan_to_dict
from crewcut.plans.view import view
from crewcut.reports.sheets import COMPASS, compass, crew_sheets, initial_bearing, route_sheet, turn_words
from helpers.plans import make_plan


def _sheets(plan):
    pv = view(plan)
    return pv, crew_sheets(pv, pv.crews)


def test_every_traversal_once_in_order_and_merged_by_street_and_mode(plan):
    doc = plan_to_dict(plan)  # the plan file's records: what the report must show
    pv, sheets = _sheets(plan)
    merged_any = False
    for sheet, crew in zip(sheets, doc["crews"]):
        trav = crew["routes"][0]["traversals"]
        steps = [ln for ln in sheet.lines if ln.kind == "step"]
        assert [i for ln in steps for i in ln.traversals] == list(range(len(trav)))
        for ln in steps:
            names = {doc["network"]["segments"][trav[i]["segment"]]["name"] for i in ln.traversals}
            modes = {trav[i]["mode"] for i in ln.traversals}
            assert len(names) == 1 and len(modes) == 1  # one street, one mode per line
            assert all(trav[i]["turn"] != "u_turn" for i in ln.traversals[1:])  # a U-turn opens a new line
            merged_any |= len(ln.traversals) > 1
        # nothing left to merge: neighbours differ in street or mode, or the later one starts with a U-turn
        for a, b in itertools.pairwise(steps):
            same = a.street == b.street and a.mode == b.mode and b.street != "unnamed street"
            assert not same or trav[b.traversals[0]]["turn"] == "u_turn"
    assert merged_any  # the test town has straight runs along named streets


def test_depot_lines_and_unnamed_streets_said_plainly(plan):
    doc = plan_to_dict(plan)  # the plan file's records: what the report must show
    pv, sheets = _sheets(plan)
    for sheet, crew in zip(sheets, doc["crews"]):
        assert sheet.lines[0].kind == "start" and f"node {crew['depot_node']}" in sheet.lines[0].street
        assert sheet.lines[-1].kind == "end" and sheet.lines[-1].street.startswith("back at the depot")
    assert any(ln.street == "unnamed street" for s in sheets for ln in s.lines)
    assert all(ln.street for s in sheets for ln in s.lines)


def test_cumulative_time_adds_up_to_route_total(plan):
    doc = plan_to_dict(plan)  # the plan file's records: what the report must show
    pv, sheets = _sheets(plan)
    for sheet, crew in zip(sheets, doc["crews"]):
        steps = [ln for ln in sheet.lines if ln.kind == "step"]
        prev = 0.0
        for ln in steps:
            assert ln.elapsed_min == pytest.approx(prev + ln.minutes)
            prev = ln.elapsed_min
        # the route total recorded in the plan (crewcut.solve.result.RouteTotals, rounded to 4 decimals)
        assert prev == pytest.approx(crew["routes"][0]["totals"]["total_min"], abs=1e-3)
        assert sheet.lines[-1].elapsed_min == prev
        assert sum(ln.metres for ln in steps) == pytest.approx(sum(t["metres"] for t in crew["routes"][0]["traversals"]))


def test_compass_points():
    # 8-point compass, sectors of 45 degrees centred on each point: common practice, no source
    assert [compass(b) for b in (0, 22.4, 22.6, 90, 135, 180, 224, 270, 315, 337.6, 359.9)] == \
        ["N", "N", "NE", "E", "SE", "S", "SW", "W", "NW", "N", "N"]
    assert set(COMPASS) == {"N", "NE", "E", "SE", "S", "SW", "W", "NW"}


def test_headings_agree_with_pyproj_azimuths(plan):
    doc = plan_to_dict(plan)  # the plan file's records: what the report must show
    # outside reference: pyproj Geod.inv forward azimuths on WGS84; the spherical formula
    # differs by far less than a compass sector at town scale
    g = Geod(ellps="WGS84")
    segs = doc["network"]["segments"]
    for s in segs:
        (a, b) = s["coords"][0], s["coords"][-1]
        az, _, _ = g.inv(a[0], a[1], b[0], b[1])
        assert abs((initial_bearing(a, b) - az % 360 + 180) % 360 - 180) < 0.5


def test_turns_follow_the_traffic_side():
    assert (turn_words("with_traffic", "right"), turn_words("across_traffic", "right")) == ("right", "left")
    assert (turn_words("with_traffic", "left"), turn_words("across_traffic", "left")) == ("left", "right")
    plan = make_plan(k=2, traffic="left")
    pv = view(plan)
    crew = pv.crews[0]
    sheet = route_sheet(pv, crew, crew.routes[0])
    trav = plan_to_dict(plan)["crews"][0]["routes"][0]["traversals"]
    for ln in sheet.lines:
        if ln.kind == "step" and trav[ln.traversals[0]]["turn"] == "across_traffic":
            assert ln.turn == "right"  # keeping left, a right turn crosses the oncoming lane


def test_cli_txt_md_html_and_files(plan_path, tmp_path, capsys):
    assert main(["sheets", plan_path, "--crew", "crew-B"]) == 0
    out = capsys.readouterr().out
    assert "crew-B" in out and "crew-A" not in out and "elapsed (h:mm)" in out and "distance (m)" in out
    d = tmp_path / "sheets"
    assert main(["sheets", plan_path, "--format", "md", "--out", str(d)]) == 0
    assert sorted(p.name for p in d.iterdir()) == ["sheet-crew-A.md", "sheet-crew-B.md", "sheet-crew-C.md"]
    assert main(["sheets", plan_path, "--format", "html", "--out", str(d)]) == 0
    page = (d / "sheets.html").read_text()
    assert page.count('<section class="sheet"') == 3 and "page-break-before: always" in page
    assert "http://" not in page and "https://" not in page


def test_cli_same_plan_same_bytes(plan_path, tmp_path):
    texts = []
    for k in range(2):
        d = tmp_path / f"o{k}"
        assert main(["sheets", plan_path, "--format", "html", "--out", str(d)]) == 0
        texts.append((d / "sheets.html").read_bytes())
    assert texts[0] == texts[1]


def test_cli_unknown_crew_writes_nothing(plan_path, tmp_path, capsys):
    d = tmp_path / "out"
    assert main(["sheets", plan_path, "--crew", "crew-A", "--crew", "crew-Z", "--out", str(d)]) == 2
    err = capsys.readouterr().err
    assert "crew-Z" in err and "crew-A, crew-B, crew-C" in err and "Traceback" not in err
    assert not d.exists()
