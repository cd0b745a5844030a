"""Small, hand-made plan documents for the report tests (invented Tallowmere streets).

The routes are built here without the project's own route engine, so that the
report tests do not depend on it: a grid network near lon -30.5, lat 45.2
(:func:`helpers.nets.named_grid`) is cut into column bands, one per crew; each
band (plus the street from the depot into it) is made Eulerian with networkx's
``eulerize`` (duplicating existing edges only) and walked with networkx's
``eulerian_circuit`` from the depot. The first traversal of a band street serves
it, every other traversal is deadhead. Headings are pyproj's geodesic azimuths
(:func:`helpers.checks.azimuth`); turns are classified from them (straight
within 30 degrees, U-turn from 150 degrees: common practice, no source). The plan
is assembled with :func:`crewcut.plans.planfile.build_plan`, the same function
the planners use.
"""
from __future__ import annotations

import networkx as nx
import numpy as np

from crewcut.fleet.assemble import fleet_summary
from crewcut.plans.model import CrewPlan, Plan
from crewcut.plans.planfile import build_plan
from crewcut.solve.costs import deadhead_minutes, service_minutes
from crewcut.solve.network.model import SERVICE_NONE, Network
from crewcut.solve.profile import Crew, Profile
from crewcut.solve.result import Route, RouteTotals, Traversal

from helpers.checks import azimuth
from helpers.nets import named_grid


def turn_kind(prev_end: float, next_start: float, same_seg_back: bool, right_hand: bool) -> str:
    if same_seg_back:
        return "u_turn"
    d = (next_start - prev_end + 180.0) % 360.0 - 180.0
    if abs(d) >= 150.0:
        return "u_turn"
    if abs(d) <= 30.0:
        return "straight"
    return "with_traffic" if (d > 0) == right_hand else "across_traffic"


