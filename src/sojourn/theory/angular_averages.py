"""Packet averages of the 2D partial-wave theory (PHYSICS §Partial waves) and
the numbers-only table for the command line: what a packet of central
wavenumber k₀ and rms width σ_k along its incidence should give, per angle,
in a measurement of the scattered flux through a distant circle."""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import TheoryError
from .partial_waves import phase_shifts

K_SPAN = 8.0            # the band: k₀ ± 8 σ_k (|ψ̃₀|² falls to 1e-14)
RULE = np.polynomial.legendre.leggauss(16)      # one panel's Gauss–Legendre rule
PANELS_START = 4        # panels of the first try (64 nodes)
PANELS_MAX = 256        # ... and of the last (4096 nodes)


def _finite(values) -> list:
    """JSON-ready nested lists: None where a value is not finite."""
    a = np.asarray(values, dtype=float)
    if a.ndim == 0:
        return float(a) if math.isfinite(a) else None
    return [_finite(v) for v in a]


def _angles(theta) -> np.ndarray:
    try:
        theta = np.atleast_1d(np.asarray(theta, dtype=float)).ravel()
    except (TypeError, ValueError):
        raise TheoryError("angles must be numbers (radians from +x)") from None
    if theta.size == 0 or not np.all(np.isfinite(theta)):
        raise TheoryError("angles must be a non-empty list of finite numbers (radians from +x)")
    return theta


@dataclass(frozen=True)
class AngularPrediction:
    """Packet-averaged angular predictions, one value per angle θ (radians
    from +x), with the weights |ψ̃₀(k)|²|f(θ, k)|² in dk (PHYSICS §Partial waves).

    cross_section : dσ/dθ = ∫|ψ̃₀|²|f|² dk / ∫|ψ̃₀|² dk (a length per radian),
        the scattered probability per bin over the incident fluence.
    delay : ⟨τ(θ, k)⟩ = ∫|ψ̃₀|²|f|²τ dk / ∫|ψ̃₀|²|f|² dk, the mean arrival time per
        bin minus that of a free outgoing wave of the same filtered spectrum
        leaving the centre as the free incident packet's centre passes it.
    inverse_speed : ⟨m/ħk⟩ with the same weights: the reference (a free outgoing
        wave of the filtered spectrum from the centre) reaches radius R at the
        flux-weighted mean time (R − x₀)·inverse_speed when the free incident
        centre is at x₀ at t = 0 (exact in the far field; PHYSICS §Partial waves).
    excluded_weight : the share of the Gaussian |ψ̃₀|² outside the band used.
    """

    theta: np.ndarray
    cross_section: np.ndarray
    delay: np.ndarray
    inverse_speed: np.ndarray
    k0: float
    sigma_k: float
    k_range: tuple[float, float]
    excluded_weight: float
    nodes: int

    def as_dict(self) -> dict:
        """JSON-ready (None where a value is not finite)."""
        return {"theta": _finite(self.theta), "cross_section": _finite(self.cross_section),
                "delay": _finite(self.delay), "inverse_speed": _finite(self.inverse_speed),
                "k0": self.k0, "sigma_k": self.sigma_k,
                "k_range": list(self.k_range), "excluded_weight": self.excluded_weight,
                "nodes": self.nodes}


def _band_sums(shells, theta, k0, sigma_k, hbar, mass, m_max, tol):
    """∫ρ dk, and per angle ∫ρ|f|² dk, ∫ρ|f|²τ dk, ∫ρ|f|² m/(ħk) dk (ρ the
    Gaussian |ψ̃₀|²) on 16-point Gauss–Legendre panels, doubled until
    converged; with the band."""
    for name, v in (("k0", k0), ("sigma_k", sigma_k), ("tol", tol)):
        if not (isinstance(v, (int, float, np.floating)) and math.isfinite(v) and v > 0):
            raise TheoryError(f"{name} must be a finite positive number (got {v!r})")
    k_lo, k_hi = max(k0 - K_SPAN * sigma_k, k0 / 100), k0 + K_SPAN * sigma_k

    def sums(panels):
        edges = np.linspace(k_lo, k_hi, panels + 1)
        half = 0.5 * (edges[1] - edges[0])
        k = (0.5 * (edges[1:] + edges[:-1])[:, None] + half * RULE[0]).ravel()
        rho = np.tile(half * RULE[1], panels) * np.exp(-0.5 * ((k - k0) / sigma_k) ** 2)
        ps = phase_shifts(shells, hbar ** 2 * k ** 2 / (2 * mass), hbar=hbar, mass=mass,
                          m_max=m_max)
        cs = ps.cross_section(theta)
        return (rho.sum(), rho @ cs, rho @ ps.weighted_delay(theta),
                (rho * mass / (hbar * k)) @ cs)

    panels = PANELS_START
    prev = sums(panels)
    while True:
        panels *= 2
        cur = sums(panels)
        change = max(np.max(np.abs(c - p)) / max(np.max(np.abs(c)), 1e-300)
                     for c, p in zip(cur[1:], prev[1:]))
        if change <= tol or panels >= PANELS_MAX:
            break
        prev = cur
    cdf = lambda k: 0.5 * math.erfc(-(k - k0) / (math.sqrt(2) * sigma_k))
    band = dict(k0=float(k0), sigma_k=float(sigma_k), k_range=(float(k_lo), float(k_hi)),
                excluded_weight=float(1.0 - (cdf(k_hi) - cdf(k_lo))),
                nodes=panels * RULE[0].size)
    return cur, band


