"""Oblique incidence on a potential of x alone (PHYSICS §9): the lateral shift
of each outgoing packet along the interface, D = tan θ·⟨∂φ/∂k_x⟩_w, beside
its stationary value at k₀, from the line's theory at the normal wavenumber."""
from __future__ import annotations

import math
from typing import Optional

import numpy as np

from .scattering import scatter


def mean_wavenumber(potential, normal, hbar: float, mass: float, reference: Optional[float],
                    channel: str = "reflection") -> float:
    """⟨k_x⟩ over |ψ̃₀(k_x)|²R(k_x) (T(k_x) for transmission; the band k₀ ± 8σ_k,
    trapezoid on 1601 points): the filtered reference moves at ħ⟨k_x⟩/m."""
    k0, sk = abs(normal.k0), normal.sigma_k
    k = np.linspace(max(k0 - 8 * sk, k0 / 100), k0 + 8 * sk, 1601)
    sc = scatter(potential, normal.level + (hbar * k) ** 2 / (2 * mass), hbar=hbar,
                 x_r=reference, direction="right" if normal.k0 > 0 else "left", dwell=False)
    share = sc.R if channel == "reflection" else sc.T
    w = np.exp(-0.5 * ((k - k0) / sk) ** 2) * np.nan_to_num(np.asarray(share, float))
    return float(np.trapezoid(w * k, k) / np.trapezoid(w, k))


def lateral_shifts(potential, normal, k_y: float, hbar: float, mass: float,
                   reference: Optional[float], prediction) -> dict:
    """Per outgoing channel of a `PacketPrediction`: {"packet": D_w, "stationary":
    D(k₀)} with D_w = (k_y/⟨k_x⟩_w)·⟨∂φ/∂k_x⟩_w and D(k₀) = tan θ·v_x·τ(E_x)."""
    out = {}
    for channel in ("reflection", "transmission"):
        p = getattr(prediction, channel)
        if p is None or p.centroid_shift is None:
            out[channel] = None
            continue
        k_mean = mean_wavenumber(potential, normal, hbar, mass, reference, channel)
        wigner = p.wigner_delay
        out[channel] = {
            "packet": k_y / k_mean * p.centroid_shift,
            "stationary": None if wigner is None or not math.isfinite(wigner) else
            k_y / normal.k0 * (hbar * normal.k0 / mass) * wigner}
    return out
