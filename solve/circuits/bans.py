"""Forbidden turns as a lookup table: is (arriving traversal, departing traversal) banned?

The rows of :attr:`crewcut.solve.network.model.Network.turn_bans` (arrive_seg,
arrive_fwd, depart_seg, depart_fwd) become one sorted array of integer keys,
``((arrive_seg * 2 + arrive_fwd) * 2m) + depart_seg * 2 + depart_fwd`` for m
segments, so that arrays of pairs are looked up at once with
:func:`numpy.searchsorted` and single pairs in a Python set.

The depot is a yard: a crew that passes through its own depot may leave in any
direction (it turns in the yard), so a ban at the depot node binds no route of
that depot. This is the rule :mod:`crewcut.solve.network.scope` uses to decide
which streets a closed route can serve; the route engine still avoids such turns
where it can, and reports the ones it makes (``stats["yard_turns"]``).
"""
from __future__ import annotations

import numpy as np

from crewcut.solve.network.model import Network

# Added to a banned pair's turn penalty when the circuit chooses pairings: a weight
# far above any real penalty, so that a banned turn is taken only where no pairing avoids it.
BAN_WEIGHT_S = 1.0e7


class BanTable:
    """The forbidden turns of a network (build it with :meth:`of`; None when there are none)."""

    def __init__(self, rows: np.ndarray, sources: tuple[str, ...], n_segments: int) -> None:
        self.width = 2 * int(n_segments)
        keys = self._keys(rows[:, 0], rows[:, 1], rows[:, 2], rows[:, 3])
        order = np.argsort(keys, kind="stable")
        self.keys = keys[order]
        src = list(sources) if len(sources) == rows.shape[0] else [""] * rows.shape[0]
        self.source = {int(k): src[i] for k, i in zip(self.keys.tolist(), order.tolist())}
        self.key_set = set(self.source)

    @classmethod
    def of(cls, net: Network) -> "BanTable | None":
        if not net.turn_bans.size:
            return None
        return cls(np.asarray(net.turn_bans, np.int64), net.turn_ban_source, net.n_segments)

    def _keys(self, a_seg, a_fwd, d_seg, d_fwd) -> np.ndarray:
        a = np.asarray(a_seg, np.int64) * 2 + np.asarray(a_fwd, np.int64)
        d = np.asarray(d_seg, np.int64) * 2 + np.asarray(d_fwd, np.int64)
        return a * self.width + d

    def banned(self, a_seg, a_fwd, d_seg, d_fwd) -> np.ndarray:
        """Per pair: is arriving along (a_seg, a_fwd) and leaving along (d_seg, d_fwd) forbidden?"""
        k = self._keys(a_seg, a_fwd, d_seg, d_fwd)
        if self.keys.size == 0 or k.size == 0:
            return np.zeros(k.shape, bool)
        pos = np.minimum(np.searchsorted(self.keys, k), self.keys.size - 1)
        return self.keys[pos] == k

    def is_banned(self, a_seg: int, a_fwd: int, d_seg: int, d_fwd: int) -> bool:
        return ((a_seg * 2 + a_fwd) * self.width + d_seg * 2 + d_fwd) in self.key_set

    def source_of(self, a_seg: int, a_fwd: int, d_seg: int, d_fwd: int) -> str:
        """The restriction(s) a banned pair comes from ("relation/123"), "" when not banned."""
        return self.source.get((a_seg * 2 + a_fwd) * self.width + d_seg * 2 + d_fwd, "")


def banned_steps(order, seg, forward, head, bans: BanTable, depot: int) -> np.ndarray:
    """Positions t >= 1 of ``order`` whose turn (from order[t-1] into order[t]) is banned away from the depot."""
    order = np.asarray(order, np.int64)
    if order.size < 2:
        return np.zeros(0, np.int64)
    p, q = order[:-1], order[1:]
    bad = bans.banned(seg[p], forward[p], seg[q], forward[q]) & (head[p] != depot)
    return np.flatnonzero(bad) + 1
