"""Curbs posted for different times: one street line becomes one segment per curb.

Problem
    A two-sided street may be posted for alternate-side sweeping ("left curb
    Tuesday, right curb Thursday"), or on one curb only. One segment serving both
    curbs would carry one time; the two curbs need their own.

Rules (applied after each line's service kind is resolved)
    * both curbs unposted, or posted for the same time: the line stays one line
      and every pass of it carries that posting (or none);
    * the curbs differ and the service is ``both_sides``: the line becomes two
      parallel lines with the same ends and drawn line, ``<id>:left`` with service
      ``left_curb`` and ``<id>:right`` with ``right_curb``, each with its own
      curb's posting (None when that curb is not posted);
    * the service already is ``left_curb`` or ``right_curb``: that curb's posting;
    * ``none``: no posting (the street is not served; a warning says so);
    * ``one_pass`` or ``each_direction``: refused; one pass cannot be on two days
      (the hint is ``service: both_sides``).

Left and right are as seen along the line's stored direction (``coords`` from
first to last position; readers have already turned round lines drawn against
the traffic and swapped their sides).
"""
from __future__ import annotations

import dataclasses

import numpy as np

from crewcut.solve.calendar.postings import curb_postings, same_or_none
from crewcut.solve.errors import InputError
from crewcut.solve.network.model import (SERVICE_BOTH_SIDES, SERVICE_LABELS, SERVICE_LEFT_CURB, SERVICE_NONE,
                                         SERVICE_RIGHT_CURB, Finding, RawLine)

CURB_SUFFIX = {"left": ":left", "right": ":right"}  # source id of each curb's line: "<id>:left", "<id>:right"


def split_curbs(lines: list[RawLine], services: np.ndarray,
                findings: list[Finding]) -> tuple[list[RawLine], np.ndarray, list]:
    """Lines, their service codes and their postings, with differently posted curbs split.

    Parameters
    ----------
    lines, services:
        The reader's lines and their resolved service codes (``SERVICE_*``).
    findings:
        Warnings are appended here (a posted street that is not served).

    Returns
    -------
    (lines, services, postings)
        Unchanged when no line is posted (``postings`` is then empty). Otherwise
        a split line's two curb lines stand where it stood, left first.

    Raises
    ------
    InputError
        A line served in one pass (``one_pass``, ``each_direction``) whose curbs
        are posted for different times.
    """
    if not any(ln.posted for ln in lines):
        return lines, services, []
    out_lines: list[RawLine] = []
    out_svc: list[int] = []
    postings: list = []
    unserved: set[str] = set()
    for ln, code in zip(lines, services.tolist()):
        left, right = curb_postings(ln.posted)
        if same_or_none(left, right):
            out_lines.append(ln)
            out_svc.append(code)
            postings.append(left if code != SERVICE_NONE else None)
            if code == SERVICE_NONE and left is not None:
                _unserved(ln, unserved, findings)
            continue
        if code == SERVICE_BOTH_SIDES:
            for side, curb_code, p in (("left", SERVICE_LEFT_CURB, left), ("right", SERVICE_RIGHT_CURB, right)):
                out_lines.append(dataclasses.replace(ln, source_id=ln.source_id + CURB_SUFFIX[side],
                                                     service=SERVICE_LABELS[curb_code]))
                out_svc.append(curb_code)
                postings.append(p)
        elif code in (SERVICE_LEFT_CURB, SERVICE_RIGHT_CURB):
            out_lines.append(ln)
            out_svc.append(code)
            postings.append(left if code == SERVICE_LEFT_CURB else right)
        elif code == SERVICE_NONE:
            out_lines.append(ln)
            out_svc.append(code)
            postings.append(None)
            _unserved(ln, unserved, findings)
        else:
            shown = ", ".join(f"{side} {p.text!r}" if p is not None else f"{side} not posted"
                              for side, p in (("left", left), ("right", right)))
            raise InputError(
                f"feature '{ln.source_id}': its curbs are posted for different times ({shown}) but it is "
                f"served in one pass (service {SERVICE_LABELS[code]}); "
                "one pass cannot be on two days",
                "set service to both_sides so that each curb is served on its own, or post both curbs alike")
    return out_lines, np.asarray(out_svc, np.int8), postings


def _unserved(ln: RawLine, seen: set[str], findings: list[Finding]) -> None:
    """One warning per feature (an OpenStreetMap way comes as several lines)."""
    if ln.source_id in seen:
        return
    seen.add(ln.source_id)
    findings.append(Finding("warning", ln.source_id, "posted for sweeping but its service is none; the posting is not used",
                   "set a service for the street, or drop its posting"))
