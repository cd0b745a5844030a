"""The progress callback every long run takes: ``progress(description, done, total)``.

The description's text before its first colon names the stage ("balance: ...");
``done`` and ``total`` measure how far that stage has come. The library only
calls it; drawing bars is the command line's business. :func:`with_log` adds the
library's log (logger ``crewcut.fleet``): a line when a stage starts and one when it
ends, with its time, at INFO level; the command line shows them with ``-v``.
"""
from __future__ import annotations

import logging
import time
from typing import Callable

ProgressFn = Callable[[str, float, float], None]

__all__ = ["ProgressFn", "with_log"]

_log = logging.getLogger("crewcut.fleet")


def with_log(progress: ProgressFn | None) -> ProgressFn:
    """``progress`` (or nothing) that also logs each stage's start and end, with the seconds it took."""
    started: dict[str, float] = {}

    def report(description: str, done: float, total: float) -> None:
        stage = description.split(":", 1)[0]
        if stage not in started:
            started[stage] = time.perf_counter()
            _log.info("%s: started", stage)
        if total and done >= total:
            _log.info("%s: done in %.1f s", stage, time.perf_counter() - started.pop(stage))
        if progress is not None:
            progress(description, done, total)
    return report
