"""Reader of the CARPTIF benchmark files (capacitated arc routing with intermediate facilities).

Format: /work/shared/benchmarks/arc-routing/SOURCES.md section 4 (Willemse and Joubert
2016, Data in Brief 8, doi 10.1016/j.dib.2016.06.067; files from ejwillemse/mcarptif,
MIT licence): a header (``NODES``, ``REQ_EDGES``, ``REQ_ARCS``, ``NOREQ_*``, ``VEHICLES``,
``CAPACITY``, ``DUMPING_COST``, ``MAX_TRIP``), lists of ``(u,v) serv_cost S trav_cost T
demand D`` (required) and ``(u,v) cost T`` (not required), ``DEPOT`` and ``DUMPING_SITES``.
Nodes are numbered from 1 in most files, from 0 here; the Act-IF files label nodes with
other integers (negative ones too), which are then numbered 0.. in the order of their labels
(``Instance.labels`` keeps the file's label of every node).

The instance becomes a crewcut network without geometry: a segment per link, its length
``T`` metres under a profile that deadheads one metre a minute (so deadhead minutes are
the file's ``T``), one class per required link whose service speed makes its service
minutes ``S`` and whose capacity rate makes one pass use ``D``. A zero ``T`` is taken as
1e-6 (the rate needs a length); turn penalties are zero (the instances have none).
"""
from __future__ import annotations

import re
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np

from crewcut.solve.network.model import SERVICE_NONE, SERVICE_ONE_PASS
from crewcut.solve.profile import Profile
from crewcut.solve.trips.config import Capacity, Facility

from helpers.nets import make_network

_REQ = re.compile(r"\((-?\d+),(-?\d+)\)\s+serv_cost\s+(\d+(?:\.\d+)?)\s+trav?e?_cost\s+(\d+(?:\.\d+)?)\s+demand\s+(\d+(?:\.\d+)?)")
_NOREQ = re.compile(r"\((-?\d+),(-?\d+)\)\s+cost\s+(\d+(?:\.\d+)?)")


@dataclass(frozen=True)
class Instance:
    name: str
    header: dict
    required: list  # (u, v, directed, S, T, D), 0-based nodes
    other: list  # (u, v, directed, T)
    depot: int
    dumps: tuple[int, ...]
    labels: tuple[int, ...]  # the file's label of node 0, 1, ...
    n_nodes: int


def read_instance(path: str | Path) -> Instance:
    text = Path(path).read_text()
    header = {}
    for key in ("NODES", "REQ_EDGES", "NOREQ_EDGES", "REQ_ARCS", "NOREQ_ARCS", "VEHICLES", "CAPACITY",
                "DUMPING_COST", "MAX_TRIP"):
        m = re.search(rf"^{key}\s*:\s*(\d+)", text, re.M)
        header[key] = int(m.group(1)) if m else 0
    section = None
    req, other = [], []
    depot, dumps = None, ()
    for line in text.splitlines():
        s = line.strip()
        if s.startswith("LIST_"):
            section = s.split(":")[0].strip()
            continue
        if s.startswith("DEPOT"):
            depot = int(s.split(":")[1])
            continue
        if s.startswith("DUMPING_SITES"):
            dumps = tuple(int(x) for x in s.split(":")[1].split(","))
            continue
        directed = section is not None and section.endswith("ARCS")
        m = _REQ.match(s)
        if m and section and "NOREQ" not in section:
            u, v, sc, tc, d = m.groups()
            req.append((int(u), int(v), directed, float(sc), float(tc), float(d)))
            continue
        m = _NOREQ.match(s)
        if m:
            u, v, tc = m.groups()
            other.append((int(u), int(v), directed, float(tc)))
    used = sorted({r[0] for r in req + other} | {r[1] for r in req + other} | {depot, *dumps})
    if all(1 <= x <= header["NODES"] for x in used):
        labels = tuple(range(1, header["NODES"] + 1))
    else:
        labels = tuple(used)
    at = {x: i for i, x in enumerate(labels)}
    req = [(at[u], at[v], *rest) for u, v, *rest in req]
    other = [(at[u], at[v], *rest) for u, v, *rest in other]
    return Instance(Path(path).name, header, req, other, at[depot], tuple(at[x] for x in dumps), labels, len(labels))


def to_crewcut(inst: Instance) -> tuple:
    """(network, profile with the capacity and the dump sites, depot node)."""
    rows = [(u, v, dr, SERVICE_ONE_PASS) for u, v, dr, *_ in inst.required] + \
           [(u, v, dr, SERVICE_NONE) for u, v, dr, _ in inst.other]
    lengths = [max(t, 1e-6) for *_, t, _d in inst.required] + [max(t, 1e-6) for *_, t in inst.other]
    n = inst.n_nodes
    net = make_network(n, [r[0] for r in rows], [r[1] for r in rows], lengths,
                       oneway=[r[2] for r in rows], service=[r[3] for r in rows])
    classes = [f"r{i}" for i in range(len(inst.required))] + ["default"] * len(inst.other)
    net = replace(net, seg_class=classes)
    svc = {"default": 0.06}
    rate = {"default": 0.0}
    for i, (_u, _v, _d, s, t, d) in enumerate(inst.required):
        t = max(t, 1e-6)
        svc[f"r{i}"] = 0.06 * t / s if s > 0 else 1e9
        rate[f"r{i}"] = d / (t / 1000.0)
    cap = Capacity("body", float(inst.header["CAPACITY"]), "", tuple(sorted(rate.items())), True)
    # no opening hours in the instances: open far beyond any clock the route reaches
    facs = tuple(Facility(f"if{j + 1}", "dump_site", ("body",), float(inst.header["DUMPING_COST"]), 0, 10 ** 12,
                          None, int(j)) for j in inst.dumps)
    prof = Profile(name=inst.name, service_speed_kmh=svc, deadhead_speed_kmh={"default": 0.06},
                   turn_penalty_s={"u_turn": 0.0, "across_traffic": 0.0, "with_traffic": 0.0, "straight": 0.0},
                   capacities=(cap,), facilities=facs)
    return net, prof, inst.depot


def total_demand(inst: Instance) -> float:
    return float(np.sum([r[5] for r in inst.required]))
