"""OpenStreetMap reader (``.osm`` XML and ``.osm.pbf``) through pyosmium.

Which ways are kept (the rules are applied in :mod:`crewcut.solve.readers.osmtags`
for the profile's ``[vehicle]``):

* ``highway`` is one of the profile's ``osm.highways`` values (a walking profile
  keeps footways only if its list has ``footway``);
* not ``area=yes`` (squares and plazas drawn as polygons are not streets);
* access for the vehicle: the most specific key present decides, among ``hgv``
  (only for a heavy vehicle, ``vehicle.heavy = true``), ``motor_vehicle``,
  ``vehicle``, ``access`` for a motor vehicle, and ``foot``, ``access`` for a
  walker (``vehicle.kind = "foot"``). ``no``, ``private``, ``agricultural``,
  ``forestry``, ``emergency`` and ``military`` leave the way out. Every other
  value keeps it: ``yes``, ``permissive``, ``designated``, and also
  ``destination``, ``delivery`` and ``customers``, because a sweeper, plough or
  refuse truck serves the street itself; an unknown value keeps the way too.
  A crew does not serve private roads unless the owner says so; add such ways to
  a GeoJSON file if it does;
* not ``service=parking_aisle``, ``driveway``, ``drive-through`` or
  ``emergency_access`` (car parks, single properties), unless the profile's
  ``osm.keep_service_kinds`` lists the value;
* for a motor vehicle, not ``oneway=reversible`` or ``alternating``: such a way
  changes direction with the time of day and can be planned as neither one-way
  nor two-way (a walker uses it both ways);
* not below the vehicle's size: a ``maxweight`` (tonnes), ``maxheight``,
  ``maxwidth`` or ``maxlength`` (metres) lower than ``vehicle.weight_t``,
  ``height_m``, ``width_m`` or ``length_m``. A value is a plain number or has a
  unit (``3.5 t``, ``7500 kg``, ``st``, ``lbs``; ``3 m``, ``cm``, ``11 ft``,
  ``7'6"``); ``none``, ``default``, ``unsigned`` mean no limit. A value that
  cannot be read (``3,5``, ``below_default``) keeps the way with a warning: it is
  not guessed. When the size figures rule out every street, the file is refused.

Every way left out is reported: one warning per reason with the count and the
first way ids (``312 way(s) left out: access=private (first: way/123, ...)``).
This filtering is an aid; local signs, traffic law and licensed practice decide.

Direction: ``oneway=yes``/``1``/``true`` is one-way in the drawn direction,
``oneway=-1`` one-way against it (the line is reversed), ``no``/``false``/``0``
two-way; ``junction=roundabout``/``circular`` and ``highway=motorway``/
``motorway_link`` imply one-way unless ``oneway=no`` says otherwise
(OpenStreetMap's own convention). ``oneway:conditional`` (one-way at some hours)
is not read: the way counts by its plain ``oneway`` tag; ``oneway:bicycle`` speaks
for cyclists only and is not read.

Ways are split into segments at their ends and at every node used twice or more
by the kept ways (intersections; a node repeated inside one way too). A closed
way with no other junction is split at its middle vertex so that no segment is
a self-loop. Nodes missing from the file (an extract cut at its border) break a
way; the part beyond is left out with a warning. Every segment keeps
``way/ID`` as its source id and ``node/ID`` labels for its end nodes.

Turn restrictions: every ``type=restriction`` relation is read (a first pass over
the file's relations, then the ways they name are kept with their node lists) and
becomes forbidden turns of the network (``Network.turn_bans``) or a note saying
why it was not applied (``Network.restrictions``); the rules are in
:mod:`crewcut.solve.readers.osmturns`. A relation with broken members stops the
read with its id.

OpenStreetMap topology is explicit (shared node ids), so no snapping by distance
and no split-at-touch is applied; only nodes at identical coordinates merge.
Road class is the highway value; service is the profile's default for it.

Posted sweeping times: ``parking:both|left|right:restriction:conditional``
(:func:`crewcut.solve.readers.osmtags.way_postings`); a way turned round for
``oneway=-1`` has its left and right swapped. Curbs posted for different times
become segments ``way/ID:left`` and ``way/ID:right`` (:mod:`crewcut.solve.network.curbs`).
"""
from __future__ import annotations

import dataclasses
from pathlib import Path

import numpy as np

from crewcut.solve.errors import InputError
from crewcut.solve.network.model import Finding, Network, RawLine
from crewcut.solve.profile import Profile
from crewcut.solve.calendar.postings import swap_sides
from crewcut.solve.readers.osmtags import way_postings  # posted sweeping times (own line: eases merges)
from crewcut.solve.readers.osmtags import (WayRules, rules_for, size_verdict,
                                           way_direction, way_refusal)
