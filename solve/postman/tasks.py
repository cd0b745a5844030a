"""Tasks (required passes) and deadhead arcs of a street network under a profile.

A *task* is one required pass of one segment: directed (it must be driven from
``tail`` to ``head``) or undirected (either way; ``tail``/``head`` are then the
segment's ``u``/``v``). A *deadhead arc* is one legal driving direction of a
usable segment, driven without service. The Eulerization works on these two
tables only (see :mod:`crewcut.solve.postman.eulerize`).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from crewcut.solve.costs import deadhead_minutes, required_passes, service_minutes
from crewcut.solve.errors import InputError
from crewcut.solve.network.model import Network
from crewcut.solve.profile import Profile


@dataclass(frozen=True)
class TaskSet:
    """One row per required pass. ``directed`` False: may be served either way."""

    seg: np.ndarray  # int64 (t,)
    tail: np.ndarray  # int64 (t,)
    head: np.ndarray  # int64 (t,)
    directed: np.ndarray  # bool (t,)
    minutes: np.ndarray  # float64 (t,), service minutes
    metres: np.ndarray  # float64 (t,)

    def __len__(self) -> int:
        return int(self.seg.shape[0])


@dataclass(frozen=True)
class DeadheadArcs:
    """One row per legal driving direction of every usable segment."""

    tail: np.ndarray  # int64 (a,)
    head: np.ndarray  # int64 (a,)
    seg: np.ndarray  # int64 (a,)
    forward: np.ndarray  # bool (a,): True for seg_u -> seg_v
    minutes: np.ndarray  # float64 (a,), deadhead minutes
    metres: np.ndarray  # float64 (a,)

    def __len__(self) -> int:
        return int(self.seg.shape[0])


def _check_segments(net: Network, segments) -> np.ndarray:
    seg = np.asarray(segments)
    if seg.dtype == bool:
        if seg.shape != (net.n_segments,):
            raise InputError(f"segment mask has {seg.shape[0]} entries but the network has "
                             f"{net.n_segments} segments", "give one boolean per segment or a list of ids")
        return np.flatnonzero(seg)
    seg = seg.astype(np.int64, copy=False).ravel()
    bad = seg[(seg < 0) | (seg >= net.n_segments)]
    if bad.size:
        raise InputError(f"segment id {int(bad[0])} is not in the network (0..{net.n_segments - 1})",
                         "give segment ids as array positions of the network")
    return np.unique(seg)


def build_tasks(net: Network, profile: Profile, segments=None) -> TaskSet:
    """Required passes of ``net`` under ``profile``, optionally only on ``segments``.

    ``segments`` is a list/array of segment ids or a boolean mask; ``None`` serves
    the whole network. Rows come ordered by segment, then forward, backward,
    either passes, so the table is deterministic.
    """
    p = required_passes(net, profile)
    keep = np.ones(net.n_segments, bool) if segments is None else np.zeros(net.n_segments, bool)
    if segments is not None:
        keep[_check_segments(net, segments)] = True
    svc = service_minutes(net, profile)
    sid = np.arange(net.n_segments, dtype=np.int64)
    parts = []  # (seg, kind) with kind 0 forward, 1 backward, 2 either
    for kind, count in enumerate((p.forward, p.backward, p.either)):
        c = np.where(keep, count, 0)
        parts.append((np.repeat(sid, c), np.full(int(c.sum()), kind, np.int8)))
    seg = np.concatenate([s for s, _ in parts])
    kind = np.concatenate([k for _, k in parts])
    order = np.lexsort((kind, seg))
    seg, kind = seg[order], kind[order]
    u, v = net.seg_u[seg], net.seg_v[seg]
    back = kind == 1
    return TaskSet(seg=seg, tail=np.where(back, v, u).astype(np.int64), head=np.where(back, u, v).astype(np.int64),
                   directed=kind != 2, minutes=svc[seg].astype(np.float64),
                   metres=net.seg_length[seg].astype(np.float64))


def build_deadhead(net: Network, profile: Profile, depot: int | None = None) -> DeadheadArcs:
    """Every legal direction of every usable segment, at deadhead minutes.

    With a ``depot``, only the directions that lie on some closed walk through it
    (:func:`crewcut.solve.network.scope.servable_arcs`): a closed route can use no
    other, and an augmentation that did (a connector through a one-way trap) could
    never be balanced.
    """
    tail, head, seg, fwd = net.arcs(profile.ignore_oneway)
    if depot is not None:
        from crewcut.solve.network.scope import servable_arcs

        reach, back = servable_arcs(net, profile, np.array([int(depot)], np.int64))
        keep = reach & back
        tail, head, seg, fwd = tail[keep], head[keep], seg[keep], fwd[keep]
    dh = deadhead_minutes(net, profile)
    return DeadheadArcs(tail=tail.astype(np.int64), head=head.astype(np.int64), seg=seg.astype(np.int64),
                        forward=fwd.astype(bool), minutes=dh[seg].astype(np.float64),
                        metres=net.seg_length[seg].astype(np.float64))


def orient_under_bans(net: Network, tasks: TaskSet, arcs: DeadheadArcs) -> TaskSet:
    """``tasks`` with each either-way pass fixed to its one direction a closed route can drive.

    Under turn bans one direction of a two-way street may lie on no closed walk
    through the depot while the other does (``arcs`` holds only those that do,
    :func:`build_deadhead` with a depot); a pass served the wrong way round could
    then never be joined to the route. Raises :class:`InputError` naming the
    segments whose pass no closed route can drive (what
    :func:`crewcut.solve.network.scope.scope_network` leaves out beforehand).
    """
    has = np.zeros((net.n_segments, 2), bool)
    has[arcs.seg, arcs.forward.astype(np.int64)] = True
    fwd = tasks.tail == net.seg_u[tasks.seg]
    stuck = np.where(tasks.directed, ~has[tasks.seg, fwd.astype(np.int64)],
                     ~has[tasks.seg, 0] & ~has[tasks.seg, 1])
    if stuck.any():
        bad = np.unique(tasks.seg[stuck])
        shown = ", ".join(f"segment {int(s)} ('{net.seg_source[int(s)]}')" for s in bad[:8])
        raise InputError(f"{bad.size} required segment(s) lie on no closed route from the depot once the turn "
                         f"restrictions are kept: {shown}{' ...' if bad.size > 8 else ''}",
                         "leave these segments out of the territory (the service scope does so with the policy "
                         "leave_out), or check the restrictions and one-way directions near them")
    loose = ~tasks.directed
    only_fwd = loose & has[tasks.seg, 1] & ~has[tasks.seg, 0]
    only_back = loose & has[tasks.seg, 0] & ~has[tasks.seg, 1]
    if not (only_fwd.any() or only_back.any()):
        return tasks
    u, v = net.seg_u[tasks.seg], net.seg_v[tasks.seg]
    return TaskSet(seg=tasks.seg, tail=np.where(only_back, v, tasks.tail).astype(np.int64),
                   head=np.where(only_back, u, tasks.head).astype(np.int64),
                   directed=tasks.directed | only_fwd | only_back, minutes=tasks.minutes, metres=tasks.metres)
