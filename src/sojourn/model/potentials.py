"""Catalog of potential terms. A scenario's potential is the sum of its terms.

Each term is a small pydantic model (its fields are the scenario keys) that
knows three things:

- ``point(x, mass)``: its exact values at points x;
- ``cell(x, dx, mass)``: its values on a grid; terms with jumps return the
  average over each grid cell [x-dx/2, x+dx/2], so a jump anywhere inside a
  cell keeps its true position to first order (PHYSICS §3);
- its shape for the stationary theory: asymptotic ``levels``, the ``support``
  outside which it is constant, ``breakpoints`` where it jumps or kinks,
  whether it is ``piecewise_constant``, and ``deltas`` (zero-width terms).

To add a shape: write one model here with those members, add it to ``TERMS``,
and test it. Nothing else needs to change.
"""
from __future__ import annotations

import csv
import math
from pathlib import Path
from typing import ClassVar, Optional

import numpy as np
from pydantic import BaseModel, ConfigDict, Field, PrivateAttr, ValidationInfo, field_validator

from . import expression as _expr

TAIL = 1e-12  # a smooth tail counts as zero below this fraction of the term's height


class Term(BaseModel):
    """Base of all potential terms."""

    model_config = ConfigDict(extra="forbid", frozen=True, allow_inf_nan=False)
    kind: ClassVar[str] = ""
    piecewise_constant: ClassVar[bool] = False

    def point(self, x, mass: float = 1.0) -> np.ndarray:
        raise NotImplementedError

    def cell(self, x, dx: float, mass: float = 1.0) -> np.ndarray:
        """Values on a grid of spacing dx (default: point values)."""
        return self.point(x, mass)

    def levels(self, mass: float = 1.0) -> tuple[float, float]:
        """Values far to the left and far to the right."""
        return 0.0, 0.0

    def support(self) -> Optional[tuple[float, float]]:
        """Interval outside which the term equals its levels; None if unbounded."""
        raise NotImplementedError

    def breakpoints(self) -> list[float]:
        """Positions of jumps or kinks."""
        return []

    def deltas(self) -> list[tuple[float, float]]:
        """Zero-width terms as (position, strength)."""
        return []

    def describe(self) -> str:
        fields = ", ".join(f"{k}={v}" for k, v in self.model_dump().items())
        return f"{self.kind}({fields})"


class _Antiderivative(Term):
    """Terms with jumps: grid values are cell averages of the exact profile,
    computed from an antiderivative F: (F(x+dx/2) - F(x-dx/2)) / dx."""

    def antiderivative(self, x) -> np.ndarray:
        raise NotImplementedError

    def cell(self, x, dx, mass=1.0):
        x = np.asarray(x, dtype=float)
        return (self.antiderivative(x + dx / 2) - self.antiderivative(x - dx / 2)) / dx


class Step(_Antiderivative):
    """V = height for x > at, 0 left of it."""

    kind: ClassVar[str] = "step"
    piecewise_constant: ClassVar[bool] = True
    at: float = 0.0
    height: float

    def point(self, x, mass=1.0):
        return np.where(np.asarray(x, dtype=float) > self.at, self.height, 0.0)

    def antiderivative(self, x):
        return self.height * np.maximum(x - self.at, 0.0)

    def levels(self, mass=1.0):
        return 0.0, self.height

    def support(self):
        return self.at, self.at

    def breakpoints(self):
        return [self.at]


class _Interval(_Antiderivative):
    start: float
    end: float

    @field_validator("end")
    @classmethod
    def _after_start(cls, end, info: ValidationInfo):
        start = info.data.get("start")
        if start is not None and end <= start:
            raise ValueError(f"must be greater than start ({start})")
        return end

    def support(self):
        return self.start, self.end

    def breakpoints(self):
        return [self.start, self.end]


class Barrier(_Interval):
    """V = height on start < x < end."""

    kind: ClassVar[str] = "barrier"
    piecewise_constant: ClassVar[bool] = True
    height: float

    def point(self, x, mass=1.0):
        x = np.asarray(x, dtype=float)
        return np.where((x > self.start) & (x < self.end), self.height, 0.0)

    def antiderivative(self, x):
        return self.height * (np.clip(x, self.start, self.end) - self.start)


class Well(_Interval):
    """V = -depth on start < x < end."""

    kind: ClassVar[str] = "well"
    piecewise_constant: ClassVar[bool] = True
    depth: float

    def point(self, x, mass=1.0):
        x = np.asarray(x, dtype=float)
        return np.where((x > self.start) & (x < self.end), -self.depth, 0.0)

    def antiderivative(self, x):
        return -self.depth * (np.clip(x, self.start, self.end) - self.start)


