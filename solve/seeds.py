"""Seeds: the one range that every random choice in crewcut accepts.

A seed is a whole number from 0 to 2**32 - 1: the range scikit-learn accepts for
``random_state`` (its KMeans refuses larger ones) and numpy's legacy seeding, so
one seed can be handed to every library unchanged. Checked up front, before any
work, with the parameter named.
"""
from __future__ import annotations

import numbers

from crewcut.solve.errors import InputError

SEED_MAX = 2**32 - 1


def check_seed(seed, param: str = "seed") -> int:
    """``seed`` as an int when it is a whole number in [0, 2**32 - 1]; :class:`InputError` otherwise."""
    if isinstance(seed, bool) or not isinstance(seed, numbers.Integral) or not 0 <= seed <= SEED_MAX:
        raise InputError(f"`{param}` is {seed!r}", f"give a whole number from 0 to {SEED_MAX:,} (2**32 - 1)",
                         param=param)
    return int(seed)
