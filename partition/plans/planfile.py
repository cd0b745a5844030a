"""The plan file: one self-contained JSON document per plan (README, "The plan file").

Format name ``crewcut-plan``, version 1. Crews hold routes, routes hold
traversals; each crew has one route today, but a crew may later hold several
(one per day of a cycle, or trips split by dump visits). Everything a report,
``verify`` or ``rebalance`` needs is in the file: nodes, segments with their
geometry, the settings, the crews, their territories and routes.

In memory a plan is a :class:`crewcut.plans.model.Plan`; JSON appears only here,
at the file's edge (the document itself: :mod:`crewcut.plans.fileformat`).
Writing is atomic (:func:`crewcut.files.atomic_write`), numbers
are rounded to fixed decimals, and keys keep a fixed order, so the same plan
gives the same bytes, and reading a file and writing it again gives its bytes.
"""
from __future__ import annotations

import hashlib
import json
import re
from pathlib import Path
from typing import Sequence

from crewcut.solve.costs import Passes, deadhead_minutes, required_passes, service_minutes
from crewcut.solve.errors import InputError
from crewcut.solve.network.model import SERVICE_LABELS, Network
from crewcut.solve.network.scope import LeftOutStreet
from crewcut.solve.profile import Profile

from crewcut.files import atomic_write
from crewcut.plans.fileformat import (FIX, crew_section, dumps, history_dict, left_out_dict, options_dict,
                                      plan_from_dict, plan_to_dict, posted_dict, rnd, summary_dict)
from crewcut.plans.model import (FORMAT, VERSION, CrewPlan, DeferredSegment, FleetSummary, History, Plan,
                                 PostedRecord, RouteSummary, RunOptions)

__all__ = ["FIX", "network_section", "plan_digest", "plan_from_dict",
           "build_plan", "plan_to_dict", "plan_to_json", "read_plan", "write_plan"]


def network_section(net: Network, profile: Profile, source: str = "") -> dict:
    """The network part of a plan document: nodes and segments with passes and times."""
    passes: Passes = required_passes(net, profile)
    smin = service_minutes(net, profile)
    dmin = deadhead_minutes(net, profile)
    nodes = [{"id": i, "lon": rnd(net.node_lon[i], 7) if net.has_geometry else None,
              "lat": rnd(net.node_lat[i], 7) if net.has_geometry else None,
              "label": net.node_label[i]} for i in range(net.n_nodes)]
    segs = []
    for s in range(net.n_segments):
        coords = net.seg_coords[s]
        segs.append({
            "id": s,
            "source_id": net.seg_source[s],
            "from": int(net.seg_u[s]),
            "to": int(net.seg_v[s]),
            "length_m": rnd(net.seg_length[s], 3),
            "oneway": bool(net.seg_oneway[s]),
            "closed": bool(net.seg_closed[s]),
            "name": net.seg_name[s],
            "class": net.seg_class[s],
            "service": SERVICE_LABELS[int(net.seg_service[s])],
            "passes": {"forward": int(passes.forward[s]), "backward": int(passes.backward[s]),
                       "either": int(passes.either[s])},
            "service_min": rnd(smin[s], 5),
            "deadhead_min": rnd(dmin[s], 5),
            "coords": None if coords is None else [[rnd(x, 7), rnd(y, 7)] for x, y in coords.tolist()],
        })
        posted = PostedRecord.of(net.posting(s))
        if posted is not None:  # written only when set, so plans without postings keep their bytes
            segs[-1]["posted"] = posted_dict(posted)
    return {"fingerprint": net.fingerprint, "source": source, "has_geometry": net.has_geometry,
            "origin": list(net.origin), "nodes": nodes, "segments": segs}


