"""One crew's route: serve every required pass of some segments from a depot and return.

Problem
-------
Given a street network, a work profile, a depot node and the segments a crew
must serve (all of them by default), find a closed route from the depot that
serves every required pass exactly once, driving only existing streets in legal
directions, with as few minutes as possible: a Chinese postman problem (rural
when only some streets are required, mixed when one-way streets and two-way
streets meet), with turn penalties on top.

Method
------
1. Tasks (one per required pass) and deadhead arcs (every legal driving
   direction of every usable segment): :mod:`crewcut.solve.postman.tasks`.
2. The cheapest set of deadhead repeats that makes the tasks plus the depot a
   balanced, connected multigraph: :func:`crewcut.solve.postman.eulerize.eulerize` (exact for the
   undirected and directed cases, a stated heuristic with a lower bound for the
   mixed case; it also connects a depot that lies away from the tasks).
3. An Euler circuit from the depot, turn-aware by default: :mod:`crewcut.solve.circuits.euler`.
4. Where the network forbids turns (``Network.turn_bans``, e.g. OpenStreetMap
   restrictions): the circuit's pairing avoids them, a pass that may be served
   either way is served in a direction a closed route can drive, and every
   forbidden turn the circuit still makes is replaced by the least legal detour
   (:mod:`crewcut.solve.circuits.detours`). At its own depot a crew may turn any
   way (it turns in the yard); those turns are counted in ``stats["yard_turns"]``.
   Without bans none of this runs and the route is what it always was.

The route's ``lower_bound_min`` bounds its total minutes: service, deadhead and
the least turns every served arrival forces (:func:`crewcut.solve.postman.bounds.turn_lower_bound`);
``exact`` says the deadhead part is proven least, never the turns. The bound
ignores turn bans (a relaxation, see :mod:`crewcut.solve.postman.bounds`), while the
route's totals include its detours.
"""
from __future__ import annotations

import numbers
from dataclasses import dataclass

import numpy as np

from crewcut.solve.postman.bounds import route_lower_bound
from crewcut.solve.circuits.euler import euler_circuit
from crewcut.solve.errors import InputError
from crewcut.solve.seeds import check_seed
from crewcut.solve.postman.eulerize import augmented_arcs, eulerize
from crewcut.solve.network.model import Network
from crewcut.solve.profile import Profile
from crewcut.solve.result import TURNS, Augmentation, Route, RouteTotals, Traversal
from crewcut.solve.network.depot import check_depot_node
from crewcut.solve.postman.tasks import DeadheadArcs, TaskSet, build_deadhead, build_tasks, orient_under_bans
from crewcut.solve.circuits.bans import BanTable
from crewcut.solve.circuits.detours import legal_order
from crewcut.solve.circuits.euler import turns_along
from crewcut.solve.circuits.turns import ACROSS_TRAFFIC, U_TURN, TurnModel


def _check_segments(net: Network, segments) -> np.ndarray | None:
    if segments is None:
        return None
    try:
        seg = np.unique(np.asarray(list(segments)))
    except TypeError:
        raise InputError(f"segments must be a list of segment ids, got {segments!r}") from None
    if seg.size == 0:
        return seg.astype(np.int64)
    if seg.dtype == bool or not np.issubdtype(seg.dtype, np.integer):
        raise InputError(f"segments must be integer segment ids, got values of type {seg.dtype}")
    bad = seg[(seg < 0) | (seg >= net.n_segments)]
    if bad.size:
        shown = ", ".join(str(int(s)) for s in bad[:10])
        raise InputError(f"segment ids do not exist: {shown}{' ...' if bad.size > 10 else ''} "
                         f"(the network has segments 0 to {net.n_segments - 1})")
    closed = seg[net.seg_closed[seg]]
    if closed.size:
        shown = ", ".join(f"{int(s)} ('{net.seg_source[int(s)]}')" for s in closed[:10])
        raise InputError(f"closed segments cannot be served: {shown}{' ...' if closed.size > 10 else ''}",
                         "leave closed streets out of the segments to serve, or reopen them")
    return seg.astype(np.int64)


