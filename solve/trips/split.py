"""Splitting a fixed service sequence into trips: the least-cost set of facility visits.

Problem
-------
A closed route serves tasks ``0 .. m-1`` in a fixed order. Task ``k`` uses
``demand[k, c]`` of capacity ``c``; the amount used since the last reset may never
exceed ``limits[c]``. Between task ``k`` and task ``k+1`` (and after the last
task, on the way back to the depot) the vehicle may break off: drive to one
facility, or to two in a row, stay there, and drive on to where it resumes. Each
such *cut option* resets a set of capacities and costs minutes in place of the
original connection. Capacities in ``end_mask`` must be at zero when the route
returns to its depot. Facilities have opening hours: a vehicle that arrives
early waits, and its stay must end by closing time. Find the cuts of least total
added minutes.

Method
------
Dynamic programming over cut points with Pareto labels (cost, clock, loads),
the route-first, split-second idea of Beasley (1983) in its arc-routing form
(the "split" of Lacomme, Prins and Ramdane-Chérif 2001), extended to several
capacities and to facilities with hours by keeping every label that no other
label beats on all of cost, clock and every load. The result is optimal over
cut points and cut options *for the given order*; the order itself (the
engine's Euler circuit) is a heuristic. Waiting is allowed before a facility
opens, so a label that is earlier is never worse, and dominance is exact.

Reference
---------
Beasley, J. E. (1983). Route first-cluster second methods for vehicle routing.
Omega 11(4), 403-408.
Lacomme, P., Prins, C., Ramdane-Chérif, W. (2001). Competitive memetic
algorithms for arc routing problems. Annals of Operations Research 131, 159-185
(its "split" procedure).
Ghiani, G., Improta, G., Laporte, G. (2001). The capacitated arc routing problem
with intermediate facilities. Networks 37(3), 134-143.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

LOAD_TOL = 1e-9  # relative slack on a capacity limit (sums of floats)


@dataclass(frozen=True)
class CutOption:
    """One way to break off: visit ``facilities`` in order.

    ``legs``: drive minutes, one more than the facilities (out, between, back);
    ``slack``: clock minutes the route may take beyond ``legs`` (turns), used only for
    the opening-hours check so that it stays on the safe side; ``mask``: the
    capacities reset (bit ``c`` for capacity ``c``); ``tag``: the caller's label.
    """

    facilities: tuple[int, ...]
    legs: tuple[float, ...]
    mask: int
    slack: float = 0.0
    tag: object = None


@dataclass(frozen=True)
class Cut:
    """A chosen cut: after task ``after`` (``m-1``: on the way home), by ``option``."""

    after: int
    option: CutOption
    arrive: tuple[float, ...]  # clock minutes at each facility (the planner's estimate)
    wait: tuple[float, ...]


@dataclass(frozen=True)
class Split:
    cuts: tuple[Cut, ...]
    added_min: float  # minutes added to the route (cut legs + stays + waits - replaced connections)
    labels: int  # labels kept in all, a measure of the work done


def split_sequence(demand: np.ndarray, limits: np.ndarray, end_mask: int, gap: np.ndarray,
                   leave_clock: np.ndarray, options: list[list[CutOption]], fac_minutes, fac_open,
                   fac_close) -> Split | None:
    """The least-cost cuts of a fixed task order (see the module docstring); None when none is feasible.

    Parameters
    ----------
    demand: (m, C) amounts each task uses. limits: (C,).
    end_mask: capacities that must be reset before the depot.
    gap: (m,) minutes of the original connection after task k (to task k+1, or home for k = m-1).
    leave_clock: (m,) clock minutes at which the uncut route leaves the end of task k.
    options: options[k] are the cut options after task k.
    fac_minutes, fac_open, fac_close: per facility, stay minutes and opening hours (clock minutes).

    First the labels are compared on cost and loads alone; when no opening hour made any
    vehicle wait or turned one away, the hours never mattered and that answer is exact.
    Otherwise the programme runs again with the clock as a label dimension (exact, slower).
    """
    fac = (np.asarray(fac_minutes, float), np.asarray(fac_open, float), np.asarray(fac_close, float))
    res, bound = _run(demand, limits, end_mask, gap, leave_clock, options, fac, with_clock=False)
    if not bound:
        return res
    return _run(demand, limits, end_mask, gap, leave_clock, options, fac, with_clock=True)[0]


def _visits(opt: CutOption, leave: np.ndarray, fac):
    """Vectorised over labels: (extra minutes, feasible, any hour binding, arrivals, waits)."""
    fmin, fopen, fclose = fac
    t = leave.copy()
    ok = np.ones(leave.size, bool)
    binding = np.zeros(leave.size, bool)
    arr, waits = [], []
    for j, f in enumerate(opt.facilities):
        t = t + opt.legs[j]
        w = np.maximum(0.0, fopen[f] - t)
        arr.append(t)
        waits.append(w)
        t = t + w + fmin[f]
        late = t + opt.slack > fclose[f] + 1e-9
        binding |= (w > 0) | late
        ok &= ~late
    return t + opt.legs[-1] - leave, ok, binding, arr, waits


def _run(demand, limits, end_mask, gap, leave_clock, options, fac, *, with_clock: bool):
    demand = np.asarray(demand, float)
    m, n_cap = demand.shape
    lim = np.asarray(limits, float) * (1 + LOAD_TOL) + LOAD_TOL
    if m == 0:
        return Split((), 0.0, 0), False
    if (demand > lim).any():
        return None, False
    endm = np.array([bool(end_mask >> c & 1) for c in range(n_cap)])
    # a layer: cost (L,), clock extra (L,), loads (L, C), parent (L,), option (L,) (-1: no cut)
    cost, cx, loads = np.zeros(1), np.zeros(1), demand[:1].copy()
    layers = []
    bound = False
    total = 1
    for k in range(m):
        last = k == m - 1
        add = np.zeros(n_cap) if last else demand[k + 1]
        idx = np.arange(cost.size)
        parts = []
        nl = loads + add
        ok = ~(loads[:, endm] > LOAD_TOL).any(axis=1) if last else (nl <= lim).all(axis=1)
        parts.append((cost[ok], cx[ok], nl[ok], idx[ok], np.full(int(ok.sum()), -1)))
        lv = float(leave_clock[k]) + cx
        for j, opt in enumerate(options[k]):
            extra, ok, binding, _a, _w = _visits(opt, lv, fac)
            bound |= bool(binding.any())
            keep = np.array([not (opt.mask >> c & 1) for c in range(n_cap)])
            nl = loads * keep + add
            ok &= ~(nl[:, endm] > LOAD_TOL).any(axis=1) if last else (nl <= lim).all(axis=1)
            if not ok.any():
                continue
            delta = extra[ok] - float(gap[k])
            if opt.mask == (1 << n_cap) - 1:  # every load reset: one label (the cheapest) is all that can matter
                pick = np.lexsort((cx[ok] + delta, cost[ok] + delta))
                best = pick[:1] if not with_clock else pick[_front(cost[ok][pick] + delta[pick],
                                                                    cx[ok][pick] + delta[pick])]
                ok = np.flatnonzero(ok)[best]
                delta = delta[best]
            parts.append((cost[ok] + delta, cx[ok] + delta + opt.slack, nl[ok], idx[ok], np.full(idx[ok].size, j)))
        c_, x_, l_, p_, o_ = (np.concatenate([q[i] for q in parts]) for i in range(5))
        if c_.size == 0:
            return None, bound
        keep = _pareto(c_, x_ if with_clock else None, l_)
        cost, cx, loads = c_[keep], x_[keep], l_[keep]
        layers.append((p_[keep], o_[keep], cx))
        total += keep.size
    best = int(np.lexsort((np.arange(cost.size), cost))[0])
    added = float(cost[best])
    cuts = []
    for k in range(m - 1, -1, -1):
        parent, opt, _ = layers[k]
        j = int(opt[best])
        best = int(parent[best])
        if j >= 0:
            prev_cx = layers[k - 1][2][best] if k > 0 else 0.0
            o = options[k][j]
            _e, _ok, _b, arr, waits = _visits(o, np.array([float(leave_clock[k]) + prev_cx]), fac)
            cuts.append(Cut(k, o, tuple(float(a[0]) for a in arr), tuple(float(w[0]) for w in waits)))
    return Split(tuple(reversed(cuts)), added, total), bound


def _front(cost: np.ndarray, clock: np.ndarray) -> np.ndarray:
    """Positions (in the given cost order) on the (cost, clock) front: each clock below every earlier one."""
    prev = np.concatenate([[np.inf], np.minimum.accumulate(clock)[:-1]])
    return np.flatnonzero(clock < prev - 1e-12)


def _pareto(cost: np.ndarray, clock: np.ndarray | None, loads: np.ndarray) -> np.ndarray:
    """Indices of the labels no other beats or equals on cost, (clock) and every load; deterministic."""
    cols = [loads[:, c] for c in range(loads.shape[1] - 1, -1, -1)]
    if clock is not None:
        cols.append(clock)
    order = np.lexsort((*cols, cost))
    if clock is None and loads.shape[1] == 1:
        ld = loads[order, 0]
        prev = np.concatenate([[np.inf], np.minimum.accumulate(ld)[:-1]])
        return order[ld < prev - 1e-12]
    keys = np.column_stack([cost] + ([clock] if clock is not None else []) + [loads[:, c] for c in
                                                                             range(loads.shape[1])])[order]
    kept = np.zeros(keys.shape, float)  # the labels kept so far, in order
    out = np.zeros(order.size, np.int64)
    k = 0
    for i in range(order.size):
        if k and (kept[:k] <= keys[i] + 1e-12).all(axis=1).any():
            continue
        kept[k] = keys[i]
        out[k] = order[i]
        k += 1
    return out[:k]
