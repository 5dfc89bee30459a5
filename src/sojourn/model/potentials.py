"""The registry of potential terms, and `Potential`: the sum of a scenario's terms.

`TERMS` maps each scenario key to its term class (the contract a term must
meet is in `terms.Term`). To add a term: write its model (in `terms.py`, or
`sampled.py` for one known by values), add it to `TERMS`, and test it.
Nothing else changes: the scenario schema, the error messages, build and the
theory all read the term through `Potential`.
"""
from __future__ import annotations

import math
from typing import Optional

import numpy as np

from .sampled import Expression, Table
from .shapes import Disk, Rectangle, Ring, Wall
from .terms import (TAIL, Barrier, DeltaLike, Drive, Gaussian, Harmonic, Ramp, Sech2, Shape,
                    SmoothStep, Step, Term, Well)

__all__ = ["TERMS", "Potential", "Shape", "Term", "Drive", "TAIL", "Step", "Barrier", "Well",
           "Ramp", "DeltaLike", "Gaussian", "SmoothStep", "Sech2", "Harmonic", "Table",
           "Expression", "Disk", "Ring", "Rectangle", "Wall"]

CHUNK = 1 << 18   # points evaluated at a time (a formula holds ~depth arrays of this size)

TERMS: dict[str, type[Term]] = {
    cls.kind: cls
    for cls in (Step, Barrier, Well, Gaussian, SmoothStep, Sech2, DeltaLike, Ramp,
                Harmonic, Table, Expression, Disk, Ring, Rectangle, Wall)
}


class Potential:
    """The sum of a scenario's terms, with what the grid and the theory need.

    ``span`` is the grid's extent and ``spacing`` the finest sampling a term
    known only by its values is read with (default: the span / 20000; the
    scenario passes a quarter of its grid spacing).
    """

    def __init__(self, terms: list[Term], mass: float = 1.0,
                 span: tuple[float, float] = (-math.inf, math.inf),
                 spacing: Optional[float] = None):
        self.terms = list(terms)
        self.mass = mass
        self.span = span
        width = span[1] - span[0]
        self.spacing = spacing if spacing else (width / 20000 if math.isfinite(width) else 1.0)
        self.shapes = [t.shape_on(span, self.spacing, mass) for t in self.terms]

    def __call__(self, x) -> np.ndarray:
        """Exact values at points x (zero-width deltas excluded)."""
        return self._summed(np.asarray(x, dtype=float), lambda t, part: t.point(part, self.mass))

    def on_grid(self, x: np.ndarray, dx: float) -> np.ndarray:
        """Grid values: cell averages for terms with jumps, point values otherwise."""
        return self._summed(np.asarray(x, dtype=float), lambda t, part: t.cell(part, dx, self.mass))

    def _summed(self, x: np.ndarray, value) -> np.ndarray:
        """Σ terms, evaluated in chunks of CHUNK points, so that a formula's
        intermediate arrays never scale with a large grid."""
        total = np.zeros_like(x)
        flat, out = x.reshape(-1), total.reshape(-1)
        for start in range(0, flat.size, CHUNK):
            part = flat[start:start + CHUNK]
            for term in self.terms:
                out[start:start + CHUNK] += value(term, part)
        return total

    @property
    def along_x(self) -> bool:
        """True when V depends on x alone (no shape of the plane, no formula in y):
        in the plane the problem then separates and the line's theory applies."""
        return not any(getattr(t, "planar", False) or getattr(t, "axis", "x") != "x"
                       for t in self.terms)

    @property
    def confining(self) -> bool:
        return any(t.confining for t in self.terms)

    @property
    def piecewise_constant(self) -> bool:
        return all(t.piecewise_constant for t in self.terms)

    def levels(self) -> tuple[float, float]:
        """(V far left, V far right)."""
        return (sum(s.levels[0] for s in self.shapes) if self.shapes else 0.0,
                sum(s.levels[1] for s in self.shapes) if self.shapes else 0.0)

    def support(self) -> Optional[tuple[float, float]]:
        """Smallest interval outside which V equals its levels (None: no terms
        or an unbounded term)."""
        ends = [s.support for s in self.shapes]
        if not ends or any(e is None for e in ends):
            return None
        return min(a for a, _ in ends), max(b for _, b in ends)

    def breakpoints(self) -> list[float]:
        return sorted({b for s in self.shapes for b in s.breakpoints})

    def deltas(self) -> list[tuple[float, float]]:
        return [d for t in self.terms for d in t.deltas()]

    def jumps(self) -> list[float]:
        """Positions where V is discontinuous (for grid placement checks)."""
        return sorted({j for s in self.shapes for j in s.jumps})

    def thinnest_feature(self) -> Optional[float]:
        """The shortest distance between consecutive breakpoints inside the
        support (a barrier's width, a gap between barriers), or None."""
        points = self.breakpoints()
        gaps = [b - a for a, b in zip(points[:-1], points[1:]) if b > a]
        return min(gaps) if gaps else None

    def describe(self) -> str:
        return " + ".join(t.describe() for t in self.terms) or "free (V = 0)"

    # -- drives: what changes in time (PHYSICS §Driven potentials) --------------------------

    def drives(self) -> list[tuple[Drive, tuple[float, float]]]:
        """(drive, interval it acts on) of each driven term, in term order; a
        term with no finite drive support of its own uses the extent seen on
        the span (a formula's)."""
        out = []
        for term, shape in zip(self.terms, self.shapes):
            if term.drive is None:
                continue
            a, b = term.drive_support()
            if not (math.isfinite(a) or math.isfinite(b)) and shape.support is not None:
                a, b = shape.support
            out.append((term.drive, (float(a), float(b))))
        return out

    def time_formulas(self) -> list[Expression]:
        """The formula terms that use t (re-evaluated by the engine at every kick)."""
        return [t for t in self.terms if isinstance(t, Expression) and t.uses_time]

    @property
    def driven(self) -> bool:
        """Whether V changes in time (a term with a drive, or a formula in t)."""
        return bool(self.drives() or self.time_formulas())

    def drive_profiles(self, x: np.ndarray, dx: float) -> list[tuple[Drive, np.ndarray]]:
        """(drive, S) per driven term: S the share of each grid cell
        [x − dx/2, x + dx/2] inside the drive's interval (exact cell averages,
        as for jumps, so a drive's edges keep their true positions)."""
        x = np.asarray(x, dtype=float)
        out = []
        for drive, (a, b) in self.drives():
            overlap = np.minimum(x + dx / 2, b) - np.maximum(x - dx / 2, a)
            out.append((drive, np.clip(overlap / dx, 0.0, 1.0)))
        return out
