"""``crewcut demo [--out DIR]``: write the invented town of Tallowmere and run every stage on it.

The stages are ordinary sub-commands, called with the same words a person would
type (``STAGES`` below), so the demo shows exactly what the command line does.
A stage whose sub-command or library is not part of this install yet is skipped
with a note; adding a stage is one line in ``STAGES``.
"""
from __future__ import annotations

import argparse
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

from rich.table import Table

from crewcut.solve.errors import InputError

from crewcut.cli.commands.common import line, styled

NAME = "demo"
HELP = "write an invented demo town (Tallowmere) and its config, then check, route, plan and report on it"


@dataclass(frozen=True)
class Stage:
    """One demo step: the command-line words to run, and the files it needs first."""

    name: str
    argv: Callable[[dict], list[str]]  # from the demo's paths to command-line words
    needs: tuple[str, ...] = ()  # keys of paths that must exist before the stage runs
    makes: tuple[str, ...] = ()  # keys of paths the stage writes (listed at the end)


def _paths(out: Path) -> dict[str, str]:
    return {
        "dir": str(out),
        "town": str(out / "tallowmere.geojson"),
        "config": str(out / "tallowmere.toml"),
        "route_dir": str(out / "one-crew"),
        "route_plan": str(out / "one-crew" / "plan.json"),
        "plan_dir": str(out / "fleet"),
        "plan": str(out / "fleet" / "plan.json"),
        "sheets": str(out / "fleet" / "sheets"),
        "map": str(out / "fleet" / "map.svg"),
        "report": str(out / "fleet" / "report.html"),
        "geojson": str(out / "fleet" / "routes.geojson"),
        "gpx": str(out / "fleet" / "routes.gpx"),
        "cycle_dir": str(out / "week"),
        "cycle_plan": str(out / "week" / "plan.json"),
        "cycle_map": str(out / "week" / "days.svg"),
        "cycle_sheets": str(out / "week" / "sheets"),
    }


# The demo, in order. Each line is what a planner would type after 'crewcut'.
STAGES: tuple[Stage, ...] = (
    Stage("check", lambda p: ["check", p["town"], "--config", p["config"]], ("town", "config")),
    Stage("route", lambda p: ["route", p["town"], "--config", p["config"], "--out", p["route_dir"]],
          ("town", "config"), ("route_plan",)),
    Stage("plan", lambda p: ["plan", p["town"], "--config", p["config"], "--out", p["plan_dir"]],
          ("town", "config"), ("plan",)),
    Stage("verify", lambda p: ["verify", p["plan"], p["town"], "--config", p["config"]], ("plan",)),
    Stage("table", lambda p: ["table", p["plan"]], ("plan",)),
    Stage("sheets", lambda p: ["sheets", p["plan"], "--out", p["sheets"]], ("plan",), ("sheets",)),
    Stage("map", lambda p: ["map", p["plan"], "--out", p["map"]], ("plan",), ("map",)),
    Stage("report", lambda p: ["report", p["plan"], "--out", p["report"]], ("plan",), ("report",)),
    Stage("export", lambda p: ["export", p["plan"], "--format", "geojson", "--out", p["geojson"]],
          ("plan",), ("geojson",)),
    Stage("export", lambda p: ["export", p["plan"], "--format", "gpx", "--out", p["gpx"]],
          ("plan",), ("gpx",)),
    # a weekly sweeping cycle: three crews from the first yard, one route per crew and weekday
    Stage("plan", lambda p: ["plan", p["town"], "--config", p["config"], "--crews", "3", "--days",
                             "mon,tue,wed,thu,fri", "--shift-start", "06:00", "--out", p["cycle_dir"]],
          ("town", "config"), ("cycle_plan",)),
    Stage("verify", lambda p: ["verify", p["cycle_plan"], p["town"], "--config", p["config"]], ("cycle_plan",)),
    Stage("map", lambda p: ["map", p["cycle_plan"], "--by-day", "--out", p["cycle_map"]], ("cycle_plan",),
          ("cycle_map",)),
    Stage("sheets", lambda p: ["sheets", p["cycle_plan"], "--out", p["cycle_sheets"]], ("cycle_plan",),
          ("cycle_sheets",)),
)


