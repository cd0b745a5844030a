"""The progress callback every long run takes: ``progress(description, done, total)``.

The description's text before its first colon names the stage ("balance: ...");
``done`` and ``total`` measure how far that stage has come. The library only
calls it; drawing bars is the command line's business.
"""
from __future__ import annotations

from typing import Callable

ProgressFn = Callable[[str, float, float], None]

__all__ = ["ProgressFn"]
