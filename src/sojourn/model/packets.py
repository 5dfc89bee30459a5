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


def wavenumber_of(spec, hbar: float, mass: float, level: float) -> float:
    """|k| of a packet spec: its wavenumber, or from its energy above `level`
    (V at the centre; ValueError when the energy is not above it)."""
    if spec.wavenumber is not None:
        return abs(spec.wavenumber)
    kinetic = spec.energy - level
    if kinetic <= 0:
        raise ValueError(f"packet energy {spec.energy} is not above the potential "
                         f"{level} at the packet's centre")
    return math.sqrt(2 * mass * kinetic) / hbar


def describe(spec, hbar: float, mass: float, level: float = 0.0) -> PacketInfo:
    """PacketInfo from a scenario's packet spec; `level` is V where the packet starts."""
    k0 = wavenumber_of(spec, hbar, mass, level)
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


def on_plane(grid, normal: PacketInfo, transverse: PacketInfo) -> np.ndarray:
    """ψ₀ on a grid in the plane: the product of the Gaussian along x (`normal`)
    and along y (`transverse`), shape (Ny, Nx), normalised so that Σ|ψ|²dx dy = 1.
    (A Gaussian whose covariance has the axes x and y separates this way.)"""
    psi = np.multiply.outer(gaussian(grid.y, transverse.center, transverse.width, transverse.k0),
                            gaussian(grid.x, normal.center, normal.width, normal.k0))
    return psi / math.sqrt(float(np.vecdot(psi.reshape(-1), psi.reshape(-1)).real) * grid.cell)


def in_plane(spec, hbar: float, mass: float, level: float = 0.0) -> tuple[PacketInfo, PacketInfo]:
    """The (normal, transverse) PacketInfo of a packet spec in the plane: |k|
    from the energy above `level` (V at the centre) or the wavenumber, split
    along the direction θ (degrees from +x; 'right'/'left' are 0°/180°) into
    k_x = |k| cos θ and k_y = |k| sin θ. The normal one carries the energy of
    the motion along x, E_x = ħ²k_x²/2m + level, what a potential of x alone sees."""
    k = wavenumber_of(spec, hbar, mass, level)
    angle = {"right": 0.0, "left": 180.0}.get(spec.direction, spec.direction)
    theta = math.radians(float(angle))
    widths = spec.width if isinstance(spec.width, tuple) else (spec.width, spec.width)
    parts = []
    for center, width, k_axis, lev in ((spec.center[0], widths[0], k * math.cos(theta), level),
                                       (spec.center[1], widths[1], k * math.sin(theta), 0.0)):
        sigma_k = 1 / (2 * width)
        c = hbar ** 2 / (2 * mass)
        parts.append(PacketInfo(center=float(center), width=float(width), k0=k_axis,
                                sigma_k=sigma_k, energy=c * k_axis ** 2 + lev,
                                mean_energy=c * (k_axis ** 2 + sigma_k ** 2) + lev,
                                group_velocity=hbar * k_axis / mass, level=lev))
    return parts[0], parts[1]


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
