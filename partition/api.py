"""crewcut for Python users: read streets, plan a fleet, replan a day, verify, write the reports.

Every function here is a thin, documented door into the library; the work is done
in :mod:`crewcut.solve` (one crew's route), :mod:`crewcut.fleet` (territories,
balancing, replanning), :mod:`crewcut.plans` (the plan file and its checks) and
:mod:`crewcut.reports` (tables, sheets, maps, exports). Nothing here prints;
every result is a typed value (:class:`~crewcut.plans.model.Plan` and friends) or
the text of an output file; JSON exists only inside :func:`read_plan` and
:func:`write_plan`. Bad input raises :class:`~crewcut.solve.errors.InputError`
naming the parameter, feature or setting at fault.

Examples
--------
A fleet plan for a small invented town, a replan with one crew absent, and
their workload tables:

>>> import tempfile, crewcut
>>> folder = tempfile.mkdtemp()
>>> town, config = crewcut.write_demo_town(folder, segments=300, seed=1)
>>> profile = crewcut.load_profile(config)
>>> net = crewcut.read_network(town, profile)
>>> plan = crewcut.plan(net, profile=profile, k=3, depot=(-30.5, 45.2), seed=0, workers=1)
>>> [c.id for c in plan.crews]
['crew-1', 'crew-2', 'crew-3']
>>> crewcut.verify(plan, net, profile)
[]
>>> day = crewcut.replan(plan, crewcut.Changes(absent=("crew-2",)), net, profile=profile, workers=1)
>>> [c.id for c in day.crews], day.history.generation
(['crew-1', 'crew-3'], 1)
>>> print(crewcut.table(day, "csv").splitlines()[0])
crew,depot,segments (count),service (km),...
"""
from __future__ import annotations

from pathlib import Path
from typing import Sequence

from crewcut.solve.network.model import Network
from crewcut.solve.profile import Crew, Profile
from crewcut.solve.errors import InputError

from crewcut.fleet.changes import Changes
from crewcut.fleet.progress import ProgressFn
from crewcut.plans.model import Plan

__all__ = ["Changes", "load_profile", "plan", "read_network", "read_plan", "replan", "report", "sheets",
           "table", "territory_map", "route_map", "export", "verify", "write_demo_town", "write_plan",
           "write_text"]


def load_profile(path: str | Path | None = None) -> Profile:
    """A work profile from a TOML file, or the shipped curb-sweeping profile when ``path`` is None.

    Every setting is validated up front (unknown keys, types and ranges), with a
    message naming the setting.
    """
    from crewcut.solve.profile import load_profile as _load

    return _load(path)


def read_network(path: str | Path, profile: Profile | None = None) -> Network:
    """A street network from GeoJSON, OpenStreetMap (.osm, .osm.pbf) or a CSV edge list, repaired.

    ``profile`` (default: the shipped curb-sweeping profile) decides which streets need
    service and how topology is repaired. The file is only read, never written.
    """
    from crewcut.solve.readers import read_network as _read

    return _read(path, profile or load_profile())


def plan(network: Network, crews: Sequence[Crew] | None = None, profile: Profile | None = None, *,
         k: int | None = None, depot: tuple[float, float] | None = None, seed: int = 0,
         workers: int | None = None, time_limit_s: float | None = None,
         progress: ProgressFn | None = None, source: str = "", area=None, unservable: str | None = None,
         cycle=None) -> Plan:
    """Balanced connected territories, one per crew, each with a closed route from its depot.

    Parameters
    ----------
    network:
        The streets (:func:`read_network`).
    crews:
        The crews (default: the profile's ``[[crews]]``); a depot given as lon/lat is
        snapped to the nearest usable street.
    profile:
        The work profile (default: the shipped curb-sweeping profile).
    k, depot:
        Instead of ``crews``: ``k`` identical crews sharing one depot at ``depot`` (lon, lat).
    seed, workers, time_limit_s, progress:
        As for :func:`crewcut.fleet.planner.plan_fleet`; the same input and seed give the same plan.
    source:
        The network file's name, recorded in the plan.
    area, unservable:
        The service area (:func:`crewcut.solve.readers.area.read_area`; default: the
        profile's ``service_area``) and what to do with streets no closed route from a
        depot can serve: ``"leave_out"`` (listed in ``plan.left_out``) or ``"refuse"``.
    cycle:
        A sweeping cycle (:func:`crewcut.solve.calendar.cycle.make_cycle`, default: the
        profile's ``[cycle]``, else none): one route per crew and working day, posted days and
        windows kept (:func:`crewcut.cycle.planner.plan_cycle`).

    The method (cluster first, route second, boundary balancing) and the lower bound
    are described in :mod:`crewcut.fleet.planner`; the plan states its gap.
    """
    import dataclasses

    from crewcut.fleet.crews import resolve_crews
    from crewcut.fleet.planner import plan_fleet

    profile = profile or load_profile()
    if crews is not None:
        profile = dataclasses.replace(profile, crews=tuple(crews))
    chosen = resolve_crews(network, profile, k=k, depot_lonlat=depot)
    cycle = cycle if cycle is not None else profile.cycle
    if cycle is not None:
        from crewcut.cycle.planner import plan_cycle

        return plan_cycle(network, profile, chosen, cycle, seed=seed, workers=workers, time_limit_s=time_limit_s,
                          progress=progress, source=source, area=area, unservable=unservable)
    return plan_fleet(network, profile, chosen, seed=seed, workers=workers, time_limit_s=time_limit_s,
                      progress=progress, source=source, area=area, unservable=unservable)


