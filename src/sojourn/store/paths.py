"""Where a run writes: the names of its files (result, unfinished run, lock)."""
from __future__ import annotations

from pathlib import Path


def output_path(scenario) -> Path:
    """The run file a scenario writes: record.output (relative to the scenario's
    folder), else ./outputs/NAME.h5."""
    if scenario.record.output:
        path = Path(scenario.record.output)
        if not path.is_absolute() and scenario.source:
            path = Path(scenario.source).parent / path
        return path
    return Path("outputs") / f"{scenario.name}.h5"


def partial_path(path: Path) -> Path:
    """NAME.h5.partial: where a run writes until it is complete."""
    path = Path(path)
    return path.with_name(path.name + ".partial")


def lock_path(path: Path) -> Path:
    """NAME.h5.lock: held by the one process writing NAME.h5."""
    path = Path(path)
    return path.with_name(path.name + ".lock")
