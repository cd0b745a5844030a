"""The workload table (``crewcut.reports.workload`` and ``crewcut table``)."""
from __future__ import annotations

import csv
import dataclasses
import io
import json
import math

import pytest
from pyproj import Geod
from rich.console import Console

from crewcut.cli.main import main
from crewcut.cli.tables import workload_table
from crewcut.plans.planfile import plan_to_dict
from crewcut.reports.workload import COLUMNS, workload_rows, workload_summary



def test_rows_follow_the_traversals(plan):
    doc = plan_to_dict(plan)  # the plan file's records: what the report must show
    rows = workload_rows(plan)
    assert [r["crew"] for r in rows[:-1]] == [c["id"] for c in doc["crews"]]
    for r, c in zip(rows, doc["crews"]):
        trav = [t for route in c["routes"] for t in route["traversals"]]
        assert r["segments"] == len(c["territory"])
        assert r["service_km"] == pytest.approx(sum(t["metres"] for t in trav if t["mode"] == "service") / 1000)
        assert r["deadhead_km"] == pytest.approx(sum(t["metres"] for t in trav if t["mode"] == "deadhead") / 1000)
        assert r["u_turns"] == sum(t["turn"] == "u_turn" for t in trav)
        assert r["across_turns"] == sum(t["turn"] == "across_traffic" for t in trav)
        # shift = the route totals recorded in the plan (crewcut.solve.result.RouteTotals), 4-decimal rounding
        assert r["shift_h"] * 60 == pytest.approx(sum(x["totals"]["total_min"] for x in c["routes"]), abs=1e-3)
        assert r["service_h"] + r["driving_h"] == pytest.approx(r["shift_h"])
        assert r["limit_pct"] == pytest.approx(100 * r["shift_h"] * 60 / c["shift_limit_min"])


def test_service_km_equals_geodesic_length_of_required_streets(plan):
    doc = plan_to_dict(plan)  # the plan file's records: what the report must show
    # outside reference: pyproj's geodesic (Karney) lengths of the streets that need service;
    # every street of this test town needs one pass, so service km = their total length
    g = Geod(ellps="WGS84")
    need = [s for s in doc["network"]["segments"] if sum(s["passes"].values()) > 0]
    total_m = sum(g.line_length([p[0] for p in s["coords"]], [p[1] for p in s["coords"]]) for s in need)
    # coordinates in the plan are rounded to 7 decimals (about 1 cm), hence rel 1e-5
    assert workload_rows(plan)[-1]["service_km"] * 1000 == pytest.approx(total_m, rel=1e-5)


def test_totals_row_adds_up(plan):
    rows = workload_rows(plan)
    crews, tot = rows[:-1], rows[-1]
    assert tot["row"] == "total"
    for key in ("segments", "service_km", "deadhead_km", "service_h", "driving_h", "u_turns", "across_turns",
                "shift_h"):
        assert tot[key] == pytest.approx(math.fsum(r[key] for r in crews))
    assert tot["deadhead_pct"] == pytest.approx(100 * tot["deadhead_km"] / (tot["service_km"] + tot["deadhead_km"]))


def test_summary_flags_over_limit_and_reads_bound(plan):
    doc = plan_to_dict(plan)  # the plan file's records: what the report must show
    s = workload_summary(plan)
    shifts = [c["shift_min"] for c in doc["crews"]]
    assert s["longest_shift_min"] == pytest.approx(max(shifts), abs=1e-3)
    assert s["longest_over_mean"] == pytest.approx(max(shifts) / (sum(shifts) / len(shifts)), rel=1e-4)
    assert s["lower_bound_min"] == doc["summary"]["lower_bound_min"]
    assert s["gap"] == doc["summary"]["gap"]
    over = [c["id"] for c in doc["crews"] if c["shift_min"] > c["shift_limit_min"]]
    assert over == ["crew-A"]  # the factory gives crew-A a 20-minute limit
    assert [o["crew"] for o in s["over_limit"]] == over
    text = _render(workload_table(plan))
    assert "over the shift limit: crew-A" in text and "crew-A" in text and "gap" in text


def _render(table) -> str:
    con = Console(width=250, record=True, file=io.StringIO())
    con.print(table)
    return con.export_text()


def test_bound_missing_is_said_plainly(plan):
    p = dataclasses.replace(plan, summary=None)
    s = workload_summary(p)
    assert s["lower_bound_min"] is None and s["gap"] is None
    assert "not recorded" in _render(workload_table(p))


def test_cli_formats_have_units_and_totals(plan_path, capsys):
    assert main(["table", plan_path, "--format", "csv"]) == 0
    out = capsys.readouterr().out
    rows = list(csv.reader(io.StringIO(out)))
    head = rows[0]
    assert head == [h for _k, h, _j in COLUMNS]
    assert all("(" in h for h in head if h not in ("crew", "depot"))  # a unit in every numeric header
    assert rows[-1][0] == "all crews" and len(rows) == 1 + 3 + 1

    assert main(["table", plan_path, "--format", "json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["rows"][-1]["row"] == "total" and doc["summary"]["crews"] == 3

    assert main(["table", plan_path, "--format", "md"]) == 0
    md = capsys.readouterr().out.splitlines()
    assert md[0].startswith("| crew |") and set(md[1]) <= set("|:-") and "**all crews**" in md[5]

    assert main(["table", plan_path]) == 0
    assert "Workload per crew" in capsys.readouterr().out
    assert main(["--quiet", "table", plan_path]) == 0
    assert capsys.readouterr().out == ""


def test_cli_same_plan_same_bytes(plan_path, capsys):
    outs = []
    for _ in range(2):
        assert main(["table", plan_path, "--format", "json"]) == 0
        outs.append(capsys.readouterr().out)
    assert outs[0] == outs[1]


@pytest.mark.parametrize("content", ['{"type": "FeatureCollection", "features": []}', "not json at all", ""])
def test_cli_not_a_plan(tmp_path, capsys, content):
    bad = tmp_path / "streets.geojson"
    bad.write_text(content)
    assert main(["table", str(bad)]) == 2
    err = capsys.readouterr().err
    assert "streets.geojson" in err and "plan" in err and "Traceback" not in err
    assert bad.read_text() == content


def test_cli_malformed_plan_names_the_crew(tmp_path, plan, capsys):
    p = plan_to_dict(plan)
    p["crews"][1]["routes"][0]["traversals"][3]["segment"] = 10_000
    path = tmp_path / "plan.json"
    path.write_text(json.dumps(p))
    assert main(["table", str(path)]) == 2
    err = capsys.readouterr().err
    assert "crew-B" in err and "traversal 3" in err
