"""SVG maps (``crewcut.reports.svgmap`` and ``crewcut map``)."""
from __future__ import annotations

import itertools
import xml.etree.ElementTree as ET

import numpy as np
import pytest

from crewcut.cli.main import main
from crewcut.plans.planfile import plan_from_dict, plan_to_dict
from crewcut.plans.view import view
from crewcut.reports.svgmap import BACKGROUND, DEADHEAD, INK, PALETTE, route_svg, territory_svg

from crewcut.solve.errors import InputError

SVG = "{http://www.w3.org/2000/svg}"


# --- colour-blind safety of the palette -------------------------------------------------
# Simulation matrices for full dichromacy (severity 1.0) in linear RGB from Machado, Oliveira
# and Fernandes, "A physiologically-based model for simulation of color vision deficiency",
# IEEE TVCG 15(6), 2009 (values from memory). sRGB transfer function and sRGB->XYZ (D65)
# from IEC 61966-2-1; CIELAB and the 1976 colour difference from CIE 15.
SIM = {
    "normal": np.eye(3),
    "deuteranopia": np.array([[0.367322, 0.860646, -0.227968], [0.280085, 0.672501, 0.047413],
                              [-0.011820, 0.042940, 0.968881]]),
    "protanopia": np.array([[0.152286, 1.052583, -0.204868], [0.114503, 0.786281, 0.099216],
                            [-0.003882, -0.048116, 1.051998]]),
    "tritanopia": np.array([[1.255528, -0.076749, -0.178779], [-0.078411, 0.930809, 0.147602],
                            [0.004733, 0.691367, 0.303900]]),
}


def _lab(hex_colour: str, m: np.ndarray) -> np.ndarray:
    c = np.array([int(hex_colour[i:i + 2], 16) for i in (1, 3, 5)]) / 255.0
    lin = np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)
    lin = np.clip(m @ lin, 0, 1)
    xyz = np.array([[0.4124, 0.3576, 0.1805], [0.2126, 0.7152, 0.0722], [0.0193, 0.1192, 0.9505]]) @ lin
    t = xyz / np.array([0.95047, 1.0, 1.08883])
    f = np.where(t > (6 / 29) ** 3, np.cbrt(t), t / (3 * (6 / 29) ** 2) + 4 / 29)
    return np.array([116 * f[1] - 16, 500 * (f[0] - f[1]), 200 * (f[1] - f[2])])


@pytest.mark.parametrize("vision", sorted(SIM))
def test_palette_stays_distinguishable(vision):
    # 20 CIELAB units: well above the "clearly different" range of a few units (common practice, no source)
    colours = list(PALETTE) + [BACKGROUND, DEADHEAD, INK, "#ffffff"]
    labs = {c: _lab(c, SIM[vision]) for c in colours}
    pairs = [(a, b) for a, b in itertools.combinations(colours, 2) if a in PALETTE or b in PALETTE]
    worst = min(float(np.linalg.norm(labs[a] - labs[b])) for a, b in pairs)
    assert worst > 20.0


# --- territory map ----------------------------------------------------------------------
def test_territory_map_one_colour_per_crew_and_legend(plan):
    doc = plan_to_dict(plan)  # the plan file's records: what the report must show
    pv = view(plan)
    root = ET.fromstring(territory_svg(pv))
    assert root.tag == f"{SVG}svg"
    groups = {g.get("data-crew"): g for g in root.iter(f"{SVG}g") if g.get("data-crew")}
    assert list(groups) == [c["id"] for c in doc["crews"]]
    strokes = [g.get("stroke") for g in groups.values()]
    assert len(set(strokes)) == len(strokes) and set(strokes) <= set(PALETTE)
    for c in doc["crews"]:
        assert len(groups[c["id"]].findall(f"{SVG}path")) == len(c["territory"])
    texts = " | ".join(t.text or "" for t in root.iter(f"{SVG}text"))
    for c in doc["crews"]:
        assert f"{c['id']}: {c['shift_min'] / 60:.2f} h" in texts  # legend: crew id and shift hours
        assert "depot: " + c["id"] in texts


