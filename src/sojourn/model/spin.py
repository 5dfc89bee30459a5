"""A Larmor clock's two spin components on the grid (PHYSICS §Larmor): a weak
field along z over a region adds +ħω_L/2 to spin up's potential there and
−ħω_L/2 to spin down's; the engine propagates them as one state with a
leading component axis (component 0 = up, 1 = down)."""
from __future__ import annotations

import math
from typing import Optional

import numpy as np

from .potentials import Potential
from .terms import Barrier

COMPONENTS = ("up", "down")


def clock_region(region: Optional[tuple[float, float]], potential) -> Optional[tuple[float, float]]:
    """The clock's region: as given, else the potential's extent (None if it has none)."""
    if region is not None:
        return float(region[0]), float(region[1])
    support = potential.support()
    return None if support is None else (float(support[0]), float(support[1]))


def spin_potentials(V, x, dx: float, region: tuple[float, float], splitting: float) -> np.ndarray:
    """(2, N): V + splitting/2 and V − splitting/2 over `region`, with `splitting`
    = ħω_L; the region's indicator is cell-averaged at its edges as a barrier
    term's jumps are (PHYSICS §3), so a clock edge keeps its true position."""
    V = np.asarray(V, dtype=float)
    if V.ndim != 1 or np.shape(x) != V.shape:
        raise ValueError("V and x must be 1D arrays of one length")
    a, b = float(region[0]), float(region[1])
    if not (math.isfinite(a) and math.isfinite(b) and a < b):
        raise ValueError(f"the clock region must be finite with start < end (got {region!r})")
    if not (math.isfinite(splitting) and dx > 0):
        raise ValueError("splitting must be finite and dx positive")
    inside = Barrier(start=a, end=b, height=1.0).cell(np.asarray(x, dtype=float), dx)
    half = 0.5 * float(splitting) * inside
    return np.stack([V + half, V - half])


def component_potentials(potential: Potential, region: tuple[float, float],
                         splitting: float) -> tuple[Potential, Potential]:
    """(spin up, spin down) as Potentials of their own: `potential` plus a
    uniform ±splitting/2 barrier over `region` (the stationary theory of each
    component, e.g. an exact synthesis of a spinor run)."""
    out = []
    for sign in (1.0, -1.0):
        shift = Barrier(start=float(region[0]), end=float(region[1]), height=sign * 0.5 * splitting)
        out.append(Potential(potential.terms + [shift], mass=potential.mass, span=potential.span,
                             spacing=potential.spacing))
    return out[0], out[1]
