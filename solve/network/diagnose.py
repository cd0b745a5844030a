"""Is a street network plannable? Summary figures and every problem found.

Problem
    Before planning, a planner needs to know what the network holds (how many
    kilometres, of which classes, how many passes) and whether every street that
    needs service can be reached and left again by a crew.

Method
    Degrees and weakly connected components by ``scipy.sparse.csgraph`` on the
    usable segments. Reachability on the legal driving directions
    (``Network.arcs``): with a depot, a breadth-first search from the depot
    forwards (can be reached) and on the reversed arcs (can return). Without a
    depot, each weakly connected piece is judged against its largest strongly
    connected part (by length): a street outside it is a one-way trap (it can
    never be left, or never be reached, on a round trip). A street lies on a
    closed walk through a node set S, S strongly connected, exactly when its
    tail is reachable from S and S is reachable from its head.

Turn restrictions
    The reachability counts above are over driving directions only. The list of
    streets left out (:mod:`crewcut.solve.network.scope`) also keeps the network's
    forbidden turns, so with OpenStreetMap restrictions it can name a few streets
    more; :attr:`CheckReport.restrictions` lists every restriction read and what
    became of it.

Severity
    A street that needs service and cannot be reached or left is an error (the
    network is not plannable); the same for a street that needs no service is a
    warning (routes simply never use it); under the policy ``leave_out``
    (:mod:`crewcut.solve.network.scope`) the first is a warning too, saying the
    street is left out. A closed street that would need service is a warning (it
    is left out). Repairs made while reading are warnings. The report lists the
    streets left out (:attr:`CheckReport.left_out`) and tells whether the
    network would be plannable once they are (:attr:`CheckReport.plannable_once_left_out`).
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import breadth_first_order, connected_components

from crewcut.solve.costs import required_passes
from crewcut.solve.network.model import SERVICE_NONE, Finding, Network, RestrictionNote
from crewcut.solve.network.scope import LeftOutStreet, check_unservable, unservable_streets
from crewcut.solve.profile import Profile


@dataclass(frozen=True)
class ClassRow:
    """Figures for one road class."""

    road_class: str
    segments: int
    km: float
    oneway_km: float
    passes: int
    required_km: float  # kilometres to serve: length x passes


@dataclass(frozen=True)
class CheckReport:
    """Plain-data result of :func:`check_network`."""

    nodes: int
    segments: int
    km: float
    oneway_km: float
    passes: int
    required_km: float
    closed_segments: int
    by_class: tuple[ClassRow, ...]
    components: int
    odd_nodes: int
    dead_ends: int
    depot: int | None
    not_reachable: int  # segments that cannot be reached (from the depot / the main part)
    cannot_return: int  # segments that can be reached but never left towards it
    findings: tuple[Finding, ...] = field(default_factory=tuple)
    # streets that need service but no closed route can serve, and closed ones (crewcut.solve.network.scope)
    left_out: tuple[LeftOutStreet, ...] = ()
    unservable: str = "refuse"
    trap_features: frozenset[str] = frozenset()  # features whose only errors are that no closed route serves them
    # the source's turn restrictions and what became of each (Network.restrictions)
    restrictions: tuple[RestrictionNote, ...] = ()

    @property
    def errors(self) -> tuple[Finding, ...]:
        return tuple(f for f in self.findings if f.severity == "error")

    @property
    def warnings(self) -> tuple[Finding, ...]:
        return tuple(f for f in self.findings if f.severity != "error")

    @property
    def plannable(self) -> bool:
        return not self.errors

    @property
    def trapped(self) -> tuple[LeftOutStreet, ...]:
        """The left-out streets that are not closed: what the policy decides about."""
        return tuple(s for s in self.left_out if s.reason != "closed")

    @property
    def plannable_once_left_out(self) -> bool:
        """Not plannable as it is, but it would be with the streets no closed route can serve left out."""
        return bool(self.errors) and bool(self.trapped) and all(f.feature in self.trap_features for f in self.errors)


def _reach(n: int, tail: np.ndarray, head: np.ndarray, sources: np.ndarray) -> np.ndarray:
    """Boolean mask of the nodes reachable from any of ``sources`` along tail -> head."""
    # a virtual node n points at every source: one search covers them all
    t = np.concatenate([tail, np.full(sources.size, n)])
    h = np.concatenate([head, sources])
    g = coo_matrix((np.ones(t.size, np.int8), (t, h)), shape=(n + 1, n + 1)).tocsr()
    order = breadth_first_order(g, n, directed=True, return_predecessors=False)
    mask = np.zeros(n + 1, bool)
    mask[order] = True
    return mask[:n]


def check_network(net: Network, profile: Profile, depot: int | None = None,
                  unservable: str | None = None) -> CheckReport:
    """Summarise ``net`` under ``profile`` and find what keeps it from being planned.

    Parameters
    ----------
    net, profile:
        The network and the work profile (service rules, one-way handling).
    depot:
        A node id, or None to judge each connected piece on its own.
    unservable:
        ``"refuse"``: a street that needs service and lies on no closed route is an
        error; ``"leave_out"``: a warning saying it is left out (default: the profile's).
    """
    unservable = check_unservable(profile.unservable if unservable is None else unservable)
    n, m = net.n_nodes, net.n_segments
    passes = required_passes(net, profile).total
    length = net.seg_length
    open_ = ~net.seg_closed
    oneway = net.seg_oneway & ~profile.ignore_oneway

    rows = []
    classes = np.array(net.seg_class, dtype=object)
    for cls in sorted(set(net.seg_class)):
        sel = classes == cls
        rows.append(ClassRow(cls, int(sel.sum()), float(length[sel].sum()) / 1000,
                             float(length[sel & net.seg_oneway].sum()) / 1000, int(passes[sel].sum()),
                             float((length[sel] * passes[sel]).sum()) / 1000))

    # undirected structure of the usable segments
    usable = np.flatnonzero(open_)
    deg = np.bincount(np.concatenate([net.seg_u[usable], net.seg_v[usable]]), minlength=n)
    und = coo_matrix((np.ones(usable.size), (net.seg_u[usable], net.seg_v[usable])), shape=(n, n))
    _, weak = connected_components(und, directed=False)
    touched = deg > 0
    components = int(np.unique(weak[touched]).size)

    tail, head, seg, _ = net.arcs(profile.ignore_oneway)
    if depot is not None:
        from_src = _reach(n, tail, head, np.array([depot]))
        to_src = _reach(n, head, tail, np.array([depot]))
        place = "the depot"
    else:
        main = _main_parts(n, tail, head, seg, length, weak)
        from_src = _reach(n, tail, head, main)
        to_src = _reach(n, head, tail, main)
        place = None
    reached = np.zeros(m, bool)
    ok = np.zeros(m, bool)
    np.logical_or.at(reached, seg, from_src[tail])
    np.logical_or.at(ok, seg, from_src[tail] & to_src[head])
    bad_reach = open_ & ~reached
    bad_return = open_ & reached & ~ok

    findings: list[Finding] = list(net.findings)
    if not passes[open_].any():
        findings.append(Finding(
            "error", "network", "nothing to serve: every street is closed or needs no service under this profile",
            "open the streets to be served, or check the profile's default_service and the data's service tags"))
    reach = _reach_findings(net, passes, bad_reach, bad_return, place, weak, depot, oneway)
    trap_features = frozenset(f.feature for f in reach if f.severity == "error")
    if unservable == "leave_out":
        reach = [Finding("warning", f.feature, f.message + "; left out of every route", f.hint)
                 if f.severity == "error" else f for f in reach]
    findings += reach
    closed_req = net.seg_closed & (net.seg_service != SERVICE_NONE)
    for src in _sources(net, np.flatnonzero(closed_req)):
        findings.append(Finding("warning", src, "closed street needs service; it is left out of every route",
                                "open it (remove 'closed') once the works are over"))
    if depot is None and components > 1:
        sizes = np.bincount(weak[touched])
        big = int(np.argmax(sizes))
        other = np.flatnonzero(open_ & (weak[net.seg_u] != big))
        srcs = _sources(net, other)
        findings.append(Finding(
            "warning", srcs[0] if srcs else "network",
            f"the streets fall into {components} separate pieces; no crew can drive between them "
            f"({len(srcs)} feature(s) outside the largest piece, first: {', '.join(srcs[:5])})",
            "add the missing connecting streets, or close the gaps (network.snap_tolerance_m)"))
    return CheckReport(
        nodes=n, segments=m, km=float(length.sum()) / 1000,
        oneway_km=float(length[net.seg_oneway].sum()) / 1000, passes=int(passes.sum()),
        required_km=float((length * passes).sum()) / 1000, closed_segments=int(net.seg_closed.sum()),
        by_class=tuple(rows), components=components, odd_nodes=int(((deg % 2) == 1).sum()),
        dead_ends=int((deg == 1).sum()), depot=depot, not_reachable=int(bad_reach.sum()),
        cannot_return=int(bad_return.sum()), findings=tuple(findings),
        left_out=unservable_streets(net, profile, None if depot is None else [depot]), unservable=unservable,
        trap_features=trap_features, restrictions=net.restrictions)


def _main_parts(n, tail, head, seg, length, weak) -> np.ndarray:
    """Nodes of the longest strongly connected part of every weakly connected piece."""
    if tail.size == 0:
        return np.zeros(0, np.int64)
    g = coo_matrix((np.ones(tail.size), (tail, head)), shape=(n, n))
    _, strong = connected_components(g, directed=True, connection="strong")
    inside = strong[tail] == strong[head]
    size = np.bincount(strong[tail[inside]], weights=length[seg[inside]], minlength=strong.max() + 1)
    # best strong part per weak piece: sort by (weak piece, -size, label) and take the first of each
    parts = np.arange(size.size)
    piece_of_part = np.zeros(size.size, np.int64)
    piece_of_part[strong] = weak
    has_arc = np.zeros(size.size, bool)
    has_arc[strong[tail]] = True
    parts = parts[has_arc]
    order = np.lexsort((parts, -size[parts], piece_of_part[parts]))
    ranked = parts[order]
    first = np.ones(ranked.size, bool)
    first[1:] = piece_of_part[ranked[1:]] != piece_of_part[ranked[:-1]]
    chosen = np.zeros(size.size, bool)
    chosen[ranked[first]] = True
    return np.flatnonzero(chosen[strong])


def _sources(net: Network, segs: np.ndarray) -> list[str]:
    """Source feature ids of segments, each once, in segment order."""
    seen: dict[str, None] = {}
    for s in segs.tolist():
        seen.setdefault(net.seg_source[s], None)
    return list(seen)


def _reach_findings(net, passes, bad_reach, bad_return, place, weak, depot, oneway) -> list[Finding]:
    out: list[Finding] = []
    for mask, kind in ((bad_reach, "reach"), (bad_return, "return")):
        segs = np.flatnonzero(mask)
        if segs.size == 0:
            continue
        # one finding per source feature; an error if any of its segments needs service
        by_src: dict[str, list[int]] = {}
        for s in segs.tolist():
            by_src.setdefault(net.seg_source[s], []).append(s)
        for src, ss in by_src.items():
            needed = bool((passes[ss] > 0).any())
            name = net.seg_name[ss[0]]
            label = f"street '{name}'" if name else "street"
            is_oneway = bool(oneway[ss].any())
            if place is not None and depot is not None:
                other_piece = weak[net.seg_u[ss[0]]] != weak[depot]
                if kind == "reach" and other_piece:
                    msg = f"{label} cannot be reached from the depot: it is not connected to the depot's streets"
                    hint = "add the missing connecting street, or give this part its own crew and depot"
                elif kind == "reach":
                    msg = f"{label} cannot be reached from the depot: one-way streets only lead away from it"
                    hint = "check the one-way directions (oneway, -1) of the streets leading there"
                else:
                    msg = f"{label} can be reached from the depot but never left back to it (a one-way trap)"
                    hint = "check the one-way directions (oneway, -1) of the streets leading away from it"
            else:
                what = ("one-way " if is_oneway else "") + label
                if kind == "reach":
                    msg = f"{what} can never be reached: the one-way streets around it only lead away"
                else:
                    msg = f"{what} can never be left: the one-way streets around it only lead in"
                hint = ("check its oneway value and direction (oneway = -1 reverses it), or add the missing "
                        "street that leads out (an extract cut at its border often causes this)")
            if not needed:
                msg += " (it needs no service; routes will not use it)"
            out.append(Finding("error" if needed else "warning", src, msg, hint))
    return out
