"""The sweeping cycle: the working days a territory's streets are spread over, and the shift start.

A cycle is an ordered list of day labels: ``mon tue wed thu fri`` for a weekly
cycle, ``mon1 ... fri1 mon2 ... fri2`` for ten days over two weeks. Every curb
that needs service is served once per cycle, on one of its days. A label's
weekday is its first three letters when those name one (``"tue2"`` is a
Tuesday); a posting that gives only a weekday must match exactly one cycle day.
"""
from __future__ import annotations

from dataclasses import dataclass

from crewcut.solve.calendar.postings import LABEL_RE, WEEKDAYS, Posting, clock, parse_clock
from crewcut.solve.errors import InputError

DEFAULT_SHIFT_START_MIN = 6 * 60  # 06:00: common practice for street sweeping, no source
MAX_DAYS = 28


@dataclass(frozen=True)
class Cycle:
    """Working days (labels, in order) and the clock time shifts start (minutes after midnight)."""

    days: tuple[str, ...]
    shift_start_min: int = DEFAULT_SHIFT_START_MIN

    def index(self, label: str) -> int:
        return self.days.index(label)

    def day_of(self, posting: Posting, where: str) -> str:
        """The cycle day a posting names; InputError naming ``where`` if it names none or several."""
        if posting.day in self.days:
            return posting.day
        if posting.day in WEEKDAYS:
            hits = [d for d in self.days if d[:3] == posting.day]
            if len(hits) == 1:
                return hits[0]
            if len(hits) > 1:
                raise InputError(
                    f"{where}: posted day {posting.day!r} ({posting.text!r}) matches {len(hits)} days of the "
                    f"cycle ({', '.join(hits)})", "write the cycle day label itself, e.g. " + repr(hits[0]))
        raise InputError(f"{where}: posted day {posting.day!r} ({posting.text!r}) is not in the cycle "
                         f"({', '.join(self.days)})",
                         "add the day to the cycle's days, or correct the street's posted day")

    def to_dict(self) -> dict:
        return {"days": list(self.days), "shift_start": clock(self.shift_start_min)}


def check_days(days: object, where: str, param: str | None = None) -> tuple[str, ...]:
    """Day labels checked: text, ``[a-z][a-z0-9_]*`` up to 16 characters, unique, 1 to 28 of them."""
    if isinstance(days, str):
        days = [d for d in days.replace(",", " ").split()]
    if not isinstance(days, (list, tuple)) or not days:
        raise InputError(f"{where}: days {days!r} is not a list of day labels", "e.g. mon,tue,wed,thu,fri",
                         param=param)
    out = []
    for d in days:
        label = d.strip().lower() if isinstance(d, str) else d
        if not isinstance(label, str) or not LABEL_RE.match(label):
            raise InputError(f"{where}: day {d!r} is not a day label",
                             "a letter, then up to 15 letters, digits or _ (e.g. tue or tue2)", param=param)
        if label in out:
            raise InputError(f"{where}: day {label!r} is named twice", "name each working day once",
                             param=param)
        out.append(label)
    if len(out) > MAX_DAYS:
        raise InputError(f"{where}: {len(out)} days; at most {MAX_DAYS} are planned", param=param)
    return tuple(out)


def make_cycle(days: object, shift_start: object = None, where: str = "cycle", *,
               as_parameters: bool = False) -> Cycle:
    """A :class:`Cycle` from day labels and a ``"HH:MM"`` shift start (default 06:00), checked.

    ``as_parameters``: errors name the library parameters ``days`` and ``shift_start``
    (a call's arguments) rather than only ``where`` (a config table).
    """
    at_days = "`days`" if as_parameters else where
    at_start = "`shift_start`" if as_parameters else f"{where}: shift_start"
    labels = check_days(days, at_days, param="days" if as_parameters else None)
    try:
        start = DEFAULT_SHIFT_START_MIN if shift_start is None else parse_clock(shift_start, at_start)
    except InputError as exc:
        raise InputError(exc.message, exc.hint, param="shift_start" if as_parameters else None) from None
    if start >= 24 * 60:
        raise InputError(f"{at_start}: {clock(start)} is not within a day", "e.g. 06:00",
                         param="shift_start" if as_parameters else None)
    return Cycle(labels, start)
