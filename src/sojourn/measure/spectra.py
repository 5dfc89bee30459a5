"""Pure pieces of the delay methods, on numbers and arrays: the incident
spectrum, momentum amplitudes, an outgoing channel's spectrum, mean arrival
times and the reference flux (PHYSICS §5)."""
from __future__ import annotations

import math

import numpy as np

from ..model import packets
from .frame import K_SPAN, ForwardRun

NEGLIGIBLE = 1e-6       # flux per its peak below which it has died out


def incident_amplitude(k, info: packets.PacketInfo) -> np.ndarray:
    """ψ̃₀(k) = (2π)^(-1/2) ∫ ψ₀ e^{−ikx} dx of the Gaussian of PHYSICS §2:
    (2πσ²)^(-1/4) σ√2 exp(−σ²(k−k₀)²) e^{−i(k−k₀)x₀}."""
    s = info.width
    return ((2 * math.pi * s ** 2) ** -0.25 * s * math.sqrt(2)
            * np.exp(-(s * (k - info.k0)) ** 2 - 1j * (k - info.k0) * info.center))


def momentum_amplitude(x, psi, q, dx) -> tuple[np.ndarray, np.ndarray]:
    """C(q) = (2π)^(-1/2) Σ ψ(x) e^{−iqx} dx at arbitrary q, and dC/dq (exact
    for a resolved packet: the sum is spectrally accurate)."""
    phase = np.exp(-1j * np.outer(q, x))
    c = phase @ psi * (dx / math.sqrt(2 * math.pi))
    dc = phase @ (-1j * x * psi) * (dx / math.sqrt(2 * math.pi))
    return c, dc


def packet_band(info: packets.PacketInfo, points: int = 801) -> np.ndarray:
    """Incident wavenumbers across the band k₀ ± 8σ_k (k > 0)."""
    lo = max(info.k0 - K_SPAN * info.sigma_k, info.k0 / 100)
    return np.linspace(lo, info.k0 + K_SPAN * info.sigma_k, points)


def outgoing_wavenumber(run: ForwardRun, k) -> np.ndarray:
    """q(k) on the transmission side, 0 where the channel is closed."""
    q2 = np.asarray(k) ** 2 - 2 * run.mass * (run.level_out - run.info.level) / run.hbar ** 2
    return np.sqrt(np.maximum(q2, 0.0))


def channel_spectrum(run: ForwardRun, psi, t: float, channel: str, k) -> tuple:
    """(q, |C(q)|² dq/dk, τ(k), P(k), |C(q)|) of the outgoing packet in `channel` at time t.

    Reflection: r(k) = C(−k) e^{−2ikx_r} e^{iE t/ħ} / ψ̃₀(k);
    transmission: t(k) = C(k') (k/k') e^{−ikx_r + ik'x_t} e^{iE t/ħ} / ψ̃₀(k).
    τ = (dφ/dk)/v(k), with the phase derivatives taken analytically. P is
    R(k) or T(k) = |t|² k'/k (0 where the channel is closed).
    """
    hbar, m, info = run.hbar, run.mass, run.info
    a = incident_amplitude(k, info)
    da_phase = -info.center                       # d arg ψ̃₀ / dk
    with np.errstate(divide="ignore", invalid="ignore"):
        if channel == "reflection":
            mask = run.x < run.x_r
            q = -k
            dq_dk = -1.0
        else:
            mask = run.x > run.x_t
            q = outgoing_wavenumber(run, k)
            dq_dk = np.where(q > 0, k / np.where(q > 0, q, 1.0), np.nan)
        # spin components add their probabilities, and their phase slopes weighted by them
        rows = np.asarray(psi)[..., mask].reshape(-1, int(np.count_nonzero(mask)))
        parts = [momentum_amplitude(run.x[mask], row, q, run.dx) for row in rows]
        c2 = sum(np.abs(c) ** 2 for c, _ in parts)
        dphase_c = np.imag(sum(np.conj(c) * dc for c, dc in parts)) / c2 * dq_dk  # d arg C/dk
        c = np.sqrt(c2)
        if channel == "reflection":
            dphi = dphase_c - 2 * run.x_r + hbar * k * t / m - da_phase
            prob = np.abs(c) ** 2 / np.abs(a) ** 2
        else:
            dphi = dphase_c - run.x_r + run.x_t * dq_dk + hbar * k * t / m - da_phase
            prob = np.abs(c) ** 2 * np.abs(dq_dk) / np.abs(a) ** 2
            prob = np.where(q > 0, prob, 0.0)
        tau = dphi * m / (hbar * k)
        outgoing = np.abs(c) ** 2 * np.abs(dq_dk)
    return q, outgoing, tau, prob, np.abs(c)


def mean_arrival(t, flux) -> tuple[float, float]:
    """(∫ t J dt / ∫ J dt, ∫ J dt) by the trapezoid rule (NaN mean if ∫ J dt = 0)."""
    total = float(np.trapezoid(flux, t))
    if total == 0 or not math.isfinite(total):
        return math.nan, total
    return float(np.trapezoid(t * flux, t) / total), total


def tail_shift(t, flux, missing: float) -> float:
    """How far the mean arrival time moves when the flux after the last sample
    is added: the tail is continued as J(t_end)·e^{−(t−t_end)/λ}, λ from the
    decay over the last samples, carrying at least the probability `missing`
    (what the channel holds beyond what passed the detector). NaN when the
    flux still rises at the end (no estimate); a flux below NEGLIGIBLE of its
    peak has died out."""
    t, flux = np.asarray(t, float), np.asarray(flux, float)
    mean, total = mean_arrival(t, flux)
    if not math.isfinite(mean) or total <= 0:
        return math.nan
    end, lam = float(flux[-1]), 0.0
    if end > NEGLIGIBLE * float(np.max(np.abs(flux))):
        tail = flux[-max(3, len(flux) // 20):]
        if np.any(tail <= 0) or tail[-1] >= tail[0]:
            return math.nan
        lam = (t[-1] - t[-len(tail)]) / math.log(tail[0] / tail[-1])
    extra = max(float(missing), end * lam, 0.0)
    return (total * mean + extra * (t[-1] + lam)) / (total + extra) - mean


def reference_flux(run: ForwardRun, channel: str, detector: float, times, k,
                   amplitude) -> np.ndarray:
    """Outgoing flux of the reference at the detector: the free evolution of
    ψ̃₀·amplitude (|r| or |t|, the outgoing amplitude per incident one), mirrored
    at x_r (reflection) or carried from x_r to x_t with the outgoing
    wavenumber (transmission), with no phase of its own."""
    hbar, m, info = run.hbar, run.mass, run.info
    dk = np.gradient(k)
    b = incident_amplitude(k, info) * amplitude * dk / math.sqrt(2 * math.pi)
    E = info.level + (hbar * k) ** 2 / (2 * m)
    if channel == "reflection":
        phase = np.exp(1j * k * (2 * run.x_r - detector))
        slope = 1j * k       # derivative along the outgoing direction
    else:
        q = outgoing_wavenumber(run, k)
        phase = np.exp(1j * (k * run.x_r + q * (detector - run.x_t)))
        slope = 1j * q
    out = np.empty(len(times))
    for start in range(0, len(times), 512):
        tt = times[start:start + 512]
        evolve = np.exp(-1j * np.outer(tt, E) / hbar)
        psi = evolve @ (b * phase)
        dpsi = evolve @ (b * phase * slope)
        out[start:start + 512] = hbar / m * np.imag(np.conj(psi) * dpsi)
    return out