def build_plan(net: Network, profile: Profile, crews: list[CrewPlan], *, source: str = "",
            options: RunOptions | None = None, summary: FleetSummary | RouteSummary | None = None,
            history: History | None = None, deferred: list[DeferredSegment] | None = None,
            left_out: Sequence[LeftOutStreet] | None = None) -> Plan:
    """Assemble a :class:`Plan` from a network, a profile and the crews' plans, quantised as the file records it.

    Parameters
    ----------
    net, profile: the network the plan is made on and the work profile (recorded in the settings).
    crews: each crew with its territory and routes (the engine's routes, unrounded).
    source: the network file, recorded in the plan.
    options: the run options recorded beside the profile (:class:`crewcut.plans.model.RunOptions`).
    summary, history, deferred: the plan's summary (unrounded), history (default: a fresh plan) and defer list.
    left_out: the streets that need service but no crew serves (:mod:`crewcut.solve.network.scope`).

    Returns the plan with every number rounded as the file rounds it, so that it
    equals the plan read back from its file.
    """
    doc = {
        "format": FORMAT,
        "version": VERSION,
        "settings": {"profile": profile.to_dict(), **options_dict(options or RunOptions())},
        "network": network_section(net, profile, source),
        "crews": [crew_section(c) for c in crews],
        "summary": summary_dict(summary),
        "history": history_dict(history or History()),
    }
    if deferred is not None:
        doc["deferred"] = [{"segment": d.segment, "source_id": d.source_id, "name": d.name, "class": d.road_class,
                            "priority": d.priority, "crew": d.crew, "work_min": d.work_min, "length_m": d.length_m}
                           for d in deferred]
    if left_out is not None:
        doc["left_out"] = [left_out_dict(x) for x in left_out]
    return plan_from_dict(json.loads(json.dumps(doc)), trusted=True)


def plan_to_json(plan: Plan) -> str:
    """The plan file's text (UTF-8 JSON, fixed key order and rounding, one trailing newline)."""
    return dumps(plan_to_dict(plan))


def plan_digest(plan: Plan) -> str:
    """SHA-256 of the plan file's bytes, as :func:`write_plan` writes them."""
    return hashlib.sha256(plan_to_json(plan).encode("utf-8")).hexdigest()


def write_plan(plan: Plan, path: str | Path) -> Path:
    """Write ``plan`` atomically to ``path``; returns the path."""
    return atomic_write(path, plan_to_json(plan))


def read_plan(path: str | Path) -> Plan:
    """Read, check and recognise a plan file; a clear :class:`InputError` naming the record when it is not one."""
    path = Path(path)
    if not path.is_file():
        raise InputError(f"plan file '{path}' not found", "give the plan.json written by 'crewcut plan'")
    try:
        text = path.read_text(encoding="utf-8")
        doc = json.loads(text)
    except (json.JSONDecodeError, UnicodeDecodeError) as exc:
        raise InputError(f"{path}: not a plan file (not valid JSON: {exc})") from None
    except RecursionError:
        raise InputError(f"{path}: not a plan file (JSON nested too deeply)") from None
    where = unpaired_surrogate(doc) if _SURROGATE_ESCAPE.search(text) else None
    if where:  # JSON lets a \uD800-\uDFFF escape stand alone; no UTF-8 text (and so no output) can hold it
        raise InputError(f"{path}: damaged plan file: {where} holds an unpaired surrogate escape "
                         "(\\uD800-\\uDFFF without its pair), which is not a character", FIX)
    return plan_from_dict(doc, str(path))


_SURROGATE_ESCAPE = re.compile(r"\\u[dD][89a-fA-F]")


def unpaired_surrogate(doc, where: str = "the document") -> str | None:
    """Where in a JSON document (``network.segments[3].name``) a string holds an unpaired surrogate; None if nowhere."""
    if isinstance(doc, str):
        return where if any("\ud800" <= ch <= "\udfff" for ch in doc) else None
    if isinstance(doc, dict):
        for k, v in doc.items():
            shown = str(k).encode("utf-8", "backslashreplace").decode("utf-8")
            w = shown if where == "the document" else f"{where}.{shown}"
            found = unpaired_surrogate(k, f"{w} (a key)") or unpaired_surrogate(v, w)
            if found:
                return found
    elif isinstance(doc, list):
        for i, v in enumerate(doc):
            found = unpaired_surrogate(v, f"{where}[{i}]")
            if found:
                return found
    return None
