"""Errors raised for bad input.

Every problem a user can fix (a malformed file, an unknown setting, a street that
traps a vehicle) is raised as :class:`InputError`. The command line turns it into a
message on stderr and exit status 2, never a traceback.

The library names no command-line flag. A message about a parameter of a library
call names that parameter in backquotes, as in "`seed` is -1", and ``param`` says
which parameter the error is about; the command line puts its own flag in their
place ("--seed is -1").
"""
from __future__ import annotations


class InputError(Exception):
    """A problem with the user's input that the user can fix.

    Parameters
    ----------
    message:
        What is wrong, naming the offending file, feature, segment or setting;
        parameters of a library call are named in backquotes ("`k` is 0").
    hint:
        What would fix it.
    param:
        The name of the library parameter the problem is with (``"seed"``,
        ``"depot_lonlat"``), or None when it is about a file or setting.
    """

    def __init__(self, message: str, hint: str | None = None, *, param: str | None = None) -> None:
        super().__init__(message)
        self.message = message
        self.hint = hint
        self.param = param

    def __reduce__(self):  # keep the hint and the parameter when raised in a worker process
        return (_rebuild, (type(self), self.message, self.hint, self.param))

    def __str__(self) -> str:
        if self.hint:
            return f"{self.message}\n  fix: {self.hint}"
        return self.message


def _rebuild(cls, message, hint, param):
    return cls(message, hint, param=param)
