"""The analytic potential terms and their common base, `Term`.

A scenario's potential is the sum of its terms; each term is a small pydantic
model whose fields are its scenario keys. What a term must provide is the
contract in `Term`'s docstring; `potentials.TERMS` is the registry.
"""
from __future__ import annotations

import math
from typing import ClassVar, NamedTuple, Optional

import numpy as np
from typing import Literal

from pydantic import BaseModel, ConfigDict, Field, ValidationInfo, field_validator

class Shape(NamedTuple):
    """What the grid and the theory need to know of a term's profile."""

    levels: tuple[float, float]
    support: Optional[tuple[float, float]]
    breakpoints: list
    jumps: list


TAIL = 1e-12  # a smooth tail counts as zero below this fraction of the term's height


class Drive(BaseModel):
    """An oscillation V₁·cos(ωt + φ) added uniformly over a term's drive support,
    optionally switched on smoothly over `ramp` (envelope sin²(πt/2τ) for t < τ)."""

    model_config = ConfigDict(extra="forbid", frozen=True, allow_inf_nan=False)
    amplitude: float
    angular_frequency: float = Field(gt=0)
    phase: float = 0.0
    ramp: Optional[float] = Field(default=None, gt=0)

    def envelope(self, t: float) -> float:
        """The switch-on factor at time t (1 without a ramp, and after it)."""
        if self.ramp is None or t >= self.ramp:
            return 1.0
        if t <= 0:
            return 0.0
        return math.sin(0.5 * math.pi * t / self.ramp) ** 2

    def value(self, t: float) -> float:
        """V₁·envelope(t)·cos(ωt + φ): what the drive adds at time t."""
        return self.amplitude * self.envelope(t) * math.cos(self.angular_frequency * t
                                                            + self.phase)

    @property
    def period(self) -> float:
        return 2 * math.pi / self.angular_frequency


class Term(BaseModel):
    """Base of all potential terms. A term must provide:

    1. ``kind`` (class attribute): its scenario key, unique in `potentials.TERMS`;
       its pydantic fields are the keys under it (validated, frozen, finite).
    2. ``point(x, mass)``: its exact values at points x (an array of any shape).
    3. ``support()``: the interval outside which it equals its levels, or None
       if unbounded; ``levels(mass)``: its values far left and far right.
    4. Optionally ``cell(x, dx, mass)``: grid values; a term with jumps derives
       from `_Antiderivative` and returns exact cell averages over
       [x − dx/2, x + dx/2], so a jump keeps its true position (PHYSICS §3).
    5. Optionally ``breakpoints()`` (jumps or kinks, for the theory's slicing),
       ``jumps()`` (discontinuities, for the grid placement check), ``deltas()``
       (zero-width parts as (position, strength)), and the class flags
       ``piecewise_constant`` (solved exactly by the theory) and ``confining``
       (a trap: no incoming or outgoing packet).
    6. ``shape_on(span, spacing, mass)``: all of 3 and 5 as a `Shape` seen on a
       span; the default asks the methods above; terms known only by their
       values (`sampled.Table`, `sampled.Expression`) read them off their data
       or off a sampling no coarser than `spacing`.
    7. Every term accepts an optional ``drive`` (`Drive`): V₁·cos(ωt + φ) over
       ``drive_support()`` (default: its support, the whole line if unbounded;
       a step drives its high side, a barrier or well its interval).
    8. In the plane, a term of x alone acts along x (broadcast over y), or
       along y with ``axis: y`` (its x read as y; a line refuses it). A
       term of the plane sets ``planar`` True and provides ``plane(x, y, mass)``
       (values at points of the plane, broadcast) and ``bounds()``; a scenario
       on a line refuses it (`shapes`). Drives run on a line only.
    Nothing else changes when a term is added: the scenario schema, the error
    messages, build and the theory read all of this through `Potential`.
    """

    model_config = ConfigDict(extra="forbid", frozen=True, allow_inf_nan=False)
    kind: ClassVar[str] = ""
    piecewise_constant: ClassVar[bool] = False
    confining: ClassVar[bool] = False
    drive: Optional[Drive] = None
    planar: ClassVar[bool] = False
    axis: Literal["x", "y"] = "x"   # in the plane: the coordinate the term depends on

    def point(self, x, mass: float = 1.0) -> np.ndarray:
        raise NotImplementedError

    def drive_support(self) -> tuple[float, float]:
        """Where the drive acts: the support, or the whole line if unbounded."""
        support = self.support()
        return support if support is not None else (-math.inf, math.inf)

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

    def jumps(self) -> list[float]:
        """Positions where the term is discontinuous."""
        return []

    def shape_on(self, span: tuple[float, float], spacing: float, mass: float = 1.0) -> "Shape":
        """Levels, support, breakpoints and jumps as seen on a span (exact for
        analytic terms; read off values no farther apart than `spacing` for
        sampled ones)."""
        return Shape(self.levels(mass), self.support(), self.breakpoints(), self.jumps())

    def describe(self) -> str:
        hidden = ({"axis"} if self.axis == "x" else set()) | ({"drive"} if self.drive is None
                                                               else set())
        fields = ", ".join(f"{k}={v}" for k, v in self.model_dump(exclude=hidden).items())
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

    def drive_support(self):
        return self.at, math.inf

    def breakpoints(self):
        return [self.at]

    def jumps(self):
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

    def drive_support(self):
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

    def jumps(self):
        return [self.start, self.end]

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

    def jumps(self):
        return [self.start, self.end]

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

    def jumps(self):
        return [self.at] if self.width is None else self.breakpoints()


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
    confining: ClassVar[bool] = True
    center: float = 0.0
    omega: float = Field(gt=0)

    def point(self, x, mass=1.0):
        return 0.5 * mass * self.omega ** 2 * (np.asarray(x, dtype=float) - self.center) ** 2

    def levels(self, mass=1.0):
        return math.inf, math.inf

    def support(self):
        return None
