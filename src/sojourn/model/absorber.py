"""The complex absorbing layers at the box edges: their profile and default strength."""
from __future__ import annotations

import math

import numpy as np


def absorber_profile(x: np.ndarray, left: float, right: float, width: float,
                     strength: float) -> np.ndarray:
    """Complex absorbing potential W(x) ≥ 0: a quadratic ramp from 0 to
    `strength` across a layer of `width` at each end of [left, right)
    (smooth ramp as in Riss & Meyer, J. Chem. Phys. 105, 1409 (1996)).
    Elementwise: `x` may have any shape (the coordinate of one axis, broadcast)."""
    depth_left = np.clip((left + width - x) / width, 0.0, None)
    depth_right = np.clip((x - (right - width)) / width, 0.0, None)
    return strength * (depth_left ** 2 + depth_right ** 2)


def default_absorber_strength(width: float, speed: float, hbar: float) -> float:
    """Peak W for a quadratic layer: one pass through the layer damps the
    probability of a wave of group velocity `speed` by e^(-2∫W dx/ħv) = 1e-8, so
    that what the grid's periodicity carries on into the opposite layer is
    negligible and each side's absorption is its own (common practice: strong
    enough to absorb, gentle enough not to reflect; both checked in tests)."""
    return 3 * hbar * speed * math.log(1e8) / (2 * width)