def replan(parent: Plan, changes: Changes, network: Network, *, profile: Profile | None = None,
           stability: float = 0.5, overflow: str | None = None, seed: int = 0, workers: int | None = None,
           progress: ProgressFn | None = None, day: str | None = None) -> Plan:
    """A new plan for the day's ``changes`` (absent or extra crews, closed or new streets, shorter shifts).

    Streets change hands as little as the shift limits allow (``stability``: minutes a
    move must save per street it takes from its crew); ``overflow`` is ``"defer"`` or
    ``"overtime"`` for work that does not fit. See :func:`crewcut.fleet.replan.replan`.
    A cycle plan changes one ``day`` at a time (:func:`crewcut.cycle.replan_day.replan_day`).
    """
    from crewcut.fleet.replan import replan as _replan

    if day is not None or parent.settings.options.cycle is not None:
        from crewcut.cycle.replan_day import replan_day

        if day is None:
            raise InputError("the plan is a cycle plan: its changes are for one day", "give `day`", param="day")
        return replan_day(parent, network, changes, day, profile=profile, stability=stability, overflow=overflow,
                          seed=seed, workers=workers, progress=progress)

    return _replan(parent, network, changes, profile=profile, stability=stability, overflow=overflow, seed=seed,
                   workers=workers, progress=progress)


def read_plan(path: str | Path) -> Plan:
    """A plan file read and checked (a damaged file is refused with the first bad record named)."""
    from crewcut.plans.planfile import read_plan as _read

    return _read(path)


def write_plan(plan: Plan, path: str | Path) -> Path:
    """Write ``plan`` atomically (all or nothing); the same plan always gives the same bytes."""
    from crewcut.plans.planfile import write_plan as _write

    return _write(plan, path)


def verify(plan: Plan, network: Network, config: Profile | None = None) -> list:
    """Every violation of the plan's invariants, checked independently of the planner (empty: valid).

    ``network`` and ``config`` (the work profile with its crews, when given) are the
    truth: the plan's recorded profile, geometry, names, minutes, turns, depots, limits,
    summary and lower bound are compared with them or re-derived. Without ``config`` the
    plan's own recorded settings are used. See :func:`crewcut.plans.verify.verify_plan`.
    """
    from crewcut.plans.verify import verify_plan

    return list(verify_plan(plan, network, config, first_only=False).violations)


def table(plan: Plan, fmt: str = "csv") -> str:
    """The per-crew workload table as ``csv``, ``md`` (Markdown) or ``json`` text, with totals."""
    from crewcut.reports.workload import workload_text

    return workload_text(plan, fmt)


def sheets(plan: Plan, fmt: str = "txt", crews: Sequence[str] | None = None) -> dict[str, str]:
    """Route sheets as {file name: text}: ``txt`` or ``md`` (one file per crew) or ``html`` (one document)."""
    from crewcut.plans.view import view
    from crewcut.reports.sheets import sheet_files

    pv = view(plan)
    return dict(sheet_files(pv, pv.select(list(crews or [])), fmt))


def territory_map(plan: Plan) -> str:
    """An SVG map of the crews' territories."""
    from crewcut.reports.svgmap import territory_svg

    return territory_svg(plan)


def route_map(plan: Plan, crew: str) -> str:
    """An SVG map of one crew's route, with driving arrows."""
    from crewcut.plans.view import view
    from crewcut.reports.svgmap import route_svg

    pv = view(plan)
    return route_svg(pv, pv.select([crew])[0])


def report(plan: Plan) -> str:
    """One self-contained offline HTML report: the table, the maps and every route sheet."""
    from crewcut.reports.htmlreport import report_html

    return report_html(plan)


def export(plan: Plan, fmt: str) -> str:
    """The plan for other programs: ``geojson`` (RFC 7946), ``gpx`` (GPX 1.1 tracks) or ``csv``."""
    from crewcut.reports.exports import export as _export

    return _export(plan, fmt)


def write_text(path: str | Path, text: str) -> Path:
    """Write one output file atomically (a temporary file in the same folder, fsync, rename)."""
    from crewcut.files import atomic_write

    return atomic_write(path, text)


def write_demo_town(folder: str | Path, segments: int = 2_000, seed: int = 0) -> tuple[Path, Path]:
    """Write the invented demo town Tallowmere (GeoJSON) and its config (TOML) into ``folder``."""
    from crewcut.demo.towngen import check_town_args, write_town_and_config

    check_town_args(segments, seed)
    return write_town_and_config(folder, segments, seed)
