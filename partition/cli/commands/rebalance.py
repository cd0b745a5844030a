"""``crewcut rebalance PLAN``: a new plan for the day's changes, keeping crews on the streets they know.

Where the new plan goes: ``--out DIR`` writes ``DIR/plan.json`` (even over the
input plan, when DIR is the input's own folder: that has to be asked for).
Without ``--out`` it goes into a new folder next to the input plan,
``rebalanced-1`` (or ``-2``, ``-3``, ... the first name not yet taken), so the
input is never overwritten by default. Nothing is written when the input is bad.
"""
from __future__ import annotations

import argparse
import hashlib
import re
import time
from pathlib import Path

from crewcut.cli.commands.common import add_run_arguments, out_folder, stage_progress

NAME = "rebalance"
HELP = "re-plan for the day's changes (absent or extra crews, closed or new streets, shorter shifts), changing little"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("plan", metavar="PLAN", help="plan.json written by 'crewcut plan' or an earlier rebalance")
    parser.add_argument("--network", metavar="FILE",
                        help="the street network (default: the file the plan records, if it still exists); the "
                             "plan's network, or that network with the --close streets marked closed")
    parser.add_argument("--config", metavar="FILE",
                        help="the work profile used for planning, when it read the network differently from the "
                             "settings recorded in the plan (e.g. its OpenStreetMap road classes)")
    parser.add_argument("--absent", metavar="CREW", action="append", default=[],
                        help="a crew not at work today (repeat for several)")
    parser.add_argument("--add-crew", metavar="ID@LON,LAT", action="append", default=[],
                        help="an extra crew and its depot, e.g. relief@-30.5,45.2 (repeat for several)")
    parser.add_argument("--close", metavar="SEGMENT_ID|FILE", action="append", default=[],
                        help="a street closed today: a segment id (a whole number), a feature id, or a text file "
                             "with one of them per line (repeat for several)")
    parser.add_argument("--open", metavar="FILE",
                        help="new streets (a street network file) joining the network at its intersections")
    parser.add_argument("--shift-limit", metavar="CREW=MINUTES", action="append", default=[],
                        help="today's shift limit of a crew in minutes (repeat for several)")
    parser.add_argument("--day", metavar="LABEL",
                        help="a cycle plan: the day the changes are for; only that day's routes change")
    parser.add_argument("--stability", metavar="W", type=float, default=0.5,
                        help="minutes of the longer shift a balancing move must save for every segment it takes "
                             "from the crew that had it (default 0.5; 0: balance freely)")
    over = parser.add_mutually_exclusive_group()
    over.add_argument("--defer", action="store_true",
                      help="when the work does not fit the shift limits, defer the lowest-priority streets")
    over.add_argument("--overtime", action="store_true",
                      help="when the work does not fit the shift limits, keep it all and report each crew's overtime")
    add_run_arguments(parser)
    parser.add_argument("--out", metavar="DIR",
                        help="folder for the new plan.json (default: a new folder rebalanced-N next to PLAN)")


def run(args, ui) -> int:
    from crewcut.solve.profile import load_profile
    from crewcut.solve.readers import read_network

    from crewcut.solve.profile import Crew

    from crewcut.fleet.changes import Changes
    from crewcut.fleet.replan import replan
    from crewcut.plans.planfile import read_plan, write_plan
    from crewcut.plans.verify import profile_of_plan
    from crewcut.cli.tables import workload_table
    from crewcut.reports.changes import change_report

    plan_path = Path(args.plan)
    plan = read_plan(plan_path)
    raw = plan_path.read_bytes()
    profile = profile_of_plan(plan, load_profile(args.config) if args.config else None)
    out_dir = out_folder(_out_dir(plan_path, args.out),
                         inputs=[plan_path, args.network, args.config, args.open, *args.close])
    net_path = _network_path(plan, plan_path, args.network)
    add = [_add_crew(text) for text in args.add_crew]
    limits = dict(_shift_limit(text) for text in args.shift_limit)
    close = _closures(args.close)
    net = read_network(net_path, profile)
    opened = None
    if args.open:
        opened = read_network(args.open, profile)
    changes = Changes(absent=tuple(args.absent),
                      added_crews=tuple(Crew(cid, float(profile.shift_limit_min), (lon, lat)) for cid, lon, lat in add),
                      closed=tuple(close), opened=opened, shift_limits=limits)
    t0 = time.perf_counter()
    if plan.settings.options.cycle is not None and args.day is None:
        from crewcut.solve.errors import InputError

        raise InputError(f"{plan_path} is a cycle plan ({', '.join(plan.settings.options.cycle.days)}): "
                         "its changes are for one day", "give the day with --day, e.g. --day "
                         + plan.settings.options.cycle.days[0])
    with stage_progress(ui) as progress:
        overflow = "defer" if args.defer else ("overtime" if args.overtime else None)
        parent = {"sha256": hashlib.sha256(raw).hexdigest(), "path": str(plan_path)}
        if args.day is not None:
            from crewcut.cycle.replan_day import replan_day

            new_plan = replan_day(plan, net, changes, args.day, profile=profile, stability=args.stability,
                                  overflow=overflow, seed=args.seed, workers=args.workers,
                                  time_limit_s=args.time_limit, progress=progress, parent=parent,
                                  source=str(net_path), network_name=f"network '{net_path}'")
        else:
            new_plan = replan(
                plan, net, changes, profile=profile, stability=args.stability, overflow=overflow,
                seed=args.seed, workers=args.workers, time_limit_s=args.time_limit, progress=progress,
                parent=parent, source=str(net_path), network_name=f"network '{net_path}'")
    seconds = time.perf_counter() - t0
    rep = change_report(plan, new_plan)
    path = write_plan(new_plan, out_dir / "plan.json")
    ui.out.print(change_table(rep))
    ui.out.print(workload_table(new_plan))
    if rep.over_limit and not (args.defer or args.overtime):
        ui.out.print("the work does not fit the shift limits: --defer lists the lowest-priority streets that can "
                     "wait, --overtime the overtime each crew would need")
    ui.out.print(f"plan written to {path} ({seconds:.1f} s)")
    return 0


