"""Sidebands measured from a driven run (PHYSICS §Driven potentials): the
probability each outgoing packet carries at energies E₀ + nħω ± ħω/2, read
off its momentum spectrum once it has left the potential, beside the
packet-averaged Floquet prediction for the same window.

An outgoing packet is free once separated, so its spectrum |C(q)|² no longer
changes; on the drive's far side (a driven step's high side) ψ carries the
drive's phase e^{−iβ sin(ωt+φ)}, uniform in x, which |C(q)|² does not see.
"""
from __future__ import annotations

import math
from typing import Optional

import numpy as np

from ..errors import SojournError
from ..model.packets import PacketInfo
from ..theory.floquet_averages import packet_sidebands
from .frame import ForwardRun, separated
from .spectra import momentum_amplitude

WINDOW_NODES = 64        # Gauss–Legendre nodes per sideband window at least
NODES_PER_WIDTH = 16     # ... and per rms width of a sideband's peak in q
UNDEFINED = ("undefined: a driven potential does not conserve energy, so each outgoing packet "
             "is a sum of sidebands and has no phase ħ·dφ/dE; they are not measured")


def drive_frequency(potential) -> Optional[float]:
    """The drives' angular frequency (the largest if they differ; None without drives)."""
    drives = potential.drives()
    return max(d.angular_frequency for d, _ in drives) if drives else None


def reported_orders(potential, hbar: float) -> tuple:
    """Sidebands −n…n reported: n = 2, or more for a strong drive (V1/ħω + 1)."""
    drives = potential.drives()
    omega = drive_frequency(potential)
    if omega is None:
        return (0,)
    beta = sum(abs(d.amplitude) for d, _ in drives) / (hbar * omega)
    n = max(2, int(math.ceil(beta)) + 1)
    return tuple(range(-n, n + 1))


def window_probability(x, psi, dx, q_lo: float, q_hi: float, width_q: float) -> float:
    """∫|C(q)|² dq over [q_lo, q_hi] (Gauss–Legendre; C of `momentum_amplitude`)."""
    if q_hi <= q_lo:
        return 0.0
    count = int(max(WINDOW_NODES, NODES_PER_WIDTH * (q_hi - q_lo) / max(width_q, 1e-300)))
    nodes, weights = np.polynomial.legendre.leggauss(min(count, 2048))
    q = 0.5 * (q_hi - q_lo) * nodes + 0.5 * (q_hi + q_lo)
    c, _ = momentum_amplitude(x, psi, q, dx)
    return float(np.sum(0.5 * (q_hi - q_lo) * weights * np.abs(c) ** 2))


def measured_sidebands(run: ForwardRun, stats: dict, channel: str, omega: float,
                       orders) -> Optional[dict]:
    """{order: probability} of one channel at its last separated snapshot (None
    if the outgoing packet never separated), per unit incident probability."""
    ok = np.nonzero(separated(run, stats, channel))[0]
    if ok.size == 0:
        return None
    psi = run.psi(int(ok[-1]))
    hbar, m, info = run.hbar, run.mass, run.info
    if channel == "reflection":
        mask, level, sign = run.x < run.x_r, info.level, -1.0
    else:
        mask, level, sign = run.x > run.x_t, run.level_out, 1.0
    incident = float(run.observables["norm"][0])
    hw = hbar * omega
    out = {}
    for n in orders:
        lo, hi = (info.energy + (n + s) * hw - level for s in (-0.5, 0.5))
        if hi <= 0:
            out[n] = 0.0
            continue
        q_lo, q_hi = (math.sqrt(2 * m * max(e, 0.0)) / hbar for e in (lo, hi))
        q_mid = math.sqrt(2 * m * max(info.energy + n * hw - level, 0.0)) / hbar
        # a sideband's peak is σ_k wide in k, k/q times that in q
        width = info.sigma_k * abs(info.k0) / max(q_mid, info.sigma_k)
        a, b = sorted((sign * q_lo, sign * q_hi))
        out[n] = window_probability(run.x[mask], psi[mask], run.dx, a, b, width) / incident
    return out


def sideband_entries(run: ForwardRun, stats: dict, potential, packet: PacketInfo,
                     channels) -> tuple[dict, list]:
    """({channel: [{"order", "energy", "probability", "predicted", "stationary",
    "deviation"}]}, warnings) for the measured channels of a driven run;
    `packet` is the run's own (signed) PacketInfo, `potential` the scenario's."""
    omega = drive_frequency(potential)
    warnings = []
    if omega is None:
        return {}, ["the potential changes in time only through a formula in t: no sidebands "
                    "at a single frequency to measure"]
    orders = reported_orders(potential, run.hbar)
    try:
        theory = packet_sidebands(potential, packet, hbar=run.hbar, mass=run.mass,
                                  orders=orders)
    except SojournError as exc:
        theory = None
        warnings.append(f"no Floquet prediction for the sidebands: {exc}")
    out = {}
    for channel in channels:
        measured = measured_sidebands(run, stats, channel, omega, orders)
        if measured is None:
            warnings.append(f"{channel}: the outgoing packet never separated from the "
                            "potential; its sidebands are not measured")
            continue
        rows = []
        for n in orders:
            predicted = theory.windowed[channel][n] if theory is not None else None
            rows.append({"order": n, "energy": packet.energy + n * run.hbar * omega,
                         "probability": measured[n], "predicted": predicted,
                         "stationary": theory.stationary[channel][n] if theory else None,
                         "deviation": None if predicted is None else measured[n] - predicted})
        out[channel] = rows
    return out, warnings
