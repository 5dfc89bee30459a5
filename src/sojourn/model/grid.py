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

    @property
    def cell(self) -> float:
        """The volume of one grid cell (dx on one axis): Σ|ψ|²·cell is the norm."""
        return self.dx

    @property
    def size(self) -> int:
        """Points in all (one axis: `points`)."""
        return self.points

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


@dataclass(frozen=True)
class PlaneGrid:
    """A periodic grid in the plane: Nx points along x (`left`, `right`,
    `points`, `dx`, `x`, `k`: the x axis, named as on `Grid`, so code that
    works along the normal x reads it unchanged) and Ny along y (`bottom`,
    `top`, `ny`, `dy`, `y`, `ky`). Arrays on it have shape (Ny, Nx): y outer,
    x inner (C order, x contiguous)."""

    left: float
    right: float
    points: int
    bottom: float
    top: float
    ny: int

    @classmethod
    def from_spec(cls, spec) -> "PlaneGrid":
        (x0, x1), (y0, y1) = spec.span
        nx, ny = spec.points
        return cls(float(x0), float(x1), int(nx), float(y0), float(y1), int(ny))

    @property
    def length(self) -> float:
        return self.right - self.left

    @property
    def height(self) -> float:
        return self.top - self.bottom

    @property
    def shape(self) -> tuple[int, int]:
        return (self.ny, self.points)

    @property
    def size(self) -> int:
        return self.ny * self.points

    @property
    def dx(self) -> float:
        return self.length / self.points

    @property
    def dy(self) -> float:
        return self.height / self.ny

    @property
    def cell(self) -> float:
        return self.dx * self.dy

    @cached_property
    def x(self) -> np.ndarray:
        return self.left + self.dx * np.arange(self.points)

    @cached_property
    def y(self) -> np.ndarray:
        return self.bottom + self.dy * np.arange(self.ny)

    @property
    def axes(self) -> tuple[tuple[str, np.ndarray], ...]:
        return (("y", self.y), ("x", self.x))

    @cached_property
    def k(self) -> np.ndarray:
        return 2 * math.pi * np.fft.fftfreq(self.points, d=self.dx)

    @cached_property
    def ky(self) -> np.ndarray:
        return 2 * math.pi * np.fft.fftfreq(self.ny, d=self.dy)

    @cached_property
    def k_squared(self) -> np.ndarray:
        return self.ky[:, None] ** 2 + self.k[None, :] ** 2

    @property
    def k_max(self) -> float:
        """Largest wavenumber along x, π/dx."""
        return math.pi / self.dx

    @property
    def ky_max(self) -> float:
        return math.pi / self.dy

    def index(self, position: float) -> int:
        """Index along x of the grid column nearest to a position (clipped)."""
        return int(min(max(round((position - self.left) / self.dx), 0), self.points - 1))

    def kinetic_max(self, hbar: float, mass: float) -> float:
        """Largest kinetic energy on the grid, summed over the axes:
        ħ²((π/dx)² + (π/dy)²)/2m (the corner of the momentum grid)."""
        return hbar ** 2 * (self.k_max ** 2 + self.ky_max ** 2) / (2 * mass)
