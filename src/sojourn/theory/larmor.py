"""Larmor clocks (PHYSICS §Larmor): the times a weak field confined to a region
reads on a spin that starts along +x, from the layered solver.

Conventions. The field is along z; inside the region spin up sees V + ħω_L/2
and spin down V − ħω_L/2. For an outgoing amplitude a (t or r) and a uniform
shift V of the potential inside the region,

    τ_y = −ħ ∂(arg a)/∂V,   τ_z = −ħ ∂(ln|a|)/∂V,   τ = √(τ_y² + τ_z²),

in the limit ω_L → 0 (Büttiker, Phys. Rev. B 27, 6178 (1983)). To first order
in ω_L the outgoing spin is ⟨σ_x⟩ ≈ 1, ⟨σ_y⟩ = ω_L τ_y, ⟨σ_z⟩ = −ω_L τ_z (the
spin turns toward the lower-energy component, spin down here). The
derivatives are analytic: the layer recursion differentiated with respect to
the levels of the layers inside the region (region edges made interfaces).
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Optional

import numpy as np

from ..errors import TheoryError
from ..model.potentials import Potential
from .layers import Layers, check_scattering, layers_from_potential, piece_counts, \
    sliced_layers, solve_layers
from .scattering import check_positive, check_region, prepare_energies

REFINE_TOL = 1e-10     # smooth potentials: relative change of the Romberg estimate
MAX_CELLS = 1 << 15    # finest slicing tried for smooth potentials


def split_layers(layers: Layers, points) -> Layers:
    """The same potential with interfaces added at `points` (no coupling, the
    level on both sides that of the layer the point falls in)."""
    b, lev, g = list(layers.boundaries), list(layers.levels), list(layers.couplings)
    for p in sorted(float(v) for v in points):
        if any(p == q for q in b):
            continue
        j = int(np.searchsorted(np.asarray(b), p, side="right"))
        b.insert(j, p)
        lev.insert(j, lev[j])
        g.insert(j, 0.0)
    return Layers(np.asarray(b, dtype=float), np.asarray(lev, dtype=float),
                  np.asarray(g, dtype=float))


def region_mask(layers: Layers, region: tuple[float, float]) -> np.ndarray:
    """1.0 for each layer lying inside `region` (its edges interfaces), else 0."""
    edges = np.concatenate([[-np.inf], layers.boundaries, [np.inf]])
    a, b = region
    return ((edges[:-1] >= a) & (edges[1:] <= b)).astype(float)


@dataclass(frozen=True)
class LarmorTimes:
    """Larmor times at an array of energies (module docstring for conventions).

    Transmission times are NaN where the far channel is closed, reflection
    times where r = 0. ``T`` and ``R`` are the channel probabilities."""

    energy: np.ndarray
    region: tuple[float, float]
    direction: str
    T: np.ndarray
    R: np.ndarray
    tau_y_transmission: np.ndarray
    tau_z_transmission: np.ndarray
    tau_y_reflection: np.ndarray
    tau_z_reflection: np.ndarray

    @property
    def tau_transmission(self) -> np.ndarray:
        """Büttiker's traversal time √(τ_y² + τ_z²) for the transmitted channel."""
        return np.hypot(self.tau_y_transmission, self.tau_z_transmission)

    @property
    def tau_reflection(self) -> np.ndarray:
        return np.hypot(self.tau_y_reflection, self.tau_z_reflection)


def _inputs(potential, energies, hbar, region, direction):
    if direction not in ("right", "left"):
        raise TheoryError(f"direction must be 'right' or 'left' (got {direction!r})")
    check_positive(hbar=hbar)
    check_scattering(potential)
    if region is None:
        region = potential.support()
        if region is None:
            raise TheoryError("a Larmor region is needed: the potential has no extent "
                              "to default to")
    a, b = check_region(region)
    if not a < b:
        raise TheoryError(f"a Larmor region must have a < b (got {region!r})")
    levels = potential.levels()
    E = prepare_energies(energies, levels[0] if direction == "right" else levels[1])
    return E, (a, b)


