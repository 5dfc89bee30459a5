"""The tool's own exceptions: every message is one line a physicist can act on.

The command line turns any `SojournError` into that line and exit code 2.
"""
from __future__ import annotations

from typing import Optional


class SojournError(Exception):
    """Base of the tool's own errors: the message is for the user."""


class ScenarioError(SojournError):
    """A scenario (or sweep) file that cannot be used, with file:line: key: why."""


class SweepError(ScenarioError):
    """A sweep that cannot be used or run as asked (bad file, busy folder, no cluster)."""


class RunFileError(SojournError):
    """A run file that cannot be written or read as asked."""


class TheoryError(SojournError):
    """A stationary-theory request that cannot be answered (with the reason)."""


class MeasureError(SojournError):
    """A run file that cannot be measured as asked."""


class RenderError(SojournError):
    """Render options or outputs that cannot be used as asked."""


class BenchError(SojournError):
    """A benchmark that cannot be run here (e.g. pyFFTW missing)."""


class UsageError(SojournError):
    """Bad command-line arguments."""


class NonFinite(SojournError, ArithmeticError):
    """ψ stopped being finite during a run (the run file is kept, status failed)."""


def one_line(message, limit: Optional[int] = None) -> str:
    """Any message (an exception's, possibly multi-line) as one line, cut at `limit`."""
    text = " ".join(str(message).split())
    if limit is not None and len(text) > limit:
        text = text[:limit] + "..."
    return text
