"""Errors raised for bad input.

Every problem a user can fix (a malformed file, an unknown setting, a street that
traps a vehicle) is raised as :class:`InputError`. The command line turns it into a
message on stderr and exit status 2, never a traceback.
"""
from __future__ import annotations


class InputError(Exception):
    """A problem with the user's input that the user can fix.

    Parameters
    ----------
    message:
        What is wrong, naming the offending file, feature, segment or setting.
    hint:
        What would fix it.
    """

    def __init__(self, message: str, hint: str | None = None) -> None:
        super().__init__(message)
        self.message = message
        self.hint = hint

    def __reduce__(self):  # keep the hint when raised in a worker process
        return (type(self), (self.message, self.hint))

    def __str__(self) -> str:
        if self.hint:
            return f"{self.message}\n  fix: {self.hint}"
        return self.message