from crewcut.solve.readers.osmturns import (WayNodes, apply_restrictions, read_restriction_relations,
                                            wanted_ways)
from crewcut.solve.vehicle import SIZE_TAGS, Vehicle
from crewcut.solve.network.repair import build_network

LEFT_OUT_SHOWN = 5  # way ids named per reason in a finding


def _collect(path: Path, rules: WayRules, wanted: set[int],
             named: dict[int, WayNodes]) -> tuple[list[tuple], dict, dict, dict]:
    """Kept ways; way ids left out by tag, left out by size, and kept with an unreadable limit (by reason).

    The ways in ``wanted`` (named by turn restrictions) are put in ``named`` with their
    node ids and why they were left out, if they were.
    """
    import osmium

    ways = []
    refused: dict[str, list[int]] = {}
    too_big: dict[str, list[int]] = {}
    unreadable: dict[str, list[int]] = {}
    try:
        proc = osmium.FileProcessor(str(path), osmium.osm.NODE | osmium.osm.WAY).with_locations()
        for obj in proc:
            if not obj.is_way():
                continue
            tags = obj.tags
            if wanted and obj.id in wanted:
                named[obj.id] = WayNodes(tuple(nd.ref for nd in obj.nodes), _left_out_why(tags, rules))
            if tags.get("highway") not in rules.highways:
                continue
            reason = way_refusal(tags, rules)
            if reason:
                refused.setdefault(reason, []).append(obj.id)
                continue
            limit, bad = size_verdict(tags, rules.vehicle)
            for b in bad:
                unreadable.setdefault(b.split("=", 1)[0], []).append(obj.id)
            if limit:
                too_big.setdefault(limit.split("=", 1)[0], []).append(obj.id)
                continue
            refs, lon, lat = [], [], []
            for nd in obj.nodes:
                refs.append(nd.ref)
                loc = nd.location
                if loc.valid():
                    lon.append(loc.lon)
                    lat.append(loc.lat)
                else:
                    lon.append(np.nan)
                    lat.append(np.nan)
            direction = way_direction(tags)
            if direction is None:  # only a walker gets here (way_refusal drops it for a motor vehicle)
                direction = 0  # a reversible way is walked both ways
            ways.append((obj.id, np.asarray(refs, np.int64), np.column_stack([lon, lat]) if refs else None,
                         tags.get("highway"), tags.get("name", ""), direction, way_postings(tags, obj.id)))
    except (RuntimeError, ValueError, OverflowError, osmium.InvalidLocationError) as exc:  # pyosmium's errors
        raise InputError(f"{path}: not a readable OpenStreetMap file ({exc})",
                         "check that the file is complete and really .osm XML or .osm.pbf; download it again") from None
    return ways, refused, too_big, unreadable


def _left_out_why(tags, rules: WayRules) -> str | None:
    """Why a way is not read as a street for the vehicle, or None when it is."""
    hw = tags.get("highway")
    if hw is None:
        return "not a highway"
    if hw not in rules.highways:
        return f"highway={hw} is not in the profile's osm.highways"
    return way_refusal(tags, rules) or size_verdict(tags, rules.vehicle)[0]


def _first(ids: list[int]) -> str:
    more = ", ..." if len(ids) > LEFT_OUT_SHOWN else ""
    return ", ".join(f"way/{w}" for w in ids[:LEFT_OUT_SHOWN]) + more


def left_out_findings(refused: dict, too_big: dict, unreadable: dict, vehicle: Vehicle) -> list[Finding]:
    """One finding per reason, with the count and the first way ids."""
    out = []
    for reason, ids in sorted(refused.items()):
        hint = ("reversible and alternating ways change direction with the time of day; add the street "
                "to a GeoJSON file with the direction your crew drives it" if reason.startswith("oneway=")
                else "add the street to a GeoJSON file if your crew does serve it"
                + ("" if not reason.startswith("service=") else
                   f", or list {reason.split('=', 1)[1]!r} in osm.keep_service_kinds"))
        out.append(Finding("warning", f"way/{ids[0]}", f"{len(ids)} way(s) left out: {reason} (first: {_first(ids)})",
                           hint))
    by_tag = {SIZE_TAGS[k]: (k, f) for k, f in vehicle.sizes().items()}
    for key, ids in sorted(too_big.items()):
        setting, figure = by_tag[key]
        out.append(Finding("warning", f"way/{ids[0]}",
                           f"{len(ids)} way(s) left out: {key} below the vehicle's {setting} = {figure:g} "
                           f"(first: {_first(ids)})",
                           f"check vehicle.{setting} in the profile; local signs decide"))
    for key, ids in sorted(unreadable.items()):
        out.append(Finding("warning", f"way/{ids[0]}",
                           f"{len(ids)} way(s) kept although their {key} value could not be read (first: {_first(ids)})",
                           f"check the signs on these streets against vehicle.{next(k for k, t in SIZE_TAGS.items() if t == key)}"))
    return out


