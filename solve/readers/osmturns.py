"""OpenStreetMap turn restrictions (``type=restriction`` relations) as forbidden turns of a network.

Problem
-------
A restriction relation forbids a manoeuvre: arriving along its ``from`` way at
its ``via`` node and leaving along its ``to`` way (``no_left_turn``,
``no_right_turn``, ``no_straight_on``, ``no_u_turn``, ``no_entry``,
``no_exit``), or allows only that one (``only_left_turn``, ``only_right_turn``,
``only_straight_on``, ``only_u_turn``: every other departure from the via node
after arriving along ``from`` is forbidden). The route engine works on segments
(ways split at junctions), so the relation has to become rows of
:attr:`crewcut.solve.network.model.Network.turn_bans`.

Rules (the OpenStreetMap wiki's Relation:restriction page, read from memory)
----------------------------------------------------------------------------
* The value for the vehicle is the most specific of ``restriction:<key>`` for
  the vehicle's access keys (:func:`crewcut.solve.readers.osmtags.access_keys`:
  ``hgv`` for a heavy vehicle, ``motor_vehicle``, ``vehicle``), then plain
  ``restriction`` (which binds vehicles, not walkers: a walking profile is bound
  only by ``restriction:foot``). ``except=`` lists exempted classes separated by
  ``;``; when it names one of the vehicle's keys the relation does not apply.
  ``restriction:conditional`` (some hours only) is not planned with: reported.
* Members: exactly one ``from`` way and one ``to`` way (``no_entry`` may have
  several ``from``, ``no_exit`` several ``to``), and one ``via`` node. Both ways
  must start or end at the via node (the wiki: "otherwise split it").
* A ``from`` way the vehicle does not use (left out by the way rules) makes the
  relation irrelevant; so does a ``to`` way it does not use for a ``no_*``
  relation. For an ``only_*`` relation whose ``to`` way the vehicle does not
  use, the rule is taken literally: every departure after arriving along
  ``from`` is forbidden (the planner sees that approach left out by the scope).
* A via given as one or more ways is not applied (reported as such): the
  manoeuvre then spans several junctions, and banning single turns for it would
  forbid more than the sign does.

Outcomes
--------
Broken members (a missing ``from``, ``to`` or ``via``, a member of the wrong
type, more ways than the value allows, a way that does not start or end at the
via node) raise :class:`InputError` naming ``relation/ID`` and how to fix it: a
broken relation cannot be read without guessing. Every other relation gets a
:class:`~crewcut.solve.network.model.RestrictionNote`: applied with its number
of banned turns, or not applied with a reason from :data:`NOT_APPLIED`.

Method
------
From and to ways map to the segments (``seg_source == "way/ID"``) that end at
the via node (``node_label == "node/ID"``); every legal arrival along a from
segment and every legal departure along a to segment (``no_*``) or along any
other segment (``only_*``) gives one row. Rows are unique; a turn forbidden by
two relations names both.
"""
from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np

from crewcut.solve.errors import InputError
from crewcut.solve.network.model import Network, RestrictionNote
from crewcut.solve.readers.osmtags import access_keys
from crewcut.solve.vehicle import Vehicle

NO_KINDS = ("no_left_turn", "no_right_turn", "no_straight_on", "no_u_turn", "no_entry", "no_exit")
ONLY_KINDS = ("only_left_turn", "only_right_turn", "only_straight_on", "only_u_turn")
NOT_APPLIED = {
    "not_for_vehicle": "does not bind this vehicle (except= or a restriction for another class)",
    "conditional": "holds at some times only (restriction:conditional); not planned with",
    "unknown_kind": "its restriction value is not one this reader knows",
    "via_way": "its via is a way; restrictions over several junctions are not read",
    "way_missing": "a member way is not in the file (an extract cut at its border)",
    "way_not_read": "a member way is not a street read for this vehicle",
    "via_outside": "its via node is not among the streets read (outside the extract or on a street left out)",
    "way_cut": "a member way has no part at the via node among the streets read (cut at the extract's border)",
}
_TYPES = {"n": "node", "w": "way", "r": "relation"}
_HINT = ("fix the relation in the map data (from and to ways that start or end at one via node), "
         "or remove the relation from the extract")


@dataclass(frozen=True)
class RawRestriction:
    """A ``type=restriction`` relation as the file has it: id, tags, members (type, role, ref)."""

    id: int
    tags: dict
    members: tuple[tuple[str, str, int], ...]  # type "n" | "w" | "r", role, ref

    @property
    def key(self) -> str:
        return f"relation/{self.id}"

    def ways(self, role: str) -> list[int]:
        return [ref for t, r, ref in self.members if r == role and t == "w"]


@dataclass(frozen=True)
class WayNodes:
    """A way a restriction names: its node ids and why it was left out (None when read)."""

    refs: tuple[int, ...]
    left_out: str | None


