"""The crewcut command line: parse, call, print. Work happens in ``crewcut.solve`` and the rest of ``crewcut``.

Every sub-command lives in ``partition/cli/commands/<name>.py``. Failures are
turned into one message and an exit status by :mod:`crewcut.cli.guard` (2 for bad
input, 3 when the environment fails, 130 on Ctrl-C). The consoles interpret no
markup and drop control characters from everything they print, so no street name,
crew id or path can restyle the terminal. ``-v`` shows the library's log (stages,
timings) on stderr; ``-q`` prints nothing but errors.
"""
from __future__ import annotations

import argparse
import importlib
import os
import sys

import logging

from rich.console import Console

from crewcut.cli.args import glue_negative_lonlat
from crewcut.cli.flags import error_words
from crewcut.cli.guard import guarded
from crewcut.reports.textsafety import terminal_text

from crewcut import __version__

# Sub-commands in the order the help lists them; modules missing here are skipped.
COMMANDS = ("check", "route", "plan", "verify", "rebalance", "table", "sheets", "map", "report", "export", "demo")


class SafeConsole(Console):
    """A rich console that reads no markup and prints no control characters of the user's text.

    Every string on its way to the screen (printed text, table cells, titles,
    captions) passes through :meth:`render_str`; styles are given as rich styles,
    never as markup inside a string.
    """

    def __init__(self, **kw) -> None:
        super().__init__(markup=False, highlight=False, emoji=False, **kw)

    def render_str(self, text: str, **kw):
        kw["markup"] = False
        return super().render_str(terminal_text(text), **kw)


class UI:
    """Where commands print: a rich console on stdout, errors on stderr, ``--quiet`` honoured."""

    def __init__(self, quiet: bool = False) -> None:
        self.quiet = quiet
        # Piped output (logs, files) gets room for the wide tables instead of rich's 80 columns.
        width = None if sys.stdout.isatty() or os.environ.get("COLUMNS") else 160
        self.out = SafeConsole(quiet=quiet, width=width)
        self.err = SafeConsole(stderr=True, soft_wrap=True)

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
    parser.add_argument("-v", "--verbose", action="count", default=0,
                        help="show what the library does, stage by stage, on stderr (-vv: more)")
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
        p.add_argument("-v", "--verbose", action="count", default=argparse.SUPPRESS,
                       help="show what the library does, stage by stage, on stderr (-vv: more)")
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
    _log_to(ui, getattr(args, "verbose", 0))
    return guarded(lambda: _run(args, ui), ui.err, error_words)


def _run(args, ui) -> int:
    from crewcut.cli.commands.common import print_text

    code = args._run(args, ui)
    print_text()  # flushed here: a full device or a closed pipe shows up inside the guard, not at exit
    return code


class _LogHandler(logging.Handler):
    """The library's log records as plain lines on the error console."""

    def __init__(self, console: Console) -> None:
        super().__init__()
        self.console = console

    def emit(self, record: logging.LogRecord) -> None:
        self.console.print(f"{record.levelname.lower()}: {record.getMessage()}", style="dim")


def _log_to(ui: UI, verbose: int) -> None:
    """The library logs under the name ``crewcut``; -q shows errors only, -v info, -vv debug."""
    log = logging.getLogger("crewcut")
    for h in [h for h in log.handlers if isinstance(h, _LogHandler)]:
        log.removeHandler(h)
    log.addHandler(_LogHandler(ui.err))
    log.setLevel(logging.ERROR if ui.quiet else (logging.WARNING, logging.INFO)[min(verbose, 1)] if verbose < 2
                 else logging.DEBUG)
    log.propagate = False


if __name__ == "__main__":
    raise SystemExit(main())