def _check_params(time_limit_s, seed) -> None:
    if isinstance(time_limit_s, bool) or not isinstance(time_limit_s, numbers.Real) \
            or not np.isfinite(time_limit_s) or time_limit_s <= 0:
        raise InputError(f"time_limit_s must be a positive number of seconds, got {time_limit_s!r}")
    check_seed(seed)


@dataclass(frozen=True)
class AugmentedTraversals:
    """The tasks as driven plus the deadhead traversals an Eulerization added.

    Arrays have one entry per traversal: the tasks first (``n_tasks`` of them),
    then the added deadhead (``n_added``). ``forward``: driven ``seg_u -> seg_v``.
    """

    tail: np.ndarray
    head: np.ndarray
    seg: np.ndarray
    forward: np.ndarray
    service: np.ndarray
    minutes: np.ndarray
    metres: np.ndarray
    aug: Augmentation
    n_tasks: int
    n_added: int
    tasks: TaskSet
    arcs: DeadheadArcs


def augmented_traversals(net: Network, profile: Profile, depot: int, segments=None, *,
                         time_limit_s: float = 10.0, seed: int = 0) -> AugmentedTraversals | None:
    """Tasks and Eulerization as traversal arrays (``None`` when nothing needs service).

    Parameters are those of :func:`plan_route`, assumed already checked.
    """
    tasks = build_tasks(net, profile, None if segments is None else [int(s) for s in segments])
    arcs = build_deadhead(net, profile, depot)
    if net.turn_bans.size:
        tasks = orient_under_bans(net, tasks, arcs)
    n_tasks = len(tasks)
    if n_tasks == 0:
        return None
    aug = eulerize(tasks, arcs, depot, net.n_nodes, time_limit_s=float(time_limit_s), seed=int(seed),
                   seg_source=net.seg_source)

    # the tasks as driven, then the added deadhead traversals
    extra = aug.arcs
    tail, head = augmented_arcs(tasks, arcs, aug)
    seg = np.concatenate([tasks.seg, arcs.seg[extra]])
    service = np.concatenate([np.ones(n_tasks, bool), np.zeros(extra.size, bool)])
    minutes = np.concatenate([tasks.minutes, arcs.minutes[extra]])
    metres = np.concatenate([tasks.metres, arcs.metres[extra]])
    # u -> v, read from the network itself (a loop street counts as forward)
    t_tail, t_head = tail[:n_tasks], head[:n_tasks]
    forward = np.concatenate([(t_tail == net.seg_u[tasks.seg]) & (t_head == net.seg_v[tasks.seg]),
                              arcs.forward[extra]])

    return AugmentedTraversals(tail, head, seg, forward, service, minutes, metres, aug, n_tasks, int(extra.size),
                               tasks, arcs)


