"""Two-dimensional partial waves for a circularly symmetric potential V(r)
(PHYSICS §Partial waves): exact phase shifts δ_m(E) and their analytic energy
derivatives for piecewise-constant shells, the scattering amplitude f(θ),
the differential cross section |f|², the partial-wave delays 2ħ dδ_m/dE and the
angle-resolved delay τ(θ, E) = ħ ∂ arg f/∂E.

Conventions. ψ ~ e^{ikx} + f(θ) e^{ikr}/√r, E = ħ²k²/2m (V = 0 beyond the
last shell), θ from +x,

    f(θ) = √(2/(πk)) e^{iπ/4} Σ_{m=−∞}^{∞} e^{iδ_m} sin δ_m e^{imθ},   δ_{−m} = δ_m,

and τ(θ) is relative to a free outgoing wave that leaves the centre when the
free incident packet's centre passes it. Shells are [(r_1, V_1), (r_2, V_2), …]
with 0 < r_1 < r_2 < …: V = V_j for r_{j−1} < r < r_j. A height of +inf is a
hard core (ψ = 0 inside its radius). Energies are in the caller's units.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np

from ..errors import TheoryError
from .radial_matching import solve_shells

M_CAP = 4000                # the largest m_max ever tried
TAIL_TOL = 1e-13            # |sin δ_m| of the last partial waves kept, relative
LEVEL_GAP = 1e-9            # an energy this close (relative) to a shell level is nudged


def check_shells(shells) -> tuple[np.ndarray, np.ndarray]:
    """(radii, heights) of a shell list, checked: increasing positive finite
    radii, finite heights or +inf (a hard core)."""
    try:
        pairs = [(float(r), float(v)) for r, v in shells]
    except (TypeError, ValueError):
        raise TheoryError("shells must be a list of (radius, height) pairs of numbers") from None
    if not pairs:
        raise TheoryError("shells must hold at least one (radius, height) pair")
    radii = np.array([p[0] for p in pairs])
    heights = np.array([p[1] for p in pairs])
    if not (np.all(np.isfinite(radii)) and radii[0] > 0 and np.all(np.diff(radii) > 0)):
        raise TheoryError(f"shell radii must be finite, positive and increasing (got "
                          f"{radii.tolist()})")
    if np.any(np.isnan(heights)) or np.any(heights == -np.inf):
        raise TheoryError(f"shell heights must be finite numbers or +inf (got {heights.tolist()})")
    return radii, heights


def sliced_shells(profile: Callable, radius: float, count: int) -> list[tuple[float, float]]:
    """A smooth profile V(r) on [0, radius] as `count` equal shells holding
    its midpoint values (V = 0 beyond `radius`); the phase shifts converge as
    count^−2 (PHYSICS §Partial waves)."""
    if not (isinstance(count, (int, np.integer)) and count >= 1):
        raise TheoryError(f"count must be a positive integer (got {count!r})")
    if not (math.isfinite(radius) and radius > 0):
        raise TheoryError(f"radius must be finite and positive (got {radius!r})")
    edges = np.linspace(0.0, radius, count + 1)
    values = np.asarray(profile(0.5 * (edges[1:] + edges[:-1])), dtype=float)
    if values.shape != (count,) or not np.all(np.isfinite(values)):
        raise TheoryError("the profile must give one finite value per radius")
    return [(float(r), float(v)) for r, v in zip(edges[1:], values)]


def _check_positive(**values) -> None:
    for name, v in values.items():
        if not (isinstance(v, (int, float, np.floating)) and math.isfinite(v) and v > 0):
            raise TheoryError(f"{name} must be a finite positive number (got {v!r})")


@dataclass(frozen=True)
class PhaseShifts:
    """Phase shifts δ_m (mod π, in [−π/2, π/2)) and dδ_m/dE at an array of
    energies, m = 0 … m_max (δ_{−m} = δ_m); rows index energies."""

    energy: np.ndarray
    k: np.ndarray
    m: np.ndarray
    delta: np.ndarray
    ddelta_dE: np.ndarray
    hbar: float
    mass: float

    @property
    def partial_delays(self) -> np.ndarray:
        """The partial-wave delays 2ħ dδ_m/dE (Eisenbud–Wigner)."""
        return 2 * self.hbar * self.ddelta_dE

    @property
    def total_cross_section(self) -> np.ndarray:
        """σ = (4/k) Σ_{all m} sin²δ_m (a length in 2D)."""
        s2 = np.sin(self.delta) ** 2
        return 4 / self.k * (s2[:, 0] + 2 * s2[:, 1:].sum(axis=1))

    def _sums(self, theta) -> tuple[np.ndarray, np.ndarray]:
        """S(θ) = Σ e^{iδ}sin δ e^{imθ} and dS/dE over all m, shape (energies, θ)."""
        try:
            theta = np.atleast_1d(np.asarray(theta, dtype=float))
        except (TypeError, ValueError):
            raise TheoryError("angles must be numbers (radians)") from None
        if not np.all(np.isfinite(theta)):
            raise TheoryError("angles must be finite numbers (radians)")
        weight = np.where(self.m == 0, 1.0, 2.0)[:, None] * np.cos(np.outer(self.m, theta))
        a = np.exp(1j * self.delta) * np.sin(self.delta)
        da = self.ddelta_dE * np.exp(2j * self.delta)
        return a @ weight, da @ weight

    def amplitude(self, theta) -> np.ndarray:
        """f(θ) at every energy (rows) and angle (columns)."""
        S, _ = self._sums(theta)
        return np.sqrt(2 / (np.pi * self.k))[:, None] * np.exp(0.25j * np.pi) * S

    def amplitude_dE(self, theta) -> np.ndarray:
        """∂f/∂E = √(2/πk) e^{iπ/4} (S_E − S/4E) (k_E/2k = 1/4E)."""
        S, dS = self._sums(theta)
        return (np.sqrt(2 / (np.pi * self.k))[:, None] * np.exp(0.25j * np.pi)
                * (dS - S / (4 * self.energy)[:, None]))

    def cross_section(self, theta) -> np.ndarray:
        """dσ/dθ = |f(θ)|² (a length per radian)."""
        S, _ = self._sums(theta)
        return (2 / (np.pi * self.k))[:, None] * np.abs(S) ** 2

    def delay(self, theta) -> np.ndarray:
        """τ(θ) = ħ ∂ arg f/∂E = ħ Im(S_E/S) (the prefactor √(2/πk) is real);
        NaN where f = 0."""
        S, dS = self._sums(theta)
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(S != 0, self.hbar * np.imag(dS / S), np.nan)

    def weighted_delay(self, theta) -> np.ndarray:
        """|f|²·τ = (2ħ/πk) Im(S* S_E), smooth through zeros of f (packet averages)."""
        S, dS = self._sums(theta)
        return (2 * self.hbar / (np.pi * self.k))[:, None] * np.imag(np.conj(S) * dS)


def _m_start(radii, heights, E, c) -> int:
    finite = heights[np.isfinite(heights)]
    q_max = math.sqrt(c * max(float(np.max(E)), float(np.max(E)) - float(np.min(finite, initial=0.0))))
    x = q_max * radii[-1]
    return int(math.ceil(x + 6 * x ** (1 / 3) + 10))


def phase_shifts(shells, energies, *, hbar: float = 1.0, mass: float = 1.0,
                 m_max: int | None = None) -> PhaseShifts:
    """Exact 2D phase shifts δ_m(E) and dδ_m/dE for a shell potential.

    Matching Bessel functions (J_m, Y_m where E > V; scaled I_m, K_m where
    E < V; the regular solution's series in the innermost shell) at every
    radius, differentiated forward-mode in E; outside, tan δ_m =
    [kJ'_m u − J_m u']/[kY'_m u − Y_m u'] at the last radius. m_max (default:
    grown from k·a + 6(k·a)^{1/3} + 10 until the last two |sin δ_m| are below
    1e-13 of the largest) sets the partial waves kept. An energy within 1e-9
    (relative) of a shell level is the mean of two nudged ones.
    """
    radii, heights = check_shells(shells)
    _check_positive(hbar=hbar, mass=mass)
    try:
        E = np.atleast_1d(np.asarray(energies, dtype=float)).ravel()
    except (TypeError, ValueError):
        raise TheoryError("energies must be numbers") from None
    if E.size == 0 or not np.all(np.isfinite(E)) or np.any(E <= 0):
        raise TheoryError("energies must be finite and positive (V = 0 outside the shells)")
    if m_max is not None and not (isinstance(m_max, (int, np.integer)) and 0 <= m_max <= M_CAP):
        raise TheoryError(f"m_max must be an integer in 0…{M_CAP} (got {m_max!r})")
    c = 2 * mass / hbar ** 2
    top = m_max if m_max is not None else min(_m_start(radii, heights, E, c), M_CAP)
    while True:
        m = np.arange(top + 1)
        delta, ddelta = _nudged(radii, heights, E, top, hbar, mass)
        s = np.abs(np.sin(delta))
        tail = s[:, -2:].max() if top >= 1 else 0.0
        if m_max is not None or tail <= TAIL_TOL * max(s.max(), 1e-300) or top >= M_CAP:
            break
        top = min(int(1.5 * top) + 5, M_CAP)
    return PhaseShifts(E, np.sqrt(c * E), m, delta, ddelta, float(hbar), float(mass))


def _nudged(radii, heights, E, M, hbar, mass):
    """solve_shells, with energies at a shell level replaced by the mean of E(1 ± h)."""
    levels = heights[np.isfinite(heights)]
    near = np.zeros(E.shape, bool)
    for V in levels:
        near |= np.abs(E - V) <= LEVEL_GAP * np.maximum(np.abs(E), abs(V))
    if not near.any():
        return solve_shells(radii, heights, E, M, hbar, mass)
    h = 1e-5 * E
    lo = solve_shells(radii, heights, np.where(near, E - h, E), M, hbar, mass)
    hi = solve_shells(radii, heights, np.where(near, E + h, E), M, hbar, mass)
    gap = (hi[0] - lo[0] + 0.5 * np.pi) % np.pi - 0.5 * np.pi       # the same branch
    delta = (lo[0] + 0.5 * gap + 0.5 * np.pi) % np.pi - 0.5 * np.pi
    return delta, 0.5 * (lo[1] + hi[1])


def hard_disk_phase_shifts(radius: float, energies, *, hbar: float = 1.0, mass: float = 1.0,
                           m_max: int | None = None) -> PhaseShifts:
    """The impenetrable disk of `radius`: tan δ_m = J_m(ka)/Y_m(ka)."""
    _check_positive(radius=radius)
    return phase_shifts([(radius, math.inf)], energies, hbar=hbar, mass=mass, m_max=m_max)


def smooth_phase_shifts(profile: Callable, radius: float, energies, *, hbar: float = 1.0,
                        mass: float = 1.0, count: int = 200,
                        m_max: int | None = None) -> PhaseShifts:
    """Phase shifts of a smooth V(r) (0 beyond `radius`): `sliced_shells` with
    `count` and 2·`count` shells, Richardson-extrapolated in count⁻² (δ and
    dδ/dE alike; the slicing error is then O(count⁻⁴))."""
    fine = phase_shifts(sliced_shells(profile, radius, 2 * count), energies, hbar=hbar,
                        mass=mass, m_max=m_max)
    coarse = phase_shifts(sliced_shells(profile, radius, count), energies, hbar=hbar,
                          mass=mass, m_max=int(fine.m[-1]))
    step = (fine.delta - coarse.delta + 0.5 * np.pi) % np.pi - 0.5 * np.pi
    delta = (fine.delta + step / 3 + 0.5 * np.pi) % np.pi - 0.5 * np.pi
    ddelta = fine.ddelta_dE + (fine.ddelta_dE - coarse.ddelta_dE) / 3
    return PhaseShifts(fine.energy, fine.k, fine.m, delta, ddelta, fine.hbar, fine.mass)