def packet_angular_prediction(shells, theta, *, k0: float, sigma_k: float,
                              hbar: float = 1.0, mass: float = 1.0, m_max: int | None = None,
                              tol: float = 1e-8) -> AngularPrediction:
    """dσ/dθ and τ(θ) at the angles `theta`, averaged over a Gaussian packet
    |ψ̃₀(k)|² (centre k₀ > 0, rms σ_k) along its incidence, E = ħ²k²/2m.
    16-point Gauss–Legendre panels on [max(k₀ − 8σ_k, k₀/100), k₀ + 8σ_k],
    their number doubled until both averages change by less than `tol`
    (relative to their largest magnitude over θ): a narrow resonance inside
    the band is resolved."""
    theta = _angles(theta)
    (norm, flux, weighted, slow), band = _band_sums(shells, theta, k0, sigma_k, hbar, mass,
                                                    m_max, tol)
    return AngularPrediction(theta, flux / norm, weighted / flux, slow / flux, **band)


def packet_bin_prediction(shells, edges, *, k0: float, sigma_k: float, hbar: float = 1.0,
                          mass: float = 1.0, m_max: int | None = None, tol: float = 1e-8,
                          per_bin: int = 8) -> AngularPrediction:
    """What detector bins [edges_i, edges_i+1] (radians, increasing) measure:
    the mean dσ/dθ over each bin, ∫_bin∫ρ|f|² dk dθ / (Δθ ∫ρ dk), and the
    flux-weighted delay of the bin, ∫_bin∫ρ|f|²τ / ∫_bin∫ρ|f|² (PHYSICS
    §Partial waves); `per_bin` Gauss–Legendre angles in each. θ = bin centres."""
    edges = _angles(edges)
    if edges.size < 2 or not np.all(np.diff(edges) > 0):
        raise TheoryError("bin edges must be at least two increasing angles")
    if not (isinstance(per_bin, (int, np.integer)) and 1 <= per_bin <= 64):
        raise TheoryError(f"per_bin must be an integer in 1…64 (got {per_bin!r})")
    x, w = np.polynomial.legendre.leggauss(int(per_bin))
    half = 0.5 * np.diff(edges)
    centres = 0.5 * (edges[1:] + edges[:-1])
    theta = (centres[:, None] + half[:, None] * x).ravel()
    weights = (half[:, None] * w).ravel()
    (norm, flux, weighted, slow), band = _band_sums(shells, theta, k0, sigma_k, hbar, mass,
                                                    m_max, tol)
    per_bin_sum = lambda v: (weights * v).reshape(centres.size, -1).sum(axis=1)
    bin_flux = per_bin_sum(flux)
    return AngularPrediction(centres, bin_flux / (2 * half * norm),
                             per_bin_sum(weighted) / bin_flux, per_bin_sum(slow) / bin_flux,
                             **band)


