"""A finding of the guards: one judgement of a scenario before any time is spent."""
from __future__ import annotations

from dataclasses import dataclass
from typing import Optional


@dataclass
class Finding:
    """One result of the guards: level 'error' (refuses a run), 'warning' or 'info'."""

    level: str
    key: str
    message: str
    forceable: bool = False

    line: Optional[int] = None   # the scenario line of `key`, filled in by build

    def __str__(self) -> str:
        return f"{self.key}: {self.message}" if self.key else self.message

    def located(self, source: str) -> str:
        """The finding as an error line: file:line: key: message."""
        return f"{source}:{self.line}: {self}" if self.line else f"{source}: {self}"