def grid_routes(net: Network, profile: Profile, k: int) -> list[CrewPlan]:
    """Split the required streets into k column bands and walk each from a depot on its bottom row."""
    cols = int(round(np.unique(net.node_lon).size))
    smin = service_minutes(net, profile)
    dmin = deadhead_minutes(net, profile)
    coords = net.seg_coords
    heading_start = np.array([azimuth(c[0], c[1]) for c in coords])
    heading_end = np.array([azimuth(c[-2], c[-1]) for c in coords])
    col_of = np.rint((net.node_lon - net.node_lon.min()) / (np.ptp(net.node_lon) / (cols - 1))).astype(int)
    band_of_node = np.minimum(col_of * k // cols, k - 1)
    crews = []
    for b in range(k):
        # a street crossing from one band into the next belongs to the band of its u end
        terr = [s for s in range(net.n_segments) if net.seg_service[s] != SERVICE_NONE
                and band_of_node[net.seg_u[s]] == b]
        depot = int(min(np.flatnonzero(band_of_node == b), key=lambda n: (net.node_lat[n], net.node_lon[n])))
        g = nx.MultiGraph()
        for s in terr:
            g.add_edge(int(net.seg_u[s]), int(net.seg_v[s]), key=s, seg=s)
        # deadhead-only streets of the band keep the walk connected where the band has gaps
        full = nx.MultiGraph()
        for s in range(net.n_segments):
            full.add_edge(int(net.seg_u[s]), int(net.seg_v[s]), key=s, seg=s, w=float(net.seg_length[s]))
        comps = list(nx.connected_components(g))
        for comp in comps[1:]:
            path = nx.shortest_path(full, next(iter(comps[0])), min(comp), weight="w")
            for a, c in zip(path, path[1:]):
                s = min(full[a][c], key=lambda kk: full[a][c][kk]["w"])
                g.add_edge(a, c, seg=s)
        if depot not in g:
            raise AssertionError("depot off the band")
        eg = nx.eulerize(g) if not nx.is_eulerian(g) else g
        served: set[int] = set()
        trav: list[Traversal] = []
        for a, c, key in nx.eulerian_circuit(eg, source=depot, keys=True):
            data = eg[a][c][key]
            s = data.get("seg")
            if s is None:  # an edge eulerize added: copy of an existing (a, c) edge
                s = next(d["seg"] for d in eg[a][c].values() if "seg" in d)
            s = int(s)
            serve = s in terr and s not in served
            if serve:
                served.add(s)
            fwd = a == net.seg_u[s]
            start_h = heading_start[s] if fwd else (heading_end[s] + 180.0) % 360.0
            if trav:
                p = trav[-1]
                pfwd = p.from_node == net.seg_u[p.segment]
                pend = heading_end[p.segment] if pfwd else (heading_start[p.segment] + 180.0) % 360.0
                kind = turn_kind(pend, start_h, p.segment == s and p.from_node == c, profile.traffic == "right")
            else:
                kind = "start"
            tmin = profile.turn_penalty_s.get(kind, 0.0) / 60.0
            trav.append(Traversal(s, int(a), int(c), serve, float(net.seg_length[s]),
                                  float(smin[s] if serve else dmin[s]), kind, tmin))
        assert served == set(terr)
        totals = RouteTotals.of(trav)
        lb = sum(smin[s] for s in terr)  # serving every pass once is a lower bound (no deadhead, no turns)
        route = Route(depot, tuple(trav), totals, "test-euler-circuit", False, lb)
        crews.append(CrewPlan(Crew(f"crew-{chr(65 + b)}", 20.0 if b == 0 else 480.0, None, depot), tuple(terr),
                              (route,)))
    return crews


def make_plan(k: int = 3, cols: int = 6, rows: int = 4, traffic: str = "right") -> Plan:
    """A k-crew plan of the grid town (crew-A's shift limit is set low so it is over limit)."""
    profile = Profile(traffic=traffic, service_speed_kmh={"default": 6.0}, deadhead_speed_kmh={"default": 25.0})
    net = named_grid(cols, rows)
    crews = grid_routes(net, profile, k)
    service_total = sum(sum(t.minutes for t in c.routes[0].traversals if t.service) for c in crews)
    # mean service time per crew is a lower bound on the longest shift (the longest is at least the mean)
    lb = service_total / k
    summary = fleet_summary(crews, lb, method="test: networkx Euler circuits per column band")
    return build_plan(net, profile, crews, source="tallowmere-grid (tests)", summary=summary)


def retotal(doc: dict, summary: bool = True) -> None:
    """Route totals and shifts (and, with ``summary``, the summary's figures) recomputed from the traversals.

    The recorded lower bound is kept. Used to make a forged or broken plan document consistent again, so
    that only the intended break remains.
    """
    shifts, serv, dead, skm, dkm = [], 0.0, 0.0, 0.0, 0.0
    for crew in doc["crews"]:
        shift = 0.0
        for r in crew["routes"]:
            t, trs = r["totals"], r["traversals"]
            t["service_km"] = sum(x["metres"] for x in trs if x["mode"] == "service") / 1000
            t["deadhead_km"] = sum(x["metres"] for x in trs if x["mode"] == "deadhead") / 1000
            t["service_min"] = sum(x["minutes"] for x in trs if x["mode"] == "service")
            t["deadhead_min"] = sum(x["minutes"] for x in trs if x["mode"] == "deadhead")
            t["turn_min"] = sum(x["turn_minutes"] for x in trs)
            t["total_min"] = t["service_min"] + t["deadhead_min"] + t["turn_min"]
            t["u_turns"] = sum(x["turn"] == "u_turn" for x in trs)
            t["across_turns"] = sum(x["turn"] == "across_traffic" for x in trs)
            shift += t["total_min"]
            serv, dead = serv + t["service_min"], dead + t["deadhead_min"]
            skm, dkm = skm + t["service_km"], dkm + t["deadhead_km"]
        crew["shift_min"] = shift
        shifts.append(shift)
    if not summary:
        return
    s = doc["summary"]
    s.update(longest_min=max(shifts), mean_min=sum(shifts) / len(shifts), shortest_min=min(shifts),
             total_shift_min=sum(shifts), service_min=serv, deadhead_min=dead,
             deadhead_pct=100.0 * dkm / (dkm + skm) if dkm + skm else 0.0)
    s["longest_over_mean"] = s["longest_min"] / s["mean_min"] if s["mean_min"] > 0 else 1.0
    s["gap"] = s["longest_min"] / s["lower_bound_min"] - 1.0 if s["lower_bound_min"] > 0 else 0.0