def plan_route(net: Network, profile: Profile, depot: int, segments=None, *, turn_aware: bool = True,
               time_limit_s: float = 10.0, seed: int = 0, lower_bound: bool = True) -> Route:
    """A closed route from ``depot`` serving every required pass of ``segments``.

    Parameters
    ----------
    net, profile:
        The street network and the work profile (speeds, passes, turn penalties).
    depot:
        Node id where the route starts and ends. It need not touch the segments to
        serve: the route drives out to them and back.
    segments:
        Segment ids to serve (their required passes); ``None`` serves all.
        Other segments may still be driven through.
    turn_aware:
        Choose the circuit that avoids U-turns and turns across traffic (default)
        rather than plain Hierholzer.
    time_limit_s, seed:
        Passed to the Eulerization (used by its mixed-case search).
    lower_bound:
        Compute the route's lower bound (default); False leaves ``lower_bound_min`` at 0
        (a valid but empty bound) for callers that only need the walk.

    Returns
    -------
    :class:`crewcut.solve.result.Route`; ``stats`` holds the U-turn and across-traffic
    counts of the chosen circuit and of plain Hierholzer on the same augmentation.

    Raises :class:`InputError` for a depot or segment that does not exist, a
    closed segment to serve, or streets the crew cannot reach and leave.
    """
    depot = check_depot_node(net, depot, usable=True)
    seg_sel = _check_segments(net, segments)
    _check_params(time_limit_s, seed)

    trav = augmented_traversals(net, profile, depot, seg_sel, time_limit_s=time_limit_s, seed=seed)
    if trav is None:
        return Route(depot=depot, traversals=(), totals=RouteTotals.of(()), method="nothing to serve",
                     exact=True, lower_bound_min=0.0, stats={"tasks": 0})
    tail, head, seg, forward = trav.tail, trav.head, trav.seg, trav.forward
    service, minutes, metres, aug = trav.service, trav.minutes, trav.metres, trav.aug
    n_tasks, extra = trav.n_tasks, trav.n_added

    model = TurnModel.from_network(net, profile)
    bans = BanTable.of(net)
    circuit = euler_circuit(tail, head, seg, forward, depot, model, turn_aware=turn_aware, bans=bans)
    o = circuit.order
    turn_code, turn_s = circuit.turn, circuit.turn_s
    ban_stats = {}
    if bans is not None:  # a detour in place of every forbidden turn the circuit could not avoid
        o, added, made = legal_order(o, tail, head, seg, forward, trav.arcs, model, bans, depot)
        if added.size:
            a = trav.arcs
            tail, head = np.concatenate([tail, a.tail[added]]), np.concatenate([head, a.head[added]])
            seg, forward = np.concatenate([seg, a.seg[added]]), np.concatenate([forward, a.forward[added]])
            service = np.concatenate([service, np.zeros(added.size, bool)])
            minutes = np.concatenate([minutes, a.minutes[added]])
            metres = np.concatenate([metres, a.metres[added]])
            turn_code, turn_s = turns_along(o, seg, forward, model)
        yard = o[1:][bans.banned(seg[o[:-1]], forward[o[:-1]], seg[o[1:]], forward[o[1:]])]
        ban_stats = {"detours": made, "detour_traversals": int(added.size),
                     "detour_min": float(trav.arcs.minutes[added].sum()), "yard_turns": int(yard.size)}
        if added.size:  # the circuit's own counts, now with the detours' turns
            ban_stats.update(u_turns=int(np.count_nonzero(turn_code == U_TURN)),
                             across_turns=int(np.count_nonzero(turn_code == ACROSS_TRAFFIC)),
                             turn_s=float(turn_s.sum()))
    turn_min = turn_s / 60.0
    traversals = tuple(
        Traversal(segment=s, from_node=a, to_node=b, service=sv, metres=me, minutes=mi,
                  turn=TURNS[k], turn_minutes=tm)
        for s, a, b, sv, me, mi, k, tm in zip(
            seg[o].tolist(), tail[o].tolist(), head[o].tolist(), service[o].tolist(), metres[o].tolist(),
            minutes[o].tolist(), turn_code.tolist(), turn_min.tolist()))
    totals = RouteTotals.of(traversals)
    stats = dict(circuit.stats)
    stats.update(tasks=n_tasks, deadhead_added=extra, augmentation_min=float(aug.cost),
                 augmentation_lower_bound_min=float(aug.lower_bound), circuit=circuit.method, **ban_stats)
    return Route(depot=depot, traversals=traversals, totals=totals,
                 method=f"{aug.method}; {'turn-aware circuit' if turn_aware else 'Hierholzer circuit'}",
                 exact=bool(aug.exact) and not ban_stats.get("detours"),  # a detour's deadhead is not proven least
                 lower_bound_min=(route_lower_bound(net, profile, depot, trav.tasks, trav.arcs, aug.lower_bound)
                                  if lower_bound else 0.0),
                 stats=stats)
