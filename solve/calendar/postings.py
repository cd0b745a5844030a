"""Posted sweeping times: a fixed day and, optionally, a clock window per curb.

Problem
-------
Street sweeping runs on a cycle of working days. A curb may be posted for a
fixed day and a window when parking is banned ("Tuesday 08:00 to 10:00"); the
plan must serve that curb on that day, inside that window.

Grammar (the whole of what is accepted; case does not matter, spaces are free)
-------
::

    posting     := day [ window ]
    day         := cycle day label ("tue", "wed2", ...) | weekday
    weekday     := mo|tu|we|th|fr|sa|su | mon|tue|wed|thu|fri|sat|sun | monday ... sunday
    window      := HH:MM "-" HH:MM           (24-hour clock, 00:00 to 24:00, end after start)
    conditional := restriction "@" "(" weekday window ")"
    restriction := no_parking | no_stopping | no_standing

A ``posting`` is what street files carry in the properties ``posted`` (the whole
street), ``posted:left`` and ``posted:right`` (one curb; left and right as seen
along the line's drawn direction). OpenStreetMap ways carry a ``conditional`` in
``parking:both:restriction:conditional``, ``parking:left:...`` or
``parking:right:...`` (the tag shape of the OpenStreetMap wiki's
"Key:parking" and "Conditional restrictions" pages; only one day and one window
per curb is read, more are refused rather than guessed).

Which posting holds where: ``posted`` holds for both curbs. ``posted`` may stand
beside ``posted:left`` / ``posted:right`` only when they say the same time (else
the feature is refused). A line drawn against the traffic (``oneway=-1``) is
reversed by the readers, and its left and right are swapped with it.

A weekday names the cycle day with that weekday; in a two-week cycle
("mon1" ... "fri2") a weekday alone is ambiguous and refused: write the label.
Reference: OpenStreetMap wiki, "Conditional restrictions" and "Key:opening_hours"
(weekday abbreviations Mo..Su, ``HH:MM-HH:MM`` ranges).
"""
from __future__ import annotations

import re
from dataclasses import dataclass

from crewcut.solve.errors import InputError

WEEKDAYS = ("mon", "tue", "wed", "thu", "fri", "sat", "sun")
_WEEKDAY_WORDS = {w: w for w in WEEKDAYS}
_WEEKDAY_WORDS.update({w[:2]: w for w in WEEKDAYS})
_WEEKDAY_WORDS.update({full: w for full, w in zip(
    ("monday", "tuesday", "wednesday", "thursday", "friday", "saturday", "sunday"), WEEKDAYS)})
RESTRICTIONS = ("no_parking", "no_stopping", "no_standing")
LABEL_RE = re.compile(r"^[a-z][a-z0-9_]{0,15}$")
SIDES = ("both", "left", "right")

_TIME = r"(\d{1,2}):(\d{2})"
_POSTING_RE = re.compile(rf"^([a-z][a-z0-9_]*)(?:\s+{_TIME}\s*-\s*{_TIME})?$")
_COND_RE = re.compile(r"^([a-z_]+)\s*@\s*\((.*)\)$")

# property names in street files (GeoJSON properties, CSV and GraphML columns), per side
POSTED_KEYS = {"both": "posted", "left": "posted:left", "right": "posted:right"}
# OpenStreetMap way tags, per side (Key:parking, Conditional restrictions)
OSM_POSTED_KEYS = {side: f"parking:{side}:restriction:conditional" for side in SIDES}

GRAMMAR_HINT = ("write a day and optionally a window, e.g. \"tue 08:00-10:00\" or \"wed\"; "
                "OpenStreetMap: \"no_parking @ (Tu 08:00-10:00)\"")


@dataclass(frozen=True)
class Posting:
    """One curb's (or one street's) posted sweeping time.

    ``day``: a cycle day label or a weekday (``"tue"``), lower case, as written
    (resolved against a cycle by :meth:`crewcut.solve.calendar.cycle.Cycle.day_of`).
    ``open_min`` / ``close_min``: the window in minutes after midnight, or None
    for a fixed day without a window. ``text``: what the file said.
    """

    day: str
    open_min: int | None = None
    close_min: int | None = None
    text: str = ""

    @property
    def has_window(self) -> bool:
        return self.open_min is not None

    def window_text(self) -> str:
        """``"08:00-10:00"``, or ``""`` without a window."""
        if self.open_min is None:
            return ""
        return f"{clock(self.open_min)}-{clock(self.close_min)}"

    def same_time(self, other: "Posting | None") -> bool:
        return other is not None and (self.day, self.open_min, self.close_min) == (
            other.day, other.open_min, other.close_min)


def clock(minutes: float) -> str:
    """Minutes after midnight as ``HH:MM`` (rounded to the minute; 24:00 allowed)."""
    m = int(round(minutes))
    return f"{m // 60:02d}:{m % 60:02d}"


