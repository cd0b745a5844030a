"""The crewcut command line: parse, call, print. Work happens in ``solve`` and ``partition``.

Every sub-command lives in ``partition/cli/commands/<name>.py``. Bad input raises
:class:`crewcut.solve.errors.InputError`; it is printed on stderr and the exit status is 2.
"""
from __future__ import annotations

import argparse
import importlib
import os
import sys

from rich.console import Console
from rich.markup import escape

from crewcut.solve.errors import InputError

from crewcut.cli.args import glue_negative_lonlat
from crewcut.cli.flags import error_words

from crewcut import __version__

# Sub-commands in the order the help lists them; modules missing here are skipped.
COMMANDS = ("check", "route", "plan", "verify", "rebalance", "table", "sheets", "map", "report", "export", "demo")


class UI:
    """Where commands print: a rich console on stdout, errors on stderr, ``--quiet`` honoured."""

    def __init__(self, quiet: bool = False) -> None:
        self.quiet = quiet
        # Piped output (logs, files) gets room for the wide tables instead of rich's 80 columns.
        width = None if sys.stdout.isatty() or os.environ.get("COLUMNS") else 160
        self.out = Console(quiet=quiet, highlight=False, width=width)
        self.err = Console(stderr=True, highlight=False, soft_wrap=True)

    def progress(self, *columns, **kw):
        from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn

        cols = columns or (TextColumn("{task.description}"), BarColumn(), TextColumn("{task.completed}/{task.total}"),
                           TimeElapsedColumn())
        return Progress(*cols, console=self.err, disable=self.quiet or not self.err.is_terminal, transient=True, **kw)


class _Parser(argparse.ArgumentParser):
    def error(self, message: str) -> None:  # usage errors: exit 2 with a clear message, like bad input
        self.print_usage(sys.stderr)
        sys.stderr.write(f"crewcut: error: {message}\n")
        raise SystemExit(2)


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog="crewcut", description="Plan street-coverage work for a fleet of crews.")
    parser.add_argument("--version", action="version", version=f"crewcut {__version__}")
    parser.add_argument("-q", "--quiet", action="store_true", help="print nothing but errors")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    for name in COMMANDS:
        try:
            mod = importlib.import_module(f"crewcut.cli.commands.{name}")
        except ModuleNotFoundError as exc:
            if exc.name == f"crewcut.cli.commands.{name}":
                continue
            raise
        p = sub.add_parser(mod.NAME, help=mod.HELP, description=mod.HELP)
        p.add_argument("-q", "--quiet", action="store_true", default=argparse.SUPPRESS,
                       help="print nothing but errors")
        mod.add_arguments(p)
        p.set_defaults(_run=mod.run)
    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(glue_negative_lonlat(sys.argv[1:] if argv is None else list(argv)))
    if not getattr(args, "_run", None):
        parser.print_help()
        return 2
    ui = UI(quiet=getattr(args, "quiet", False))
    try:
        return int(args._run(args, ui) or 0)
    except InputError as exc:
        message, hint = error_words(exc)
        ui.err.print(f"[bold red]error:[/] {escape(message)}", highlight=False)
        if hint:
            ui.err.print(f"  fix: {hint}", markup=False, highlight=False)
        return 2
    except KeyboardInterrupt:
        ui.err.print("interrupted; nothing was written")
        return 130


if __name__ == "__main__":
    raise SystemExit(main())