def test_map_puts_east_right_and_north_up(plan):
    doc = plan_to_dict(plan)  # the plan file's records: what the report must show
    pv = view(plan)
    root = ET.fromstring(territory_svg(pv))
    rects = [r for r in root.iter(f"{SVG}rect") if r.get("width") == "14"]  # depot marks, sorted by node id
    nodes = sorted({c["depot_node"] for c in doc["crews"]})
    xs = [float(r.get("x")) for r in rects]
    lons = [doc["network"]["nodes"][n]["lon"] for n in nodes]
    assert np.argsort(xs).tolist() == np.argsort(lons).tolist()
    # north up and east right: within a territory, the first point of every street is drawn
    # lower on the page when it lies further south, further right when further east
    segs = doc["network"]["segments"]
    crew = doc["crews"][0]
    group = next(g for g in root.iter(f"{SVG}g") if g.get("data-crew") == crew["id"])
    firsts = [tuple(map(float, p.get("d")[1:].split(" ")[0].split(","))) for p in group.findall(f"{SVG}path")]
    for (x1, y1), (x2, y2), s1, s2 in zip(firsts, firsts[1:], sorted(crew["territory"]), sorted(crew["territory"])[1:]):
        (lon1, lat1), (lon2, lat2) = segs[s1]["coords"][0], segs[s2]["coords"][0]
        if abs(lat1 - lat2) > 1e-6:
            assert (lat1 > lat2) == (y1 < y2)
        if abs(lon1 - lon2) > 1e-6:
            assert (lon1 > lon2) == (x1 > x2)


# --- route map --------------------------------------------------------------------------
def test_route_map_service_deadhead_and_arrows(plan):
    doc = plan_to_dict(plan)  # the plan file's records: what the report must show
    pv = view(plan)
    crew = doc["crews"][1]
    trav = crew["routes"][0]["traversals"]
    root = ET.fromstring(route_svg(pv, plan.crews[1]))
    groups = list(root.iter(f"{SVG}g"))
    serve = [g for g in groups if g.get("stroke") == PALETTE[1] and g.get("stroke-dasharray") is None]
    dead = [g for g in groups if g.get("stroke") == DEADHEAD and g.get("stroke-dasharray")]
    assert len(serve) == 1 and len(dead) == 1
    assert len(serve[0].findall(f"{SVG}path")) == sum(t["mode"] == "service" for t in trav)
    assert len(dead[0].findall(f"{SVG}path")) == sum(t["mode"] == "deadhead" for t in trav)
    assert float(dead[0].get("stroke-width")) < float(serve[0].get("stroke-width"))
    arrows = [p for p in root.iter(f"{SVG}polygon")]
    assert len(arrows) >= len(trav)  # one per traversal, plus the legend's


def test_no_coordinates_is_a_clear_error(plan):
    p = plan_to_dict(plan)
    p["network"]["has_geometry"] = False
    for s in p["network"]["segments"]:
        s["coords"] = None
    with pytest.raises(InputError, match="no coordinates"):
        territory_svg(view(plan_from_dict(p)))


def test_cli_map_files_and_bytes(plan_path, tmp_path, capsys):
    a, b = tmp_path / "a.svg", tmp_path / "b.svg"
    assert main(["map", plan_path, "--out", str(a)]) == 0
    assert main(["map", plan_path, "--out", str(b)]) == 0
    assert a.read_bytes() == b.read_bytes()
    assert main(["map", plan_path, "--crew", "crew-C"]) == 0
    out = capsys.readouterr().out
    assert "Route - crew-C" in out and "http://www.w3.org/2000/svg" in out
    assert "href" not in out  # nothing linked from outside


def test_cli_unknown_crew(plan_path, tmp_path, capsys):
    out = tmp_path / "m.svg"
    assert main(["map", plan_path, "--crew", "nobody", "--out", str(out)]) == 2
    err = capsys.readouterr().err
    assert "nobody" in err and "Traceback" not in err
    assert not out.exists()