def parse_clock(text: str, where: str) -> int:
    """``"07:30"`` -> 450; InputError naming ``where`` otherwise."""
    m = re.fullmatch(_TIME, str(text).strip())
    if not m:
        raise InputError(f"{where}: time {text!r} is not HH:MM", "write a 24-hour clock time, e.g. \"07:00\"")
    h, mi = int(m.group(1)), int(m.group(2))
    if mi > 59 or h > 24 or (h == 24 and mi):
        raise InputError(f"{where}: time {text!r} is not a clock time", "hours 00 to 24, minutes 00 to 59")
    return h * 60 + mi


def parse_posting(text: object, where: str) -> Posting:
    """A :class:`Posting` from a ``posting`` (module grammar); InputError naming ``where``."""
    if not isinstance(text, str) or not text.strip():
        raise InputError(f"{where}: posted time {text!r} is empty or not text", GRAMMAR_HINT)
    raw = " ".join(text.strip().lower().split())
    m = _POSTING_RE.match(raw)
    if not m:
        raise InputError(f"{where}: posted time {text!r} cannot be read", GRAMMAR_HINT)
    day = _WEEKDAY_WORDS.get(m.group(1), m.group(1))
    if not LABEL_RE.match(day):
        raise InputError(f"{where}: day {m.group(1)!r} in {text!r} is not a day label", GRAMMAR_HINT)
    if m.group(2) is None:
        return Posting(day, None, None, text.strip())
    lo = parse_clock(f"{m.group(2)}:{m.group(3)}", where)
    hi = parse_clock(f"{m.group(4)}:{m.group(5)}", where)
    if hi <= lo:
        raise InputError(f"{where}: window {clock(lo)}-{clock(hi)} in {text!r} ends before it starts",
                         "give the window's start, then its end, on the same day (e.g. 08:00-10:00)")
    return Posting(day, lo, hi, text.strip())


def parse_conditional(text: object, where: str) -> Posting:
    """A :class:`Posting` from an OpenStreetMap ``conditional`` value (module grammar)."""
    if not isinstance(text, str):
        raise InputError(f"{where}: value {text!r} is not text", GRAMMAR_HINT)
    raw = " ".join(text.strip().lower().split())
    if ";" in raw:
        raise InputError(f"{where}: {text!r} holds more than one condition; one day and window per curb is read",
                         "keep the sweeping condition only, or post each curb on its own side tag")
    m = _COND_RE.match(raw)
    if not m or m.group(1) not in RESTRICTIONS:
        raise InputError(f"{where}: {text!r} cannot be read as a posted sweeping time",
                         f"write one of {', '.join(RESTRICTIONS)} @ (Tu 08:00-10:00)")
    inner = m.group(2).strip()
    p = parse_posting(inner, where)
    if p.day not in WEEKDAYS:
        raise InputError(f"{where}: {text!r} names {p.day!r}, not a weekday (Mo..Su)", GRAMMAR_HINT)
    return Posting(p.day, p.open_min, p.close_min, text.strip())


def read_posted(props, where: str, keys: dict[str, str] | None = None,
                conditional: bool = False) -> dict[str, Posting]:
    """The postings a feature carries, keyed ``"both"`` / ``"left"`` / ``"right"``.

    Parameters
    ----------
    props:
        The feature's properties or tags (anything with ``.get``).
    where:
        Names the feature in messages (``"streets.geojson: feature 'elm-3'"``).
    keys:
        Property name per side; :data:`POSTED_KEYS` unless given
        (:data:`OSM_POSTED_KEYS` for OpenStreetMap tags).
    conditional:
        Read values as OpenStreetMap ``conditional`` restrictions, not ``posting``.

    Raises
    ------
    InputError
        A value outside the grammar, or ``both`` beside a side that says another time;
        the message names ``where`` and the property.
    """
    keys = POSTED_KEYS if keys is None else keys
    parse = parse_conditional if conditional else parse_posting
    out: dict[str, Posting] = {}
    for side in SIDES:
        value = props.get(keys[side])
        if value is None or value == "":
            continue
        out[side] = parse(value, f"{where}: {keys[side]}")
    both = out.get("both")
    for side in ("left", "right"):
        if both is not None and side in out and not both.same_time(out[side]):
            raise InputError(f"{where}: {keys['both']} {both.text!r} and {keys[side]} {out[side].text!r} "
                             "give the same curb two different times",
                             f"drop {keys['both']} and post each curb on its own, or make them agree")
    return out


def swap_sides(posted: dict[str, Posting]) -> dict[str, Posting]:
    """The postings of a line turned round: left becomes right and right left."""
    flip = {"both": "both", "left": "right", "right": "left"}
    return {flip[side]: p for side, p in posted.items()}


def curb_postings(posted: dict[str, Posting]) -> tuple[Posting | None, Posting | None]:
    """``(left, right)``: the posting each curb is under (a side's own, else ``both``, else None)."""
    both = posted.get("both")
    return posted.get("left", both), posted.get("right", both)


def same_or_none(a: Posting | None, b: Posting | None) -> bool:
    """True when both curbs are unposted or posted for the same time."""
    return (a is None and b is None) or (a is not None and a.same_time(b))
