"""The transmitted channel's reference and ruler, which channels the saved
analysis does not trust, and where the potential is too thin to see.

The transmitted reference is the one the measurement compares with (see
measure/methods.py): the incident packet's spectrum filtered by |t(k)|,
reaching the mirror point x_r and leaving the far edge x_t at once, then
moving freely at the far side's level,

    ψ_T(ξ, t) = (2π)^(-1/2) ∫ φ̃(k) |t(k)| exp(i[k x_r + q(ξ − x_t) − E t/ħ]) dk,

ξ the coordinate along the packet's direction, q = √(k² − 2mΔV/ħ²). Its
centroid is x_t + ⟨q/k⟩(x₀ − x_r) + ⟨ħq/m⟩ t (stationary phase), and the
transmission delay is τ_T = (x_ref − x_out)/(ħq₀/m): positive when the real
packet is late.
"""
from __future__ import annotations

import math
from typing import Optional

import numpy as np

from ..errors import SojournError
from ..theory.scattering import scatter
from .overlays import direction
from .scan import Ruler, Scan, saved_ruler

BAND = 6.0          # σ_k either side of k₀ that the reference integrates over
THIN = 0.02         # features narrower than this share of the x-range get a true-width panel


def far_level(facts) -> float:
    """V on the transmission side (at the inner box's far end)."""
    inside = (facts.x >= facts.inner[0]) & (facts.x <= facts.inner[1])
    V = np.asarray(facts.V, float)[inside]
    return float(V[-1] if direction(facts.packet) > 0 else V[0])


def _band(facts, count: int = 241):
    """k (forward, > 0), q(k), E(k) and |t(k)| over the packet's band (|t| = 1
    where the theory cannot say)."""
    info, hbar, m = facts.packet, facts.hbar, facts.mass
    k0 = abs(info.k0)
    k = np.linspace(max(k0 - BAND * info.sigma_k, 1e-6 * k0), k0 + BAND * info.sigma_k, count)
    q = np.sqrt(np.maximum(k ** 2 - 2 * m * (far_level(facts) - info.level) / hbar ** 2, 0.0))
    energy = hbar ** 2 * k ** 2 / (2 * m) + info.level
    t_abs = np.ones_like(k)
    if facts.potential is not None:
        try:
            result = scatter(facts.potential, energy, hbar=hbar, x_r=facts.reference,
                             x_t=facts.far_edge, dwell=False,
                             direction="right" if direction(info) > 0 else "left")
            t_abs = np.nan_to_num(np.abs(np.asarray(result.t, complex)))
        except (SojournError, ValueError, ArithmeticError):
            pass
    return k, q, energy, t_abs * (q > 0)


def transmitted_reference(times, facts) -> np.ndarray:
    """Centroid of the transmitted reference packet at `times` (NaN when the
    channel is closed across the band)."""
    info, hbar, m = facts.packet, facts.hbar, facts.mass
    k, q, _, t_abs = _band(facts)
    w = np.exp(-((k - abs(info.k0)) ** 2) / (2 * info.sigma_k ** 2)) * t_abs ** 2 * q / k
    if not np.trapezoid(w, k) > 0:
        return np.full(np.shape(times), np.nan)
    ratio = float(np.trapezoid(w * q / k, k) / np.trapezoid(w, k))
    speed = float(np.trapezoid(w * hbar * q / m, k) / np.trapezoid(w, k))
    d = direction(info)
    forward = d * facts.far_edge + ratio * (d * info.center - d * facts.reference) + \
        speed * np.asarray(times, float)
    return d * forward


def transmitted_packet(x: np.ndarray, t: float, facts) -> np.ndarray:
    """ψ_T(x, t) of the module note (zero on the incident side of x_t)."""
    info, hbar = facts.packet, facts.hbar
    k, q, energy, t_abs = _band(facts)
    d = direction(info)
    xi = d * np.asarray(x, float)
    amplitude = (2 * info.width ** 2 / math.pi) ** 0.25 * np.exp(
        -info.width ** 2 * (k - abs(info.k0)) ** 2 - 1j * (k - abs(info.k0)) * d * info.center)
    phase = k * d * facts.reference - q * d * facts.far_edge - energy * t / hbar
    weights = amplitude * t_abs * np.exp(1j * phase) * np.gradient(k)
    psi = np.empty(len(xi), complex)
    for start in range(0, len(xi), 64):     # in blocks: a few hundred kB at a time
        block = xi[start:start + 64]
        psi[start:start + 64] = np.exp(1j * np.outer(block, q)) @ weights
    psi /= math.sqrt(2 * math.pi)
    psi[xi < d * facts.far_edge] = 0
    return psi


def transmission_ruler(scan: Scan, facts) -> Optional[Ruler]:
    """The transmitted centroid delay from the saved analysis with its
    prediction, else from the run's far-side centroid at the last snapshot
    (None when no transmitted channel lasts)."""
    if not scan.has_transmission:
        return None
    saved = saved_ruler(facts, "transmission")
    if saved is not None:
        return saved
    k, q, _, _ = _band(facts)
    q0 = float(np.interp(abs(facts.packet.k0), k, q))
    i = len(scan.times) - 1
    x_ref = float(transmitted_reference(scan.times[i], facts))
    if q0 <= 0 or not math.isfinite(x_ref) or not math.isfinite(scan.transmitted_centroid[i]):
        return None
    d = direction(facts.packet)
    tau = d * (x_ref - scan.transmitted_centroid[i]) / (facts.hbar * q0 / facts.mass)
    return Ruler(float(tau), "run centroids", None, "packet average")


def untrusted_channels(analysis) -> set:
    """The channels ('reflection', 'transmission') the saved analysis warned about."""
    words = {"reflection": "the reflected ", "transmission": "the transmitted "}
    notes = [w for w in (analysis or {}).get("warnings") or [] if isinstance(w, str)] \
        if isinstance(analysis, dict) else []
    return {c for c, word in words.items() if any(word in w for w in notes)}


def thin_span(x: np.ndarray, V, window: tuple[float, float], share: float = THIN
              ) -> Optional[tuple[float, float]]:
    """The x-range to draw the potential's features at true width, when they
    (where V lies above both its far levels or below both) span less than `share` of
    `window`: the features with 1.5 times their span either side. None
    when they are wide enough to see (or there are none)."""
    if V is None:
        return None
    V = np.asarray(V, float)
    inside = (x >= window[0]) & (x <= window[1])
    if inside.sum() < 3:
        return None
    left, right = V[inside][0], V[inside][-1]
    tol = 1e-3 * max(float(np.ptp(V[inside])), 1e-300)
    # barriers and wells: V above both far levels or below both (a step's
    # in-between grid value, or a smooth step, is no thin feature)
    feature = np.nonzero(inside & ((V > max(left, right) + tol) | (V < min(left, right) - tol)))[0]
    if not len(feature):
        return None
    dx = float(x[1] - x[0])
    lo, hi = float(x[feature[0]]) - dx, float(x[feature[-1]]) + dx
    if hi - lo >= share * (window[1] - window[0]):
        return None
    return lo - 1.5 * (hi - lo), hi + 1.5 * (hi - lo)