class Ramp(_Interval):
    """A uniform field: V rises linearly by `height` from start to end and
    stays at `height` beyond."""

    kind: ClassVar[str] = "ramp"
    height: float

    def point(self, x, mass=1.0):
        x = np.asarray(x, dtype=float)
        return self.height * (np.clip(x, self.start, self.end) - self.start) / (self.end - self.start)

    def antiderivative(self, x):
        length = self.end - self.start
        inside = np.clip(x, self.start, self.end) - self.start
        return self.height * (inside ** 2 / (2 * length) + np.maximum(x - self.end, 0.0))

    def levels(self, mass=1.0):
        return 0.0, self.height


class DeltaLike(Term):
    """A narrow term of strength α = ∫V dx (energy·length). Without `width` it
    is a true delta for the theory and one grid cell wide on the grid (shared
    by the two cells nearest to `at`, so its centre stays at `at`); with
    `width` it is a rectangle of height α/width centred at `at`."""

    kind: ClassVar[str] = "delta_like"
    piecewise_constant: ClassVar[bool] = True
    at: float = 0.0
    strength: float
    width: Optional[float] = Field(default=None, gt=0)

    def _edges(self, dx: float = 0.0):
        w = self.width if self.width is not None else dx
        return self.at - w / 2, self.at + w / 2

    def point(self, x, mass=1.0):
        x = np.asarray(x, dtype=float)
        if self.width is None:
            return np.zeros_like(x)
        a, b = self._edges()
        return np.where((x > a) & (x < b), self.strength / self.width, 0.0)

    def cell(self, x, dx, mass=1.0):
        a, b = self._edges(dx)
        x = np.asarray(x, dtype=float)
        overlap = np.clip(np.minimum(x + dx / 2, b) - np.maximum(x - dx / 2, a), 0.0, None)
        return self.strength * overlap / ((b - a) * dx)

    def support(self):
        return self._edges()

    def breakpoints(self):
        return list(self._edges()) if self.width is not None else []

    def deltas(self):
        return [(self.at, self.strength)] if self.width is None else []


class Gaussian(Term):
    """V = height·exp(-(x-center)²/(2 width²))."""

    kind: ClassVar[str] = "gaussian"
    center: float = 0.0
    height: float
    width: float = Field(gt=0)

    def point(self, x, mass=1.0):
        return self.height * np.exp(-((np.asarray(x, dtype=float) - self.center) / self.width) ** 2 / 2)

    def support(self):
        half = self.width * math.sqrt(2 * math.log(1 / TAIL))
        return self.center - half, self.center + half


class SmoothStep(Term):
    """Fermi-form step V = height/(1+exp(-(x-at)/width))."""

    kind: ClassVar[str] = "smooth_step"
    at: float = 0.0
    height: float
    width: float = Field(gt=0)

    def point(self, x, mass=1.0):
        u = (np.asarray(x, dtype=float) - self.at) / self.width
        return self.height * 0.5 * (1 + np.tanh(u / 2))

    def levels(self, mass=1.0):
        return 0.0, self.height

    def support(self):
        half = self.width * math.log(1 / TAIL)
        return self.at - half, self.at + half


class Sech2(Term):
    """V = height/cosh²((x-center)/width); a negative height is a well."""

    kind: ClassVar[str] = "sech2"
    center: float = 0.0
    height: float
    width: float = Field(gt=0)

    def point(self, x, mass=1.0):
        return self.height / np.cosh((np.asarray(x, dtype=float) - self.center) / self.width) ** 2

    def support(self):
        half = self.width / 2 * math.log(4 / TAIL)
        return self.center - half, self.center + half


class Harmonic(Term):
    """V = ½·m·omega²·(x-center)²: a trap, not a scattering potential."""

    kind: ClassVar[str] = "harmonic"
    center: float = 0.0
    omega: float = Field(gt=0)

    def point(self, x, mass=1.0):
        return 0.5 * mass * self.omega ** 2 * (np.asarray(x, dtype=float) - self.center) ** 2

    def levels(self, mass=1.0):
        return math.inf, math.inf

    def support(self):
        return None


class _Sampled(Term):
    """Terms known only by their values (a table, a formula): levels and
    support are read off the values, on a sampling of the given span."""

    def shape_on(self, span: tuple[float, float], samples: int = 20001):
        """((left level, right level), support) read off values on the span."""
        x = np.linspace(span[0], span[1], samples)
        v = self.point(x)
        left, right = float(v[0]), float(v[-1])
        tol = TAIL * max(float(np.max(np.abs(v))), 1e-300)
        moved = np.nonzero(np.abs(v - left) > tol)[0]
        if not moved.size:
            return (left, right), (float(x[0]), float(x[0]))
        differs = np.nonzero(np.abs(v - right) > tol)[0]
        a = float(x[max(moved[0] - 1, 0)])
        b = float(x[min(differs[-1] + 1, samples - 1)])
        return (left, right), (a, b)

    def support(self):
        return None  # needs a span: see Potential


