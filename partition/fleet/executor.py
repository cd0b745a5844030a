"""Routing many territories at once, behind a small executor interface.

Each territory is one rural postman problem from its crew's depot, solved by
:func:`crewcut.solve.route.plan_route` (deadheading may use any usable street). The jobs
are independent, so they run in parallel through a :mod:`concurrent.futures`
executor. The network and profile go to each worker process once, through the
pool's initializer, not with every job.

A *router* is anything with ``route_many(jobs) -> list[Route]`` (results in job
order) and ``close()``: :class:`LocalRouter` runs in this process or a local
process pool; a distributed executor can be plugged in by implementing the same
two methods. Results do not depend on the number of workers: every job carries
its own seed, derived from the plan's seed and the job's content.
"""
from __future__ import annotations

import hashlib
import logging
import os
import signal
from concurrent.futures import Executor, ProcessPoolExecutor
from dataclasses import dataclass
from typing import Protocol, Sequence

import numpy as np

from crewcut.solve.network.model import Network
from crewcut.solve.profile import Profile
from crewcut.solve.result import Route, RouteTotals

_log = logging.getLogger(__name__)


@dataclass(frozen=True)
class RouteJob:
    """One territory to route: the crew's depot and the segments it serves."""

    depot: int
    segments: tuple[int, ...]
    seed: int = 0

    @staticmethod
    def of(depot: int, segments, plan_seed: int) -> "RouteJob":
        segs = tuple(int(s) for s in sorted(int(x) for x in segments))
        h = hashlib.sha256(f"{plan_seed}|{depot}|{segs}".encode()).digest()
        return RouteJob(int(depot), segs, int.from_bytes(h[:4], "little") & 0x7FFFFFFF)  # solvers take int32 seeds


class Router(Protocol):
    def route_many(self, jobs: Sequence[RouteJob]) -> list[Route]: ...

    def close(self) -> None: ...


def check_workers(workers: int | None) -> None:
    """None (all cores) or a whole number of 1 or more; checked before any work starts."""
    if workers is not None and (isinstance(workers, bool) or not isinstance(workers, int) or workers < 1):
        from crewcut.solve.errors import InputError

        raise InputError(f"`workers` is {workers!r}", "give a whole number of 1 or more (default: all cores)",
                         param="workers")


def default_workers() -> int:
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover - not Linux
        return max(1, os.cpu_count() or 1)


# ------------------------------------------------------------ worker side
_STATE: dict = {}


def _init_worker(net: Network, profile: Profile, options: dict) -> None:
    # Ctrl-C reaches the whole process group: the parent stops the pool and says so once;
    # the workers ignore it instead of each printing a KeyboardInterrupt traceback.
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    _STATE["net"] = net
    _STATE["profile"] = profile
    _STATE["options"] = options


def _solve(job: RouteJob) -> Route:
    return solve_job(_STATE["net"], _STATE["profile"], job, **_STATE["options"])


def solve_job(net: Network, profile: Profile, job: RouteJob, *, time_limit_s: float = 10.0,
              turn_aware: bool = True, start_min: float | None = None) -> Route:
    """Route one territory (an empty territory gives an empty route at the depot).

    With ``start_min`` (a clock time, cycle plans) the route starts then and serves posted
    passes inside their windows (:func:`crewcut.solve.calendar.dayroute.plan_day_route`).
    """
    if not job.segments:
        return Route(depot=job.depot, traversals=(), totals=RouteTotals.of(()), method="empty",
                     exact=True, lower_bound_min=0.0, start_min=start_min)
    if start_min is not None:
        from crewcut.solve.calendar.dayroute import plan_day_route

        route = plan_day_route(net, profile, job.depot, np.asarray(job.segments, np.int64), start_min,
                               turn_aware=turn_aware, time_limit_s=time_limit_s, seed=job.seed)
    else:
        from crewcut.solve.route import plan_route

        route = plan_route(net, profile, job.depot, np.asarray(job.segments, np.int64), turn_aware=turn_aware,
                           time_limit_s=time_limit_s, seed=job.seed)
    if profile.capacities:  # trips: facility visits where the capacities call for them
        from crewcut.solve.trips.route_trips import with_trips

        route = with_trips(net, profile, route, start_min)
    return route


# ------------------------------------------------------------ routers
class LocalRouter:
    """Route territories in this process (``workers == 1``) or in a local process pool.

    Use as a context manager so that the pool is shut down.
    """

    def __init__(self, net: Network, profile: Profile, *, workers: int | None = None,
                 time_limit_s: float = 10.0, turn_aware: bool = True, start_min: float | None = None) -> None:
        check_workers(workers)
        self.net = net
        self.profile = profile
        cores = default_workers()
        if workers is not None and workers > cores:
            # more processes than cores only adds start-up and switching time; the plan is the same
            _log.warning("%d workers asked for, %d used: this machine has %d cores", workers, cores, cores)
            workers = cores
        self.workers = cores if workers is None else workers
        self.options = {"time_limit_s": float(time_limit_s), "turn_aware": bool(turn_aware)}
        if start_min is not None:  # cycle plans: clock times and posted windows
            self.options["start_min"] = float(start_min)
        self._pool: Executor | None = None

    def _executor(self) -> Executor:
        if self._pool is None:
            self._pool = ProcessPoolExecutor(max_workers=self.workers, initializer=_init_worker,
                                             initargs=(self.net, self.profile, self.options))
        return self._pool

    def route_many(self, jobs: Sequence[RouteJob]) -> list[Route]:
        if self.workers == 1 or len(jobs) <= 1:
            return [solve_job(self.net, self.profile, j, **self.options) for j in jobs]
        return list(self._executor().map(_solve, jobs))

    def close(self) -> None:
        if self._pool is not None:
            self._pool.shutdown(wait=True, cancel_futures=True)
            self._pool = None

    def __enter__(self) -> "LocalRouter":
        return self

    def __exit__(self, *exc) -> None:
        self.close()
