"""Where a command may write: never over one of its inputs, only regular files, ``-`` for stdout.

A command names its inputs and its targets before it does any work; each target
is refused when

* it is, or would replace, one of the inputs (same resolved path, or the same
  file through another name: ``os.path.samefile``);
* it exists and is not a regular file: a folder, a symbolic link, a device such
  as ``/dev/stdout`` or a named pipe (the atomic writer renames a temporary file
  over its target, which would turn any of these into a plain file);
* a part of its folder path is a regular file.

The messages name the option (``--out``) and the path, and say what to give instead.
"""
from __future__ import annotations

import os
import stat
from pathlib import Path
from typing import Iterable

from crewcut.solve.errors import InputError

STDOUT = "-"


def _same(a: Path, b: Path) -> bool:
    try:
        if a.resolve() == b.resolve():
            return True
        return a.exists() and b.exists() and os.path.samefile(a, b)
    except (OSError, ValueError):  # ValueError: a recorded name holding a NUL cannot name a file
        return False


def _blocking_file(path: Path) -> Path | None:
    """The first part of ``path``'s folders that exists as something other than a folder."""
    for parent in reversed(path.parents):
        if parent.exists() and not parent.is_dir():
            return parent
    return None


def check_target(path: str | Path, inputs: Iterable[str | Path | None], option: str = "--out") -> Path:
    """A file target that replaces no input and is a regular file (or does not exist yet)."""
    target = Path(path)
    blocked = _blocking_file(target)
    if blocked is not None:
        raise InputError(f"{option} '{target}' lies below '{blocked}', which is a file, not a folder",
                         "give a path whose folders are folders")
    for item in inputs:
        if item is not None and str(item) != STDOUT and _same(target, Path(item)):
            raise InputError(f"{option} '{target}' is the input '{item}'; crewcut never writes over its input",
                             "give another file name for the output")
    try:
        st = os.lstat(target)
    except FileNotFoundError:
        return target
    except OSError as exc:
        raise InputError(f"{option} '{target}' cannot be examined ({exc.strerror})") from None
    if stat.S_ISDIR(st.st_mode):
        raise InputError(f"{option} '{target}' is a folder; this command writes one file",
                         "give a file name (or '-' for standard output where the command allows it)")
    if not stat.S_ISREG(st.st_mode):
        kind = "a symbolic link" if stat.S_ISLNK(st.st_mode) else "not a regular file (a device or a pipe)"
        raise InputError(f"{option} '{target}' is {kind}; crewcut writes only regular files",
                         "give the name of a new or regular file, or '-' for standard output where allowed")
    return target


def check_folder(path: str | Path, names: Iterable[str], inputs: Iterable[str | Path | None],
                 option: str = "--out") -> Path:
    """An output folder (it may not exist yet) whose files ``names`` replace no input."""
    folder = Path(path)
    names = list(names)
    if folder.exists() and not folder.is_dir():
        what = names[0] if len(names) == 1 else "the outputs"
        raise InputError(f"{option} '{folder}' is a file, not a folder", f"give a folder for {what}")
    inputs = list(inputs)
    for name in names:
        check_target(folder / name, inputs, option)
    return folder