class Table(_Sampled):
    """V from a CSV file of two columns x, V (a header line is allowed),
    linearly interpolated; constant beyond the table's ends."""

    kind: ClassVar[str] = "table"
    file: str
    _x: np.ndarray = PrivateAttr()
    _v: np.ndarray = PrivateAttr()

    @field_validator("file")
    @classmethod
    def _readable(cls, name, info: ValidationInfo):
        base = Path((info.context or {}).get("base_dir", "."))
        path = (base / name) if not Path(name).is_absolute() else Path(name)
        if not path.is_file():
            raise ValueError(f"no such file: {path}")
        return str(path)

    def model_post_init(self, _context) -> None:
        rows = []
        with open(self.file, newline="") as handle:
            for number, row in enumerate(csv.reader(handle), start=1):
                if not row or row[0].lstrip().startswith("#"):
                    continue
                try:
                    rows.append((float(row[0]), float(row[1])))
                except (ValueError, IndexError):
                    if rows or number > 1:
                        raise ValueError(f"{self.file}, row {number}: expected two numbers x, V") from None
        if len(rows) < 2:
            raise ValueError(f"{self.file}: needs at least two rows of x, V")
        data = np.array(rows)
        if not np.all(np.isfinite(data)):
            raise ValueError(f"{self.file}: contains a value that is not finite (nan or inf)")
        if np.any(np.diff(data[:, 0]) <= 0):
            raise ValueError(f"{self.file}: x must increase strictly from row to row")
        self._x, self._v = data[:, 0], data[:, 1]

    def point(self, x, mass=1.0):
        return np.interp(np.asarray(x, dtype=float), self._x, self._v)

    def levels(self, mass=1.0):
        return float(self._v[0]), float(self._v[-1])

    def support(self):
        return float(self._x[0]), float(self._x[-1])

    def breakpoints(self):
        return [float(v) for v in self._x]


class Expression(_Sampled):
    """V from a formula in x (numpy functions; checked, never eval'ed)."""

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

    def describe(self):
        return f"expression({self.formula})"


TERMS: dict[str, type[Term]] = {
    cls.kind: cls
    for cls in (Step, Barrier, Well, Gaussian, SmoothStep, Sech2, DeltaLike, Ramp,
                Harmonic, Table, Expression)
}


class Potential:
    """The sum of a scenario's terms, with what the grid and the theory need.

    ``span`` is the grid's extent, used to read levels and support off terms
    known only by their values (table, expression).
    """

    def __init__(self, terms: list[Term], mass: float = 1.0,
                 span: tuple[float, float] = (-math.inf, math.inf)):
        self.terms = list(terms)
        self.mass = mass
        self.span = span

    def __call__(self, x) -> np.ndarray:
        """Exact values at points x (zero-width deltas excluded)."""
        x = np.asarray(x, dtype=float)
        total = np.zeros_like(x)
        for term in self.terms:
            total = total + term.point(x, self.mass)
        return total

    def on_grid(self, x: np.ndarray, dx: float) -> np.ndarray:
        """Grid values: cell averages for terms with jumps, point values otherwise."""
        total = np.zeros_like(np.asarray(x, dtype=float))
        for term in self.terms:
            total = total + term.cell(x, dx, self.mass)
        return total

    def _sampled_shape(self, term):
        return term.shape_on(self.span) if isinstance(term, Expression) else None

    @property
    def confining(self) -> bool:
        return any(isinstance(t, Harmonic) for t in self.terms)

    @property
    def piecewise_constant(self) -> bool:
        return all(t.piecewise_constant for t in self.terms)

    def levels(self) -> tuple[float, float]:
        """(V far left, V far right)."""
        left = right = 0.0
        for term in self.terms:
            shape = self._sampled_shape(term)
            lv, rv = shape[0] if shape else term.levels(self.mass)
            left, right = left + lv, right + rv
        return left, right

    def support(self) -> Optional[tuple[float, float]]:
        """Smallest interval outside which V equals its levels (None: no terms
        or a confining term)."""
        ends = []
        for term in self.terms:
            shape = self._sampled_shape(term)
            s = shape[1] if shape else term.support()
            if s is None:
                return None
            ends.append(s)
        if not ends:
            return None
        return min(a for a, _ in ends), max(b for _, b in ends)

    def breakpoints(self) -> list[float]:
        return sorted({b for t in self.terms for b in t.breakpoints()})

    def deltas(self) -> list[tuple[float, float]]:
        return [d for t in self.terms for d in t.deltas()]

    def jumps(self) -> list[float]:
        """Positions where V is discontinuous (for grid placement checks)."""
        out = []
        for t in self.terms:
            if isinstance(t, (Step, Barrier, Well)):
                out.extend(t.breakpoints())
            elif isinstance(t, DeltaLike):
                out.extend([t.at] if t.width is None else t.breakpoints())
        return sorted(set(out))

    def describe(self) -> str:
        return " + ".join(t.describe() for t in self.terms) or "free (V = 0)"
