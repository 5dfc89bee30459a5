"""The periodic spatial grid and its momentum grid.

Code that only needs the grid's shape, its cell volume and |k|² (the propagator,
the FFT plans, the observables' reductions) reads `shape`, `dx` and `k_squared`,
so that a grid of more axes can stand in without changing it."""
from __future__ import annotations

import math
from dataclasses import dataclass
from functools import cached_property

import numpy as np


@dataclass(frozen=True)
class Grid:
    """N points x_j = left + j·dx, dx = (right - left)/N, periodic (right is not a point)."""

    left: float
    right: float
    points: int

    @classmethod
    def from_spec(cls, spec) -> "Grid":
        return cls(float(spec.span[0]), float(spec.span[1]), int(spec.points))

    @property
    def length(self) -> float:
        return self.right - self.left

    @property
    def shape(self) -> tuple[int, ...]:
        """Shape of an array on the grid (one axis today)."""
        return (self.points,)

    @property
    def dx(self) -> float:
        return self.length / self.points

    @cached_property
    def x(self) -> np.ndarray:
        return self.left + self.dx * np.arange(self.points)

    @property
    def axes(self) -> tuple[tuple[str, np.ndarray], ...]:
        """The named coordinate axes of an array on the grid, outermost first
        (the run file's dimensions)."""
        return (("x", self.x),)

    @cached_property
    def k(self) -> np.ndarray:
        """Wavenumbers in FFT order."""
        return 2 * math.pi * np.fft.fftfreq(self.points, d=self.dx)

    @cached_property
    def k_squared(self) -> np.ndarray:
        """|k|² on the grid's shape, in FFT order (the kinetic energy is ħ²|k|²/2m)."""
        return self.k ** 2

    @property
    def k_max(self) -> float:
        """Largest wavenumber on the grid, π/dx."""
        return math.pi / self.dx

    def index(self, position: float) -> int:
        """Index of the grid point nearest to a position (clipped to the grid)."""
        return int(min(max(round((position - self.left) / self.dx), 0), self.points - 1))

    def kinetic_max(self, hbar: float, mass: float) -> float:
        """Largest kinetic energy on the grid, ħ²(π/dx)²/2m."""
        return (hbar * self.k_max) ** 2 / (2 * mass)
