"""The one top-level guard of the command line: every failure becomes a message and an exit status.

Exit statuses (README, "Exit status"):

==== =====================================================================
0    done
1    a demo stage failed (the demo says which)
2    bad input: a file, feature, segment or setting the user can fix
3    the environment failed: a full disk, a file-size limit, a permission,
     a read-only or missing device; the message names the path and the cause
130  interrupted (Ctrl-C); nothing half-written is left behind
141  the output pipe was closed (``crewcut table plan.json | head``); quiet
==== =====================================================================

No traceback reaches the user for any of these. An exception that is none of
them is a bug in crewcut and is left to Python, which prints its traceback.
"""
from __future__ import annotations

import errno
import os
import sys
from typing import Callable

from crewcut.solve.errors import InputError

from crewcut.reports.textsafety import terminal_text

EXIT_INPUT = 2
EXIT_ENVIRONMENT = 3
EXIT_INTERRUPTED = 130
EXIT_PIPE = 141

_ENV_HINTS = {
    errno.ENOSPC: "free some space on that disk, or write somewhere else",
    errno.EFBIG: "the file would pass a file-size limit; write somewhere else or raise the limit (ulimit -f)",
    errno.EACCES: "check the permissions of that file and its folder, or write somewhere else",
    errno.EPERM: "check the permissions of that file and its folder, or write somewhere else",
    errno.EROFS: "that file system is read-only; write somewhere else",
    errno.ENOENT: "check that the path exists",
    errno.ENOTDIR: "a part of the path is a file, not a folder",
    errno.EISDIR: "the path is a folder; give a file",
    errno.ENAMETOOLONG: "give a shorter path",
}


def say_error(console, message: str, hint: str = "") -> None:
    """``error: message`` and ``  fix: hint`` on ``console``, with no markup and no control characters."""
    console.print("error: " + terminal_text(message), markup=False, highlight=False, style="bold red")
    if hint:
        console.print("  fix: " + terminal_text(hint), markup=False, highlight=False)


def os_error_message(exc: OSError) -> tuple[str, str]:
    """A located message and a fix for an operating-system error."""
    cause = exc.strerror or type(exc).__name__
    where = "standard output" if exc.filename == "standard output" else (
        f"'{exc.filename}'" if exc.filename is not None else "a file")
    return f"{where}: {cause}", _ENV_HINTS.get(exc.errno or -1, "")


def _quiet_stdout() -> None:
    # Python flushes stdout at exit: point it at /dev/null so that the closed pipe raises nothing more.
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
    except (OSError, ValueError, AttributeError):
        pass


def guarded(work: Callable[[], int | None], err_console,
            words: Callable[[InputError], tuple[str, str | None]] | None = None) -> int:
    """Run ``work`` and map every expected failure to its exit status, printing one message on ``err_console``.

    ``words`` turns an :class:`InputError` into the message and hint the user reads (the command line
    names the flag behind a library parameter).
    """
    try:
        return int(work() or 0)
    except InputError as exc:
        message, hint = words(exc) if words else (exc.message, exc.hint)
        say_error(err_console, message, hint or "")
        return EXIT_INPUT
    except KeyboardInterrupt:
        err_console.print("interrupted; nothing half-written was left behind", markup=False, highlight=False)
        return EXIT_INTERRUPTED
    except BrokenPipeError:
        _quiet_stdout()
        return EXIT_PIPE
    except RecursionError:
        say_error(err_console, "an input is nested too deeply to be read",
                  "check that each file given is the kind of file the command expects")
        return EXIT_INPUT
    except OSError as exc:
        message, hint = os_error_message(exc)
        say_error(err_console, message, hint)
        return EXIT_ENVIRONMENT
    except MemoryError:
        say_error(err_console, "out of memory", "close other programs, or plan a smaller area at a time")
        return EXIT_ENVIRONMENT