def packet_beam_prediction(shells, theta, *, k0: float, sigma_k: float, sigma_ky: float,
                           x0: float, y0: float = 0.0, hbar: float = 1.0, mass: float = 1.0,
                           m_max: int | None = None, panels: int = 16,
                           alpha_nodes: int = 48) -> AngularPrediction:
    """dσ/dθ and τ(θ) for a Gaussian packet of finite width across its
    incidence, centred at (x₀, y₀) from the potential's centre at t = 0: each
    plane wave of direction α scatters on its own, and the components of one
    |k| add coherently, G(k, θ) = k∫dα ψ̃₀(k cos α, k sin α) f(θ − α, k)
    (PHYSICS §Partial waves). |ψ̃₀|² has rms σ_k along x and σ_ky across. dσ/dθ =
    ∫|G|²dk / ∫|G₀|²dk with G₀ the same without f (the incident wave at the
    centre); τ = ⟨ħ∂_E(arg G − arg G₀)⟩ over |G|², relative to a wave leaving
    the centre in step with the incident one there; inverse_speed = ⟨m/ħk⟩.
    Fixed quadrature: `panels` 16-point panels in k, `alpha_nodes` in α."""
    theta = _angles(theta)
    for name, v in (("k0", k0), ("sigma_k", sigma_k), ("sigma_ky", sigma_ky)):
        if not (isinstance(v, (int, float, np.floating)) and math.isfinite(v) and v > 0):
            raise TheoryError(f"{name} must be a finite positive number (got {v!r})")
    if not all(isinstance(v, (int, float, np.floating)) and math.isfinite(v) for v in (x0, y0)):
        raise TheoryError(f"the packet's centre must be finite (got {x0!r}, {y0!r})")
    k_lo, k_hi = max(k0 - K_SPAN * sigma_k, k0 / 100), k0 + K_SPAN * sigma_k
    edges = np.linspace(k_lo, k_hi, panels + 1)
    half = 0.5 * (edges[1] - edges[0])
    k = (0.5 * (edges[1:] + edges[:-1])[:, None] + half * RULE[0]).ravel()
    wk = np.tile(half * RULE[1], panels)
    span = min(K_SPAN * math.sqrt(2) * sigma_ky / k_lo, 0.5 * np.pi)
    xa, wa = np.polynomial.legendre.leggauss(alpha_nodes)
    alpha, wa = span * xa, span * wa
    kk, aa = k[:, None], alpha[None, :]
    kx, ky = kk * np.cos(aa), kk * np.sin(aa)
    # the amplitude ψ̃₀ (|ψ̃₀|² Gaussian with rms σ_k, σ_ky) and ∂_k ln(k ψ̃₀)
    psi = np.exp(-(kx - k0) ** 2 / (4 * sigma_k ** 2) - ky ** 2 / (4 * sigma_ky ** 2)
                 - 1j * (kx * x0 + ky * y0))
    dlog = (1 / kk - (kx - k0) * np.cos(aa) / (2 * sigma_k ** 2)
            - ky * np.sin(aa) / (2 * sigma_ky ** 2) - 1j * (np.cos(aa) * x0 + np.sin(aa) * y0))
    dk_dE = mass / (hbar ** 2 * k)[:, None]
    ps = phase_shifts(shells, hbar ** 2 * k ** 2 / (2 * mass), hbar=hbar, mass=mass, m_max=m_max)
    angles = (theta[:, None] - alpha[None, :]).ravel()
    f = ps.amplitude(angles).reshape(k.size, theta.size, alpha.size)
    fE = ps.amplitude_dE(angles).reshape(k.size, theta.size, alpha.size)
    base = (kk * psi * wa)[:, None, :]                          # k ψ̃₀ dα, (k, 1, α)
    G = np.sum(base * f, axis=2)
    GE = np.sum(base * (dlog * dk_dE)[:, None, :] * f + base * fE, axis=2)
    G0 = np.sum(base[:, 0, :], axis=1)
    G0E = np.sum(base[:, 0, :] * dlog * dk_dE, axis=1)
    w = np.abs(G) ** 2 * wk[:, None]
    flux = w.sum(axis=0)
    tau = hbar * (np.imag(GE / G) - np.imag(G0E / G0)[:, None])
    cdf = lambda v: 0.5 * math.erfc(-(v - k0) / (math.sqrt(2) * sigma_k))
    return AngularPrediction(theta, flux / np.sum(np.abs(G0) ** 2 * wk),
                             np.sum(w * tau, axis=0) / flux,
                             np.sum(w * (mass / (hbar * k))[:, None], axis=0) / flux,
                             float(k0), float(sigma_k), (float(k_lo), float(k_hi)),
                             float(1.0 - (cdf(k_hi) - cdf(k_lo))), int(k.size * alpha.size))


def partial_wave_table(shells, energies, theta, *, hbar: float = 1.0, mass: float = 1.0,
                       m_max: int | None = None) -> dict:
    """JSON-ready numbers at each energy: δ_m and 2ħ dδ_m/dE (m = 0…m_max),
    the total cross section, and per angle |f(θ)|² and τ(θ) (None where f = 0)."""
    theta = _angles(theta)
    ps = phase_shifts(shells, energies, hbar=hbar, mass=mass, m_max=m_max)
    return {"energy": _finite(ps.energy), "theta": _finite(theta),
            "m": [int(v) for v in ps.m], "phase_shift": _finite(ps.delta),
            "partial_delay": _finite(ps.partial_delays),
            "total_cross_section": _finite(ps.total_cross_section),
            "cross_section": _finite(ps.cross_section(theta)),
            "delay": _finite(ps.delay(theta))}