def read_restriction_relations(path) -> list[RawRestriction]:
    """Every ``type=restriction`` relation of an OpenStreetMap file, in file order."""
    import osmium

    out = []
    for obj in osmium.FileProcessor(str(path), osmium.osm.RELATION):
        if obj.tags.get("type") != "restriction":
            continue
        out.append(RawRestriction(int(obj.id), {t.k: t.v for t in obj.tags},
                                  tuple((m.type, m.role, int(m.ref)) for m in obj.members)))
    return out


def wanted_ways(relations: list[RawRestriction]) -> set[int]:
    """The way ids the relations name (any role)."""
    return {ref for r in relations for t, _, ref in r.members if t == "w"}


def restriction_kind(tags: dict, vehicle: Vehicle) -> tuple[str, str]:
    """(the restriction value binding the vehicle, "") or ("", a key of :data:`NOT_APPLIED`)."""
    keys = [k for k in access_keys(vehicle) if k != "access"]
    exempt = {v.strip() for v in tags.get("except", "").split(";") if v.strip()}
    if exempt & set(keys):
        return "", "not_for_vehicle"
    for k in keys:
        if f"restriction:{k}" in tags:
            return tags[f"restriction:{k}"], ""
    if vehicle.kind == "motor" and "restriction" in tags:
        return tags["restriction"], ""
    if "restriction:conditional" in tags:
        return "", "conditional"
    return "", "not_for_vehicle"


def _broken(rel: RawRestriction, what: str) -> InputError:
    return InputError(f"turn restriction {rel.key} ({rel.tags.get('restriction', 'no restriction value')}): {what}",
                      _HINT)


def _check_members(rel: RawRestriction, kind: str) -> None:
    """Raise for members no reading can make sense of."""
    roles = {"from": [], "to": [], "via": []}
    for t, role, ref in rel.members:
        if role in roles:
            roles[role].append((t, ref))
    for role in ("from", "to", "via"):
        if not roles[role]:
            raise _broken(rel, f"has no '{role}' member")
    for role in ("from", "to"):
        odd = [f"{_TYPES.get(t, t)}/{ref}" for t, ref in roles[role] if t != "w"]
        if odd:
            raise _broken(rel, f"its '{role}' member {odd[0]} is not a way")
    if len(roles["from"]) > 1 and kind != "no_entry":
        raise _broken(rel, f"has {len(roles['from'])} 'from' ways; only no_entry may have more than one")
    if len(roles["to"]) > 1 and kind != "no_exit":
        raise _broken(rel, f"has {len(roles['to'])} 'to' ways; only no_exit may have more than one")
    vias = roles["via"]
    if any(t == "r" for t, _ in vias) or len({t for t, _ in vias}) > 1:
        raise _broken(rel, "its 'via' members mix nodes and ways, or name a relation")
    if vias[0][0] == "n" and len(vias) > 1:
        raise _broken(rel, f"has {len(vias)} 'via' nodes; a restriction has one")


def _check_ends(rel: RawRestriction, via: int, ways: dict[int, WayNodes]) -> None:
    for role in ("from", "to"):
        for w in rel.ways(role):
            refs = ways[w].refs
            if via not in refs:
                raise _broken(rel, f"its '{role}' way/{w} does not pass node/{via}, the via node")
            if refs[0] != via and refs[-1] != via:
                raise _broken(rel, f"its '{role}' way/{w} passes the via node/{via} in its middle; a from or to "
                                   "way must start or end there (split the way at the via node)")


class _Ends:
    """Segments of each source way that end at each node, and the legal arrivals and departures there."""

    def __init__(self, net: Network, nodes: set[int]) -> None:
        self.net = net
        at = np.isin(net.seg_u, list(nodes)) | np.isin(net.seg_v, list(nodes))
        self.by_node: dict[int, list[int]] = {}
        for s in np.flatnonzero(at).tolist():
            for x in {int(net.seg_u[s]), int(net.seg_v[s])} & nodes:
                self.by_node.setdefault(x, []).append(s)

    def arrivals(self, node: int, source: str | None) -> list[tuple[int, int]]:
        net = self.net
        out = []
        for s in self.by_node.get(node, []):
            if source is not None and net.seg_source[s] != source:
                continue
            if int(net.seg_v[s]) == node:
                out.append((s, 1))
            if int(net.seg_u[s]) == node and not net.seg_oneway[s]:
                out.append((s, 0))
        return out

    def departures(self, node: int, source: str | None) -> list[tuple[int, int]]:
        net = self.net
        out = []
        for s in self.by_node.get(node, []):
            if source is not None and net.seg_source[s] != source:
                continue
            if int(net.seg_u[s]) == node:
                out.append((s, 1))
            if int(net.seg_v[s]) == node and not net.seg_oneway[s]:
                out.append((s, 0))
        return out


