"""Initial states: the Gaussian packet of PHYSICS §2.

ψ₀(x) = (2πσ²)^(-1/4) exp(-(x-x₀)²/(4σ²) + i k₀ x), σ the rms width of |ψ|².
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class PacketInfo:
    """A packet's defining numbers, in the scenario's units."""

    center: float
    width: float          # σ, rms width of |ψ|²
    k0: float             # signed central wavenumber
    sigma_k: float        # 1/(2σ)
    energy: float         # E₀ = ħ²k₀²/2m + V(center)
    mean_energy: float    # ⟨E⟩ = ħ²(k₀² + σ_k²)/2m + V(center)
    group_velocity: float  # ħk₀/m (signed)
    level: float          # V at the start position

    @property
    def k_ratio(self) -> float:
        """k₀/σ_k: below ~6 the packet has content at k ≤ 0."""
        return abs(self.k0) / self.sigma_k


def describe(spec, hbar: float, mass: float, level: float = 0.0) -> PacketInfo:
    """PacketInfo from a scenario's packet spec; `level` is V where the packet starts."""
    if spec.wavenumber is not None:
        k0 = abs(spec.wavenumber)
    else:
        kinetic = spec.energy - level
        if kinetic <= 0:
            raise ValueError(f"packet energy {spec.energy} is not above the potential "
                             f"{level} at the packet's centre")
        k0 = math.sqrt(2 * mass * kinetic) / hbar
    if spec.direction == "left":
        k0 = -k0
    sigma_k = 1 / (2 * spec.width)
    kin = (hbar * k0) ** 2 / (2 * mass)
    return PacketInfo(
        center=spec.center, width=spec.width, k0=k0, sigma_k=sigma_k,
        energy=kin + level,
        mean_energy=(hbar ** 2) * (k0 ** 2 + sigma_k ** 2) / (2 * mass) + level,
        group_velocity=hbar * k0 / mass, level=level)


def gaussian(x: np.ndarray, center: float, width: float, k0: float) -> np.ndarray:
    """The Gaussian of PHYSICS §2 at points x (analytic normalisation)."""
    return ((2 * math.pi * width ** 2) ** -0.25
            * np.exp(-((x - center) ** 2) / (4 * width ** 2) + 1j * k0 * x))


def on_grid(grid, info: PacketInfo) -> np.ndarray:
    """ψ₀ on the grid, normalised so that Σ|ψ|²dx = 1."""
    psi = gaussian(grid.x, info.center, info.width, info.k0)
    return psi / math.sqrt(float(np.vecdot(psi, psi).real) * grid.dx)


def free_width(width: float, t, hbar: float, mass: float):
    """rms width of a free Gaussian at time t: σ√(1 + (ħt/2mσ²)²)."""
    with np.errstate(over="ignore", divide="ignore", invalid="ignore"):   # extremes: inf
        return width * np.hypot(1.0, hbar * np.asarray(t, dtype=float) / (2 * mass * width ** 2))


def free_evolution(x: np.ndarray, t: float, info: PacketInfo, hbar: float, mass: float) -> np.ndarray:
    """The incident Gaussian evolved freely (at the constant level V = info.level)
    to time t, exactly: with s = 1 + iħt/(2mσ²),
    ψ = (2πσ²)^(-1/4) s^(-1/2) exp(-(x-x₀-v₀t)²/(4σ²s) + ik₀x - i(ħk₀²/2m + V)t/ħ)
    (free spreading as in Cohen-Tannoudji, Diu, Laloë, Complement G_I)."""
    s = 1 + 1j * hbar * t / (2 * mass * info.width ** 2)
    v0 = hbar * info.k0 / mass
    phase = info.k0 * x - (hbar * info.k0 ** 2 / (2 * mass) + info.level / hbar) * t
    return ((2 * math.pi * info.width ** 2) ** -0.25 / np.sqrt(s)
            * np.exp(-((x - info.center - v0 * t) ** 2) / (4 * info.width ** 2 * s) + 1j * phase))
