"""Physics for the overlays: pure functions on arrays and PacketInfo.

Sign convention (the measurement's): `direction` is +1 for a packet moving
right (incident from the left) and −1 for one moving left, and a delay τ is
the time by which the real outgoing packet trails its reference, so that the
reflected centroid is found at x_ref(t) + v₀·τ (v₀ the signed incident group
velocity): τ = (x_out − x_ref)/v₀, positive when the packet is late.
"""
from __future__ import annotations

import math

import numpy as np

from ..errors import SojournError
from ..model.packets import PacketInfo, free_evolution
from ..theory.scattering import scatter


def direction(info: PacketInfo) -> int:
    """+1 when the packet moves right (comes from the left), −1 when it moves left."""
    return 1 if info.k0 >= 0 else -1


def turning_time(info: PacketInfo, reference: float) -> float:
    """When the free centroid x₀ + v₀t reaches the mirror at `reference`."""
    return (reference - info.center) / info.group_velocity


def mirror_reference(x: np.ndarray, t: float, info: PacketInfo, reference: float,
                     hbar: float, mass: float) -> np.ndarray:
    """What an ideal mirror (a hard wall) at x_r returns: by the method of images,
    ψ_ref(x,t) = ψ_free(x,t) − ψ_free(2x_r − x, t) on the incident side, 0 beyond.
    Before the reflection this is the free incident packet, after it the mirror
    image −ψ_free(2x_r − x, t); in between it is the exact standing wave."""
    direct = free_evolution(x, t, info, hbar, mass)
    image = free_evolution(2 * reference - x, t, info, hbar, mass)
    psi = direct - image
    psi[direction(info) * (x - reference) > 0] = 0
    return psi


def reference_trajectory(t: np.ndarray, info: PacketInfo, reference: float) -> np.ndarray:
    """Centroid of the mirror's packet: x₀ + v₀t until it reaches x_r, then
    2x_r − (x₀ + v₀t)."""
    free = info.center + info.group_velocity * np.asarray(t, dtype=float)
    past = direction(info) * (free - reference) > 0
    return np.where(past, 2 * reference - free, free)


def centroid_delay(x_out: np.ndarray, x_ref: np.ndarray, info: PacketInfo) -> np.ndarray:
    """τ = (x_out − x_ref)/v₀ for the reflected channel (see the module note)."""
    return (np.asarray(x_out, float) - np.asarray(x_ref, float)) / info.group_velocity


def side_centroid(x: np.ndarray, density: np.ndarray, dx: float, bounds: tuple[float, float]
                  ) -> tuple[float, float]:
    """Probability and centroid of |ψ|² between bounds (NaN centroid if empty)."""
    inside = (x >= bounds[0]) & (x <= bounds[1])
    weight = density[inside]
    p = float(weight.sum() * dx)
    return p, float(np.dot(x[inside], weight) / weight.sum()) if p > 0 else float("nan")


def incident_bounds(inner: tuple[float, float], reference: float, info: PacketInfo
                    ) -> tuple[float, float]:
    """The incident (= reflected) side of the mirror inside the box."""
    return (inner[0], reference) if direction(info) > 0 else (reference, inner[1])


def transmitted_bounds(inner: tuple[float, float], reference: float, info: PacketInfo
                       ) -> tuple[float, float]:
    """The far (transmitted) side of the mirror inside the box."""
    return (reference, inner[1]) if direction(info) > 0 else (inner[0], reference)


def energy_spectrum(energy: np.ndarray, info: PacketInfo, hbar: float, mass: float
                    ) -> np.ndarray:
    """The packet's probability per unit energy, |φ̃(k)|²·dk/dE with
    |φ̃(k)|² a Gaussian of rms σ_k about k₀ (PHYSICS §2), k = √(2m(E−V))/ħ."""
    kinetic = np.clip(np.asarray(energy, dtype=float) - info.level, 0, None)
    k = np.sqrt(2 * mass * kinetic) / hbar
    weight = np.exp(-((k - abs(info.k0)) ** 2) / (2 * info.sigma_k ** 2)) / (
        math.sqrt(2 * math.pi) * info.sigma_k)
    with np.errstate(divide="ignore", invalid="ignore"):
        dk_de = np.where(k > 0, mass / (hbar ** 2 * k), 0.0)
    return weight * dk_de


def energy_width(info: PacketInfo, hbar: float, mass: float) -> float:
    """σ_E = ħ²|k₀|σ_k/m, the packet's rms energy spread (to first order)."""
    return hbar ** 2 * abs(info.k0) * info.sigma_k / mass


def action_window(x: np.ndarray, peak_density: np.ndarray, V, inner: tuple[float, float],
                  packet_width: float, share: float = 1e-4) -> tuple[float, float]:
    """The x-range where something happens: where the largest |ψ|² over the run
    (`peak_density`, per grid point) exceeds `share` of its maximum, widened to
    take in the potential's features (where V differs from both its far-left
    and far-right values by more than 1e-3 of its span; V None: ignored), with
    a margin of two packet widths, clipped to the box inside the absorbers."""
    inside = (x >= inner[0]) & (x <= inner[1])
    peak = np.where(inside, peak_density, 0.0)
    where = np.nonzero(peak > share * max(float(peak.max()), 1e-300))[0]
    lo, hi = (float(x[where[0]]), float(x[where[-1]])) if len(where) else inner
    if V is not None:
        V = np.asarray(V, float)
        left, right = V[inside][0], V[inside][-1]
        tol = 1e-3 * max(float(np.ptp(V[inside])), 1e-300)
        feature = np.nonzero(inside & (np.abs(V - left) > tol) & (np.abs(V - right) > tol))[0]
        if len(feature):
            lo, hi = min(lo, float(x[feature[0]])), max(hi, float(x[feature[-1]]))
    margin = 2 * packet_width
    return max(inner[0], lo - margin), min(inner[1], hi + margin)


def phase_delay(facts, energies: np.ndarray) -> dict:
    """τ_R(E), τ_T(E) = ħ d(arg r, t)/dE of stationary scattering for the run's
    potential (`facts.potential`), r referenced at the run's mirror point;
    {} when the theory cannot say (the potential outside its reach)."""
    if facts.potential is None:
        return {}
    try:
        result = scatter(facts.potential, energies, hbar=facts.hbar, x_r=facts.reference,
                         dwell=False, direction="right" if direction(facts.packet) > 0 else "left")
    except (SojournError, ValueError, ArithmeticError):
        return {}
    out = {}
    for channel in ("reflection", "transmission"):
        values = np.asarray(getattr(result, f"delay_{channel}"), dtype=float)
        if values.shape == energies.shape and np.any(np.isfinite(values)):
            out[channel] = values
    return out
