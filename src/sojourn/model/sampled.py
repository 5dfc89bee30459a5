"""Potential terms known only by their values: a table of (x, V) and a formula in x.

Their levels, support, breakpoints and jumps are read off their data (a table)
or off a sampling of the grid's span no coarser than a quarter of the grid
spacing (a formula), so a feature the run's grid can see is never missed by
the theory.
"""
from __future__ import annotations

import csv
import hashlib
import math
from pathlib import Path
from typing import ClassVar, Optional

import numpy as np
from pydantic import PrivateAttr, ValidationInfo, field_validator, model_validator

from . import expression as _expr
from .terms import TAIL, Shape, Term

MIN_SAMPLES = 20001
MAX_SAMPLES = 1 << 22
MAX_TABLE_BYTES = 64 << 20    # a table file larger than this is refused before reading
JUMP_RATIO = 20.0             # a step between samples this much larger than its neighbours is a jump


def _departures(x: np.ndarray, v: np.ndarray):
    """(levels, support) of sampled values: where V first leaves its left value
    and last differs from its right value."""
    left, right = float(v[0]), float(v[-1])
    tol = TAIL * max(float(np.max(np.abs(v))), 1e-300)
    moved = np.nonzero(np.abs(v - left) > tol)[0]
    if not moved.size:
        return (left, right), (float(x[0]), float(x[0]))
    differs = np.nonzero(np.abs(v - right) > tol)[0]
    a = float(x[max(moved[0] - 1, 0)])
    b = float(x[min(differs[-1] + 1, len(x) - 1)])
    return (left, right), (a, b)


def _jumps(x: np.ndarray, v: np.ndarray, f=None) -> list:
    """Positions where V jumps: a change between samples far larger than the
    changes on either side (a smooth profile sampled finely changes gradually).
    With the function `f`, each is located by bisection to rounding."""
    dv = np.abs(np.diff(v))
    scale = float(np.max(v) - np.min(v))
    if dv.size < 3 or scale <= 0:
        return []
    neighbours = np.maximum(np.concatenate(([0.0], dv[:-1])), np.concatenate((dv[1:], [0.0])))
    found = []
    for i in np.nonzero((dv > 1e-6 * scale) & (dv > JUMP_RATIO * neighbours))[0]:
        a, b, va = float(x[i]), float(x[i + 1]), float(v[i])
        if f is not None:
            for _ in range(60):
                m = 0.5 * (a + b)
                if m in (a, b):
                    break
                fm = float(f(np.array([m]))[0])
                if abs(fm - va) <= abs(fm - float(v[i + 1])):
                    a = m
                else:
                    b = m
        found.append(0.5 * (a + b))
    return found


class Table(Term):
    """V from two columns x, V — a CSV file (a header line is allowed) or
    inline `data` — linearly interpolated, constant beyond the table's ends.
    A table read from a file keeps its data and the file's SHA-256, so a run
    file can hold the potential it was run with (`inline()`)."""

    kind: ClassVar[str] = "table"
    file: Optional[str] = None
    data: Optional[list[tuple[float, float]]] = None
    sha256: Optional[str] = None
    _x: np.ndarray = PrivateAttr()
    _v: np.ndarray = PrivateAttr()
    _digest: str = PrivateAttr()

    @field_validator("file")
    @classmethod
    def _readable(cls, name, info: ValidationInfo):
        if name is None:
            return name
        base = Path((info.context or {}).get("base_dir", "."))
        path = (base / name) if not Path(name).is_absolute() else Path(name)
        if not path.is_file():
            raise ValueError(f"no such file: {path}")
        size = path.stat().st_size
        if size > MAX_TABLE_BYTES:
            raise ValueError(f"{path} is {size} bytes; a table file may hold at most "
                             f"{MAX_TABLE_BYTES >> 20} MiB")
        return str(path)

    @model_validator(mode="after")
    def _one_source(self):
        if (self.file is None) == (self.data is None):
            raise ValueError("give exactly one of file or data")
        return self

    def model_post_init(self, _context) -> None:
        if self.file is not None:
            raw = Path(self.file).read_bytes()
            self._digest = hashlib.sha256(raw).hexdigest()
            rows = _read_rows(self.file, raw.decode("utf-8", errors="replace"))
        else:
            rows = list(self.data)
            self._digest = self.sha256 or ""
        if len(rows) < 2:
            raise ValueError(f"{self.file or 'data'}: needs at least two rows of x, V")
        data = np.array(rows, dtype=float)
        where = self.file or "data"
        if not np.all(np.isfinite(data)):
            raise ValueError(f"{where}: contains a value that is not finite (nan or inf)")
        if np.any(np.diff(data[:, 0]) <= 0):
            raise ValueError(f"{where}: x must increase strictly from row to row")
        self._x, self._v = data[:, 0], data[:, 1]

    @property
    def digest(self) -> str:
        """SHA-256 of the file the table was read from ('' for inline data given without one)."""
        return self._digest

    def inline(self) -> dict:
        """The table as inline data (with the source file's digest): what a run file stores."""
        return {"data": [[float(a), float(b)] for a, b in zip(self._x, self._v)],
                "sha256": self._digest or None}

    def point(self, x, mass=1.0):
        return np.interp(np.asarray(x, dtype=float), self._x, self._v)

    def levels(self, mass=1.0):
        return float(self._v[0]), float(self._v[-1])

    def support(self):
        """Where V leaves its first value and last differs from its final one
        (not the table's ends: rows may extend far beyond the feature)."""
        return _departures(self._x, self._v)[1]

    def breakpoints(self):
        a, b = self.support()
        return [float(v) for v in self._x if a <= v <= b]


