"""Potential terms of the plane: a disk, a ring, a rectangle and a wall with
openings (slits). Each is `height` inside its outline and 0 outside.

They follow `terms.Term`'s contract with rule 7: ``planar`` is True and
``plane(x, y)`` gives the values at points of the plane. Their outline is
sharp, so the grid holds each cell's covered fraction (`plane.plane_values`
samples every cell at SUBSAMPLES² points): an edge keeps its true position
to O(Δx²) in the mean, as a jump on the line does with its cell average.
A scenario on a line refuses them (config.scenario).
"""
from __future__ import annotations

from typing import ClassVar

import numpy as np
from pydantic import Field, ValidationInfo, field_validator

from .terms import Term

SUBSAMPLES = 4   # per axis and cell, for the covered fraction of a sharp outline


class _PlaneShape(Term):
    planar: ClassVar[bool] = True
    height: float

    def inside(self, x, y) -> np.ndarray:
        raise NotImplementedError

    def plane(self, x, y, mass=1.0) -> np.ndarray:
        return np.where(self.inside(np.asarray(x, float), np.asarray(y, float)), self.height, 0.0)

    def point(self, x, mass=1.0):
        raise ValueError(f"'{self.kind}' is a shape of the plane: it needs a grid in the plane")

    def support(self):
        return None   # not a function of x alone

    def bounds(self) -> tuple[tuple[float, float], tuple[float, float]]:
        """((x0, x1), (y0, y1)) enclosing the shape (None for an unbounded side)."""
        raise NotImplementedError


class Disk(_PlaneShape):
    """V = height inside the circle |r − center| < radius."""

    kind: ClassVar[str] = "disk"
    center: tuple[float, float] = (0.0, 0.0)
    radius: float = Field(gt=0)

    def inside(self, x, y):
        return (x - self.center[0]) ** 2 + (y - self.center[1]) ** 2 < self.radius ** 2

    def bounds(self):
        (cx, cy), r = self.center, self.radius
        return (cx - r, cx + r), (cy - r, cy + r)


class Ring(_PlaneShape):
    """V = height on the annulus inner < |r − center| < outer."""

    kind: ClassVar[str] = "ring"
    center: tuple[float, float] = (0.0, 0.0)
    inner: float = Field(ge=0)
    outer: float

    @field_validator("outer")
    @classmethod
    def _outside_inner(cls, outer, info: ValidationInfo):
        inner = info.data.get("inner")
        if inner is not None and outer <= inner:
            raise ValueError(f"must be greater than inner ({inner})")
        return outer

    def inside(self, x, y):
        r2 = (x - self.center[0]) ** 2 + (y - self.center[1]) ** 2
        return (r2 > self.inner ** 2) & (r2 < self.outer ** 2)

    def bounds(self):
        (cx, cy), r = self.center, self.outer
        return (cx - r, cx + r), (cy - r, cy + r)


class Rectangle(_PlaneShape):
    """V = height on x0 < x < x1, y0 < y < y1 (`x: [x0, x1]`, `y: [y0, y1]`)."""

    kind: ClassVar[str] = "rectangle"
    x: tuple[float, float]
    y: tuple[float, float]

    @field_validator("x", "y")
    @classmethod
    def _ordered(cls, pair):
        if pair[1] <= pair[0]:
            raise ValueError(f"must be [start, end] with end > start (got [{pair[0]:g}, "
                             f"{pair[1]:g}])")
        return pair

    def inside(self, x, y):
        return (x > self.x[0]) & (x < self.x[1]) & (y > self.y[0]) & (y < self.y[1])

    def bounds(self):
        return tuple(self.x), tuple(self.y)


class Wall(_PlaneShape):
    """A wall across the plane along y, at < x < at + thickness, with openings
    (slits) where it is absent: `openings: [[y0, y1], ...]`."""

    kind: ClassVar[str] = "wall"
    at: float
    thickness: float = Field(gt=0)
    openings: list[tuple[float, float]] = []

    @field_validator("openings")
    @classmethod
    def _ordered(cls, openings):
        for a, b in openings:
            if b <= a:
                raise ValueError(f"each opening must be [start, end] with end > start "
                                 f"(got [{a:g}, {b:g}])")
        return openings

    def inside(self, x, y):
        solid = (x > self.at) & (x < self.at + self.thickness)
        for a, b in self.openings:
            solid = solid & ~((y > a) & (y < b))
        return solid

    def bounds(self):
        return (self.at, self.at + self.thickness), (None, None)


SHAPES = (Disk, Ring, Rectangle, Wall)