def _layered(potential: Potential, hbar: float, region, direction: str, compute):
    """compute(layers, mask) on the potential's layers with the region's edges as
    interfaces (mirrored for incidence from the right): exact for piecewise-
    constant potentials, Romberg-extrapolated slicing (h², h⁴) for smooth ones."""
    sign = 1.0 if direction == "right" else -1.0
    reg = tuple(sorted((sign * region[0], sign * region[1])))

    def on(layers):
        if direction == "left":
            layers = layers.mirrored()
        layers = split_layers(layers, reg)
        return [np.asarray(v) for v in compute(layers, region_mask(layers, reg))]

    support = potential.support()
    if potential.piecewise_constant or support is None:
        return on(layers_from_potential(potential, hbar))
    length = support[1] - support[0]
    vmax = float(np.max(np.abs(potential(np.linspace(support[0], support[1], 2001)))))
    kmax = math.sqrt(2 * potential.mass * max(vmax, 1e-300)) / hbar
    counts = np.array(piece_counts(potential, int(min(max(64, 4 * kmax * length), 4096))))
    table, last = [], None
    while True:
        row = [on(sliced_layers(potential, hbar, counts))]
        for j in range(1, min(len(table), 2) + 1):
            f = 4.0 ** j
            row.append([(f * x - y) / (f - 1) for x, y in zip(row[j - 1], table[-1][j - 1])])
        table.append(row)
        if len(table) >= 3:
            best, prev = table[-1][-1], table[-2][-1]
            change = max(float(np.nanmax(np.abs(x - y) / np.maximum(np.abs(x), 1e-300)))
                         for x, y in zip(best, prev))
            if change <= REFINE_TOL or counts.sum() * 2 > MAX_CELLS or (
                    last is not None and change > 0.5 * last):
                return best
            last = change
        counts = counts * 2


def _ends(layers: Layers) -> tuple[float, float]:
    """Reference points at the outermost interfaces (the times do not depend on them)."""
    b = layers.boundaries
    return float(b[0]), float(b[-1])


def _times(amplitude, d_dV, hbar):
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = d_dV / amplitude
    return -hbar * ratio.imag, -hbar * ratio.real


def larmor_times(potential: Potential, energies, *, hbar: float,
                 region: Optional[tuple[float, float]] = None,
                 direction: str = "right") -> LarmorTimes:
    """τ_y, τ_z of both channels at total `energies` for a clock over `region`
    (default: the potential's support), incidence from the left ('right') or
    the right ('left'). Analytic derivatives of the layer recursion with
    respect to a uniform shift of the levels inside the region."""
    E, region = _inputs(potential, energies, hbar, region, direction)
    mass = potential.mass

    def compute(layers, mask):
        sol = solve_layers(layers, E, hbar, mass, *_ends(layers), level_weights=-mask)
        K = sol.k
        T = np.where(K[-1].real > 0, K[-1].real / K[0].real * np.abs(sol.t) ** 2, 0.0)
        return sol.r, sol.t, sol.dr, sol.dt, T

    r, t, dr, dt, T = _layered(potential, hbar, region, direction, compute)
    ty_t, tz_t = _times(t, dt, hbar)
    ty_r, tz_r = _times(r, dr, hbar)
    opn = T > 0
    has_r = np.abs(r) > 0
    return LarmorTimes(
        energy=E, region=region, direction=direction, T=T, R=np.abs(r) ** 2,
        tau_y_transmission=np.where(opn, ty_t, np.nan),
        tau_z_transmission=np.where(opn, tz_t, np.nan),
        tau_y_reflection=np.where(has_r, ty_r, np.nan),
        tau_z_reflection=np.where(has_r, tz_r, np.nan))


@dataclass(frozen=True)
class SpinorAmplitudes:
    """Outgoing amplitudes of the two spin components at finite ω_L: spin up
    saw V + ħω_L/2 in the region, spin down V − ħω_L/2 (t at x_t, r at x_r).
    ``flux`` = k'/k, the factor from |t|² to T."""

    energy: np.ndarray
    omega: float
    t_up: np.ndarray
    t_down: np.ndarray
    r_up: np.ndarray
    r_down: np.ndarray
    flux: np.ndarray


def spinor_amplitudes(potential: Potential, energies, *, hbar: float, omega: float,
                      region: Optional[tuple[float, float]] = None,
                      direction: str = "right") -> SpinorAmplitudes:
    """Exact outgoing amplitudes of both spin components (module docstring)."""
    if not (isinstance(omega, (int, float)) and math.isfinite(omega)):
        raise TheoryError(f"omega must be a finite number (got {omega!r})")
    E, region = _inputs(potential, energies, hbar, region, direction)
    mass, half = potential.mass, 0.5 * hbar * float(omega)

    def compute(layers, mask):
        out = []
        for s in (half, -half):
            shifted = Layers(layers.boundaries, layers.levels + s * mask, layers.couplings)
            sol = solve_layers(shifted, E, hbar, mass, *_ends(layers))
            out += [sol.t, sol.r]
        K = solve_layers(layers, E, hbar, mass, *_ends(layers)).k
        flux = np.where(K[-1].real > 0, K[-1].real / K[0].real, 0.0)
        return out + [flux]

    t_up, r_up, t_dn, r_dn, flux = _layered(potential, hbar, region, direction, compute)
    return SpinorAmplitudes(E, float(omega), t_up, t_dn, r_up, r_dn, flux)