def _read_rows(name: str, text: str) -> list:
    rows = []
    for number, row in enumerate(csv.reader(text.splitlines()), start=1):
        if not row or row[0].lstrip().startswith("#"):
            continue
        try:
            rows.append((float(row[0]), float(row[1])))
        except (ValueError, IndexError):
            if rows or number > 1:
                raise ValueError(f"{name}, row {number}: expected two numbers x, V") from None
    return rows


class Expression(Term):
    """V from a formula in x (numpy functions; checked, never eval'ed). A
    formula in t too is a driven potential: `point` and the theory see its
    value at t = 0, the engine `at_time(x, t)` at every kick."""

    kind: ClassVar[str] = "expression"
    formula: str
    _tree: object = PrivateAttr()

    @field_validator("formula")
    @classmethod
    def _allowed(cls, text):
        _expr.parse(text)
        return text

    def model_post_init(self, _context) -> None:
        self._tree = _expr.parse(self.formula)

    def point(self, x, mass=1.0):
        return _expr.evaluate(self._tree, x)

    @property
    def uses_time(self) -> bool:
        return _expr.uses_time(self._tree)

    def at_time(self, x, t: float) -> np.ndarray:
        """Values at points x and time t."""
        return _expr.evaluate(self._tree, x, t=t)

    @property
    def planar(self) -> bool:
        """True for a formula in y: it depends on more than the normal x."""
        return "y" in _expr.variables(self._tree)

    def plane(self, x, y, mass=1.0):
        """Values at points (x, y) of the plane (broadcast)."""
        return _expr.evaluate(self._tree, x, y)

    def support(self):
        return None  # needs a span: see shape_on

    def shape_on(self, span, spacing, mass=1.0) -> Shape:
        if self.planar or not all(math.isfinite(v) for v in span):
            return Shape((0.0, 0.0), None, [], [])
        samples = int(min(max(math.ceil((span[1] - span[0]) / spacing) + 1, MIN_SAMPLES),
                          MAX_SAMPLES))
        x = np.linspace(span[0], span[1], samples)
        v = self.point(x)
        if not np.all(np.isfinite(v)):
            return Shape((float(v[0]), float(v[-1])), (span[0], span[1]), [], [])
        levels, (a, b) = _departures(x, v)
        jumps = _jumps(x, v, self.point)
        step = float(x[1] - x[0])
        a = next((j for j in jumps if abs(j - a) <= 2 * step), a)   # a jump is the support's end
        b = next((j for j in reversed(jumps) if abs(j - b) <= 2 * step), b)
        support = (a, b)
        return Shape(levels, support, jumps, jumps)

    def describe(self):
        return f"expression({self.formula})"
