"""The command line's words for the library's parameters, and error messages in those words.

The library names parameters in backquotes ("`seed` is -1", see
:mod:`crewcut.solve.errors`); a person at the command line typed a flag, so the
message they read names the flag ("--seed is -1"). ``FLAGS`` is the one table of
which flag sets which parameter.
"""
from __future__ import annotations

import re

from crewcut.solve.errors import InputError

# library parameter -> the flag that sets it
FLAGS: dict[str, str] = {
    "seed": "--seed",
    "k": "--crews",
    "depot_lonlat": "--depot",
    "only": "--crew",
    "workers": "--workers",
    "time_limit_s": "--time-limit",
    "stability": "--stability",
    "absent": "--absent",
    "added_crews": "--add-crew",
    "shift_limits": "--shift-limit",
    "closed": "--close",
    "opened": "--open",
    "net": "--network",
    "profile": "--config",
    "n_segments": "--segments",
    "area": "--area",
    "unservable": "--unservable",
    "days": "--days",
    "shift_start": "--shift-start",
    "day": "--day",
}

_NAMED = re.compile(r"`([A-Za-z_][A-Za-z0-9_]*)`")


def in_flags(text: str | None) -> str | None:
    """``text`` with every backquoted parameter the table knows replaced by its flag."""
    if text is None:
        return None
    return _NAMED.sub(lambda m: FLAGS.get(m.group(1), m.group(0)), text)


def error_words(exc: InputError) -> tuple[str, str | None]:
    """The message and the hint of ``exc`` as the command line prints them.

    A message about a parameter (``exc.param``) that names no parameter itself gets
    the flag in front.
    """
    message, hint = in_flags(exc.message), in_flags(exc.hint)
    flag = FLAGS.get(exc.param or "")
    if flag and not _NAMED.search(exc.message):
        message = f"{flag}: {message}"
    return message, hint