def apply_restrictions(net: Network, relations: list[RawRestriction], ways: dict[int, WayNodes],
                       vehicle: Vehicle) -> Network:
    """``net`` with the relations' forbidden turns and a note per relation (module notes).

    ``ways``: node ids of every way the relations name that is in the file, and why
    it was left out (None when it was read). Raises :class:`InputError` for broken members.
    """
    notes: list[RestrictionNote] = []
    plans = []  # (relation, kind, via node id) still to map onto segments
    for rel in relations:
        kind, why = restriction_kind(rel.tags, vehicle)
        if why:
            notes.append(RestrictionNote(rel.key, kind, False, why, NOT_APPLIED[why]))
            continue
        if kind not in NO_KINDS and kind not in ONLY_KINDS:
            notes.append(RestrictionNote(rel.key, kind, False, "unknown_kind", f"restriction={kind!r} is not read"))
            continue
        _check_members(rel, kind)
        via = [(t, ref) for t, r, ref in rel.members if r == "via"]
        if via[0][0] == "w":
            notes.append(RestrictionNote(rel.key, kind, False, "via_way", NOT_APPLIED["via_way"]))
            continue
        members = rel.ways("from") + rel.ways("to")
        missing = [w for w in members if w not in ways]
        if missing:
            notes.append(RestrictionNote(rel.key, kind, False, "way_missing",
                                         f"way/{missing[0]} is not in the file"))
            continue
        _check_ends(rel, via[0][1], ways)
        shut = [(w, ways[w].left_out) for w in rel.ways("from") if ways[w].left_out]
        if kind in NO_KINDS:  # a turn into a way the vehicle does not use is never made anyway
            shut += [(w, ways[w].left_out) for w in rel.ways("to") if ways[w].left_out]
        if shut:
            w, reason = shut[0]
            notes.append(RestrictionNote(rel.key, kind, False, "way_not_read", f"way/{w} was left out ({reason})"))
            continue
        plans.append((rel, kind, via[0][1]))
    if not plans:
        return dataclasses.replace(net, restrictions=tuple(notes)) if notes else net
    index = {lab: i for i, lab in enumerate(net.node_label) if lab}
    ends = _Ends(net, {index[f"node/{v}"] for _, _, v in plans if f"node/{v}" in index})
    rows: dict[tuple[int, int, int, int], list[str]] = {}
    for rel, kind, via in plans:
        x = index.get(f"node/{via}")
        if x is None or not ends.by_node.get(x):
            notes.append(RestrictionNote(rel.key, kind, False, "via_outside", f"node/{via} is not on a street read"))
            continue
        cut = [w for w in rel.ways("from") + rel.ways("to")
               if not ways[w].left_out and not any(net.seg_source[s] == f"way/{w}" for s in ends.by_node[x])]
        if cut:
            notes.append(RestrictionNote(rel.key, kind, False, "way_cut",
                                         f"way/{cut[0]} has no part at node/{via} among the streets read"))
            continue
        arrive = [a for w in rel.ways("from") for a in ends.arrivals(x, f"way/{w}")]
        named = [d for w in rel.ways("to") for d in ends.departures(x, f"way/{w}")]
        if kind in NO_KINDS:
            depart = named
        else:  # only_*: every way out but the named one
            depart = [d for d in ends.departures(x, None) if d not in set(named)]
        made = 0
        for a in arrive:
            for d in depart:
                row = (a[0], a[1], d[0], d[1])
                if rel.key not in rows.setdefault(row, []):
                    rows[row].append(rel.key)
                    made += 1
        closed_to = [w for w in rel.ways("to") if ways[w].left_out]
        if closed_to:  # only_*: the one allowed way is not the vehicle's, so no departure is allowed
            detail = (f"its to way/{closed_to[0]} is not read for this vehicle ({ways[closed_to[0]].left_out}), "
                      "so no departure is allowed after arriving along from")
        else:
            detail = "" if made else "the turn it forbids cannot be driven here anyway (one-way directions)"
        notes.append(RestrictionNote(rel.key, kind, True, "", detail, made))
    order = sorted(rows)
    bans = np.array(order, np.int64).reshape(-1, 4)
    order_notes = {r.key: i for i, r in enumerate(relations)}
    notes.sort(key=lambda n: order_notes[n.source])
    return dataclasses.replace(net, turn_bans=bans, turn_ban_source=tuple(", ".join(rows[r]) for r in order),
                               restrictions=tuple(notes))


def restriction_counts(notes) -> tuple[int, int, dict[str, int]]:
    """(read, applied, not applied per reason) of a network's restriction notes."""
    by: dict[str, int] = {}
    for n in notes:
        if not n.applied:
            by[n.reason] = by.get(n.reason, 0) + 1
    return len(notes), sum(1 for n in notes if n.applied), dict(sorted(by.items()))