def read_osm(path: str | Path, profile: Profile) -> Network:
    """Read drivable streets from an OpenStreetMap file into a :class:`~crewcut.solve.network.model.Network`."""
    path = Path(path)
    rules = rules_for(profile)
    relations = _restrictions(path)
    named: dict[int, WayNodes] = {}
    ways, refused, too_big, unreadable = _collect(path, rules, wanted_ways(relations), named)
    if too_big and not ways:
        sizes = ", ".join(f"vehicle.{k} = {v:g}" for k, v in profile.vehicle.sizes().items()
                          if SIZE_TAGS[k] in too_big)
        raise InputError(f"{profile.source}: the vehicle's {sizes} rules out every street in {path}",
                         "check the vehicle's figures in the profile (tonnes and metres), or use another extract")
    findings = left_out_findings(refused, too_big, unreadable, profile.vehicle)
    # drop consecutive repeats and break ways at nodes without a location
    runs = []
    cut_ways = []
    for wid, refs, ll, hw, name, direction, posted in ways:
        if refs.size < 2:
            continue
        keep = np.ones(refs.size, bool)
        keep[1:] = refs[1:] != refs[:-1]
        refs, ll = refs[keep], ll[keep]
        valid = np.isfinite(ll[:, 0])
        if not valid.all():
            cut_ways.append(wid)
        breaks = np.flatnonzero(np.diff(valid.astype(np.int8)) != 0) + 1
        for a, b in zip(np.r_[0, breaks], np.r_[breaks, refs.size]):
            if valid[a] and b - a >= 2:
                runs.append((wid, refs[a:b], ll[a:b], hw, name, direction, posted))
    if cut_ways:
        findings.append(Finding(
            "warning", f"way/{cut_ways[0]}",
            f"{len(cut_ways)} way(s) use nodes that are not in the file (an extract cut at its border); "
            f"only their parts inside were read (first: {', '.join(f'way/{w}' for w in cut_ways[:5])})",
            "use an extract that covers the whole working area with a margin"))
    if not runs:
        return build_network([], profile, findings=findings, source=str(path))
    net = build_network(_lines(runs), dataclasses.replace(profile, snap_tolerance_m=0.0, split_at_touch=False),
                        findings=findings, source=str(path))
    if not relations:
        return net
    try:
        return apply_restrictions(net, relations, named, profile.vehicle)
    except InputError as exc:
        raise InputError(f"{path}: {exc.message}", exc.hint) from None


def _restrictions(path: Path) -> list:
    import osmium

    try:
        return read_restriction_relations(path)
    except (RuntimeError, ValueError, OverflowError, osmium.InvalidLocationError) as exc:  # pyosmium's errors
        raise InputError(f"{path}: not a readable OpenStreetMap file ({exc})",
                         "check that the file is complete and really .osm XML or .osm.pbf; download it again") from None


def _lines(runs: list[tuple]) -> list[RawLine]:
    """The ways' runs split into street lines at junctions (module notes)."""
    all_refs = np.concatenate([r[1] for r in runs])
    uniq, counts = np.unique(all_refs, return_counts=True)
    junction = set(uniq[counts >= 2].tolist())
    lines: list[RawLine] = []
    for wid, refs, ll, hw, name, direction, posted in runs:
        if direction == -1:
            refs, ll = refs[::-1], ll[::-1]
            posted = swap_sides(posted)
        k = refs.size
        cuts = [0] + [i for i in range(1, k - 1) if int(refs[i]) in junction] + [k - 1]
        for a, b in zip(cuts[:-1], cuts[1:]):
            pieces = [(a, b)]
            if refs[a] == refs[b]:  # a loop with no junction inside: halve it
                if b - a < 2:
                    continue
                mid = (a + b) // 2
                pieces = [(a, mid), (mid, b)]
            for s, e in pieces:
                lines.append(RawLine(
                    source_id=f"way/{wid}", coords=ll[s:e + 1].copy(), name=name, road_class=hw,
                    oneway=1 if direction else 0, posted=posted, from_label=f"node/{int(refs[s])}",
                    to_label=f"node/{int(refs[e])}"))
    return lines