def _out_dir(plan_path: Path, out: str | None) -> Path:
    if out:
        return Path(out)
    base = plan_path.resolve().parent
    i = 1
    while (base / f"rebalanced-{i}").exists():
        i += 1
    return base / f"rebalanced-{i}"


def _network_path(plan, plan_path: Path, given: str | None) -> Path:
    from crewcut.solve.errors import InputError

    if given:
        return Path(given)
    src = plan.network.source
    for cand in (Path(src), plan_path.parent / src) if src else ():
        if cand.is_file():
            return cand
    raise InputError(f"{plan_path}: the network file the plan records ({src or 'none'}) is not found",
                     "give the street network with --network FILE")


def _add_crew(text: str) -> tuple[str, float, float]:
    from crewcut.solve.errors import InputError

    from crewcut.cli.args import parse_lonlat

    if "@" not in text:
        raise InputError(f"--add-crew '{text}' is not ID@LON,LAT", "e.g. --add-crew relief@-30.5,45.2")
    cid, where = text.rsplit("@", 1)
    if not cid.strip():
        raise InputError(f"--add-crew '{text}' has no crew id before the @", "e.g. --add-crew relief@-30.5,45.2")
    lon, lat = parse_lonlat(where, what=f"--add-crew {cid}")
    return cid, lon, lat


def _shift_limit(text: str) -> tuple[str, float]:
    from crewcut.solve.errors import InputError

    m = re.fullmatch(r"(.+)=([0-9.]+)", text.strip())
    try:
        value = float(m.group(2)) if m else None
    except ValueError:
        value = None
    if not m or value is None:
        raise InputError(f"--shift-limit '{text}' is not CREW=MINUTES", "e.g. --shift-limit north=360")
    if not 0 < value <= 24 * 60:
        raise InputError(f"--shift-limit '{text}': {value:g} minutes is not a shift",
                         "give minutes above 0 and at most 1440 (a day), e.g. --shift-limit north=360")
    return m.group(1), value


def _closures(items: list[str]) -> list[str]:
    """Each --close is an id, or a file of ids (one per line; blank lines and '#' comments skipped)."""
    from crewcut.solve.errors import InputError

    out: list[str] = []
    for item in items:
        path = Path(item)
        if path.is_file():
            try:
                text = path.read_text(encoding="utf-8")
            except (OSError, UnicodeDecodeError) as exc:
                raise InputError(f"--close {item}: cannot read the file ({exc})") from None
            ids = [ln.split("#", 1)[0].strip() for ln in text.splitlines()]
            ids = [i for i in ids if i]
            if not ids:
                raise InputError(f"--close {item}: the file lists no segment", "one segment or feature id per line")
            out.extend(ids)
        else:
            out.append(item)
    return out


def change_table(rep):
    """The change report as a rich Table (units in the headers, a totals row, the overall figures below)."""
    from rich.table import Table
    from rich.text import Text

    t = Table(title="Changes per crew", header_style="bold", caption_justify="left")
    cols = (("crew", "left"), ("status", "left"), ("gained (segments)", "right"), ("gained (km)", "right"),
            ("lost (segments)", "right"), ("lost (km)", "right"), ("old shift (h)", "right"),
            ("new shift (h)", "right"), ("change (h)", "right"), ("limit today (h)", "right"),
            ("route sheet", "left"))
    for name, just in cols:
        t.add_column(name, justify=just)
    rows = rep.crews
    for i, r in enumerate(rows):
        over = r.new_limit_min is not None and r.new_shift_min > r.new_limit_min + 1e-9
        t.add_row(*[Text(x) for x in (
            r.crew, r.status, str(r.gained), f"{r.gained_km:.2f}", str(r.lost), f"{r.lost_km:.2f}",
            f"{r.old_shift_min / 60:.2f}", f"{r.new_shift_min / 60:.2f}",
            f"{(r.new_shift_min - r.old_shift_min) / 60:+.2f}",
            "" if r.new_limit_min is None else f"{r.new_limit_min / 60:.2f}" + (" !" if over else ""),
            "new" if r.route_changed else ("none" if r.status == "absent" else "unchanged"))],
            style="bold red" if over else None, end_section=i == len(rows) - 1)
    tot_old = sum(r.old_shift_min for r in rows)
    tot_new = sum(r.new_shift_min for r in rows)
    t.add_row(*[Text(x) for x in (
        "all crews", "", str(sum(r.gained for r in rows)), f"{sum(r.gained_km for r in rows):.2f}",
        str(sum(r.lost for r in rows)), f"{sum(r.lost_km for r in rows):.2f}", f"{tot_old / 60:.2f}",
        f"{tot_new / 60:.2f}", f"{(tot_new - tot_old) / 60:+.2f}",
        f"{sum(r.new_limit_min or 0 for r in rows) / 60:.2f}", f"{len(rep.routes_changed)} new")],
        style="bold")
    from crewcut.reports.changes import change_lines

    t.caption = "\n".join(change_lines(rep))
    return t
