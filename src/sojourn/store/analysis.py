"""Saving a measurement into its run file (/analysis, attribute "result")."""
from __future__ import annotations

import json
import math
from pathlib import Path

import h5py

from ..errors import RunFileError, one_line
from .reader import RunFile


def _strict(value):
    """JSON data with every non-finite number as null (strict JSON)."""
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, dict):
        return {str(k): _strict(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_strict(v) for v in value]
    return value


def save_analysis(path, report: dict) -> None:
    """Write `report` (a delay report as a dict) as strict JSON into the run
    file's /analysis group; nothing else in the file is touched. The file must
    be a valid, complete or partial, run file not being written."""
    if not isinstance(report, dict):
        raise TypeError("save_analysis needs the report as a dict (DelayReport.to_dict())")
    path = Path(path)
    RunFile(path).close()   # refuses anything that is not a readable run file
    try:
        text = json.dumps(_strict(report), allow_nan=False)
    except (TypeError, ValueError) as exc:
        raise RunFileError(f"{path}: the analysis cannot be stored as JSON ({one_line(exc, 100)})") \
            from None
    try:
        with h5py.File(path, "r+") as f:
            f.require_group("analysis").attrs["result"] = text
    except (OSError, RuntimeError) as exc:
        raise RunFileError(f"{path}: cannot write the analysis into it ({one_line(exc, 120)})") \
            from None