def add_arguments(parser: argparse.ArgumentParser) -> None:
    from crewcut.demo.towngen import EXAMPLE_SEGMENTS, MAX_SEGMENTS, MIN_SEGMENTS

    parser.add_argument("--out", metavar="DIR", default="crewcut-demo",
                        help="folder for the town, its config and every output (default ./crewcut-demo)")
    parser.add_argument("--segments", metavar="N", type=int, default=EXAMPLE_SEGMENTS,
                        help=f"size of the town in street segments, {MIN_SEGMENTS:,} to {MAX_SEGMENTS:,} "
                             f"(default {EXAMPLE_SEGMENTS:,}, the town in examples/)")
    parser.add_argument("--seed", metavar="N", type=int, default=0,
                        help="seed of the town's layout (default 0); same seed, same town")
    parser.add_argument("--only-town", action="store_true",
                        help="write the town and its config, run nothing")


def run(args, ui) -> int:
    from crewcut.demo import towngen

    out = Path(args.out)
    if out.exists() and not out.is_dir():
        raise InputError(f"--out '{out}' is a file, not a folder", "give a folder for the demo's files")
    towngen.check_town_args(args.segments, args.seed)  # clear message before any work
    t0 = time.perf_counter()
    town_path, config_path = towngen.write_town_and_config(out, args.segments, args.seed)
    ui.out.print(line((towngen.TOWN_NAME, "bold"), f" (an invented town, seed {args.seed}): {town_path} and "
                      f"{config_path} written in {time.perf_counter() - t0:.1f} s"), soft_wrap=True)
    paths = _paths(out)
    done: list[tuple[str, str, float]] = []
    if not getattr(args, "only_town", False):
        for stage in STAGES:
            status, seconds = _run_stage(stage, paths, ui)
            done.append((stage.name, status, seconds))
            if status.startswith("failed"):
                _summary(ui, done, paths)
                return 1
    _summary(ui, done, paths)
    return 0


def _run_stage(stage: Stage, paths: dict[str, str], ui) -> tuple[str, float]:
    """Run one stage through the real command line; returns (status, seconds)."""
    from crewcut.cli.main import build_parser

    missing = [k for k in stage.needs if not Path(paths[k]).exists()]
    if missing:
        return f"skipped: no {Path(paths[missing[0]]).name} (an earlier stage did not run)", 0.0
    parser = build_parser()
    sub = next(a for a in parser._actions if isinstance(a, argparse._SubParsersAction))
    if stage.name not in sub.choices:
        return "skipped: not in this version yet", 0.0
    argv = stage.argv(paths)
    ui.out.rule(f"crewcut {' '.join(argv)}", style="dim")
    try:
        args = parser.parse_args(argv)
    except SystemExit:
        return (f"failed: the demo's words for '{stage.name}' no longer match the command "
                "(update STAGES in partition/commands/demo.py)"), 0.0
    t0 = time.perf_counter()
    try:
        code = int(args._run(args, ui) or 0)
    except ModuleNotFoundError as exc:  # a library part another helper has not landed yet
        if exc.name and exc.name.split(".")[0] == "crewcut":
            return f"skipped: needs {exc.name}, not in this version yet", time.perf_counter() - t0
        raise
    except InputError as exc:  # the demo's own input is generated: this is a bug, say where
        raise InputError(f"demo stage '{' '.join(argv[:1])}': {exc.message}", exc.hint, param=exc.param) from None
    seconds = time.perf_counter() - t0
    return ("done" if code == 0 else f"failed: exit status {code}"), seconds


def _summary(ui, done: list[tuple[str, str, float]], paths: dict[str, str]) -> None:
    if done:
        t = Table(title="Demo stages", title_justify="left")
        t.add_column("stage")
        t.add_column("result")
        t.add_column("time (s)", justify="right")
        for name, status, seconds in done:
            t.add_row(name, status, f"{seconds:.1f}")
        t.add_section()
        t.add_row(styled("total", "bold"), "", f"{sum(s for _, _, s in done):.1f}")
        ui.out.print(t)
    written = [paths["town"], paths["config"]] + [paths[k] for s in STAGES for k in s.makes]
    ui.out.print(styled("outputs:", "bold"))
    for p in dict.fromkeys(written):
        if Path(p).exists():
            ui.out.print(f"  {p}", soft_wrap=True)  # whole paths, easy to copy