def spin_vector(up, down, weights=None) -> tuple[float, float, float]:
    """(⟨σ_x⟩, ⟨σ_y⟩, ⟨σ_z⟩) of the spinor (up, down), summed over an axis of
    amplitudes with `weights` (e.g. quadrature weights × |ψ̃₀(k)|² × k'/k)."""
    up, down = np.atleast_1d(up), np.atleast_1d(down)
    w = np.ones(up.shape) if weights is None else np.asarray(weights, dtype=float)
    cross = np.sum(w * np.conj(up) * down)
    norm = np.sum(w * (np.abs(up) ** 2 + np.abs(down) ** 2))
    if not norm > 0:
        raise TheoryError("the spinor carries no probability: no spin direction")
    return (float(2 * cross.real / norm), float(2 * cross.imag / norm),
            float(np.sum(w * (np.abs(up) ** 2 - np.abs(down) ** 2)) / norm))


def times_from_spin(spin: tuple[float, float, float], omega: float) -> tuple[float, float]:
    """(τ_y, τ_z) a spin reads, to first order in ω_L: ⟨σ_y⟩/ω_L, −⟨σ_z⟩/ω_L."""
    if not (math.isfinite(omega) and omega != 0):
        raise TheoryError(f"omega must be a finite nonzero number (got {omega!r})")
    return spin[1] / omega, -spin[2] / omega


def packet_larmor(potential: Potential, k0: float, sigma_k: float, level: float, *,
                  hbar: float, omega: float, region: Optional[tuple[float, float]] = None,
                  span: float = 8.0, nodes: int = 400) -> dict:
    """Packet-averaged Larmor predictions per channel for a Gaussian packet
    (|ψ̃₀(k)|² centred at |k₀|, rms σ_k; E = level + ħ²k²/2m; k₀'s sign gives
    the direction): the linear times ⟨τ⟩ with weights |ψ̃₀|²·T (or R), and the
    exact finite-ω_L spin of the outgoing packet and the times it reads.
    Returns {"transmission": {...}, "reflection": {...}} (None where the channel
    carries no probability)."""
    check_positive(sigma_k=sigma_k, hbar=hbar)
    if not (math.isfinite(k0) and k0 != 0 and math.isfinite(level)):
        raise TheoryError(f"k0 must be finite and nonzero, level finite (got {k0!r}, {level!r})")
    direction = "right" if k0 > 0 else "left"
    ka = abs(k0)
    mass = potential.mass
    inc = potential.levels()[0 if direction == "right" else 1]
    c = hbar ** 2 / (2 * mass)
    lo = max(ka - span * sigma_k, ka / 100, math.sqrt(max(inc - level, 0.0) / c) * (1 + 1e-9))
    hi = ka + span * sigma_k
    x, w = np.polynomial.legendre.leggauss(nodes)
    k = 0.5 * (hi - lo) * x + 0.5 * (hi + lo)
    w = 0.5 * (hi - lo) * w * np.exp(-0.5 * ((k - ka) / sigma_k) ** 2)
    E = level + c * k ** 2
    lin = larmor_times(potential, E, hbar=hbar, region=region, direction=direction)
    amp = spinor_amplitudes(potential, E, hbar=hbar, omega=omega, region=region,
                            direction=direction)
    out = {}
    for name, P, ty, tz, up, dn, fac in (
            ("transmission", lin.T, lin.tau_y_transmission, lin.tau_z_transmission,
             amp.t_up, amp.t_down, amp.flux),
            ("reflection", lin.R, lin.tau_y_reflection, lin.tau_z_reflection,
             amp.r_up, amp.r_down, np.ones_like(amp.flux))):
        weight = w * P
        if not np.sum(weight) > 1e-300 * np.sum(w):
            out[name] = None
            continue
        keep = weight > 0
        tau_y = float(np.sum(weight[keep] * ty[keep]) / np.sum(weight[keep]))
        tau_z = float(np.sum(weight[keep] * tz[keep]) / np.sum(weight[keep]))
        spin = spin_vector(up, dn, w * fac)
        ey, ez = times_from_spin(spin, omega)
        out[name] = {"probability": float(np.sum(weight) / np.sum(w)),
                     "tau_y": tau_y, "tau_z": tau_z, "tau": math.hypot(tau_y, tau_z),
                     "spin": spin, "tau_y_exact": ey, "tau_z_exact": ez,
                     "tau_exact": math.hypot(ey, ez)}
    return out
