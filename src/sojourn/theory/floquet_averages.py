"""Packet averages of Floquet sidebands (PHYSICS §Driven potentials): what a
run's outgoing packets carry in each sideband, for the run's own PacketInfo.

Two numbers per channel and order n. ``stationary``: ∫|ψ̃₀(k)|² P_n(k) dk /
∫|ψ̃₀|² dk, the probability the packet scatters into sideband n. ``windowed``:
the probability the outgoing spectrum holds at energies E₀ + nħω ± ħω/2 (the
window a measurement integrates over), which also counts the tails of the
neighbouring sidebands where the packet's band is not narrow against ħω.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Sequence

import numpy as np

from ..errors import TheoryError
from ..model.packets import PacketInfo
from .averages import K_SPAN_AVERAGES
from .floquet import DrivenLayers, driven_layers, floquet_scatter


@dataclass(frozen=True)
class PacketSidebands:
    """Per order n (``orders``): its energy E₀ + nħω and, per channel, the
    stationary and the windowed packet probabilities (see the module note)."""

    orders: tuple
    energy: dict
    stationary: dict        # channel -> {order: probability}
    windowed: dict          # channel -> {order: probability}
    omega: float


def packet_sidebands(potential, packet: PacketInfo, *, hbar: float, mass: float,
                     orders: Sequence[int] = (-2, -1, 0, 1, 2), nodes: int = 24,
                     tol: float = 1e-9) -> PacketSidebands:
    """Packet averages of R_n(k), T_n(k) with the incident weights |ψ̃₀(k)|²
    (Gaussian in k, centre |k₀|, rms σ_k, over k₀ ± 8σ_k as `theory.averages`;
    energies E(k) = level + ħ²k²/2m): composite Gauss–Legendre on pieces cut
    where a sideband channel opens and at the windows' edges, doubled until
    no average changes by more than `tol`. `potential` is a Potential or
    DrivenLayers; the packet's sign of k₀ gives the incidence side."""
    if not isinstance(packet, PacketInfo):
        raise TheoryError(f"packet must be a PacketInfo (got {type(packet).__name__})")
    if not (hbar > 0 and mass > 0 and packet.sigma_k > 0 and packet.k0 != 0):
        raise TheoryError("hbar, mass, the packet's σ_k and k₀ must be nonzero and positive")
    layers = potential if isinstance(potential, DrivenLayers) else driven_layers(potential, hbar)
    direction = "right" if packet.k0 > 0 else "left"
    seen = layers.mirrored() if direction == "left" else layers
    k0, sk, level = abs(packet.k0), packet.sigma_k, packet.level
    c = hbar ** 2 / (2 * mass)
    hw = hbar * layers.omega
    E0 = packet.energy
    inc = seen.levels[0]
    lo, hi = max(k0 - K_SPAN_AVERAGES * sk, k0 / 100), k0 + K_SPAN_AVERAGES * sk
    if inc >= level + c * hi ** 2:
        raise TheoryError("the packet's band lies below the incidence-side level")
    lo = max(lo, math.sqrt(max(inc - level, 0.0) / c) * (1 + 1e-12))
    edges = set()
    for n in range(-60, 61):           # channel openings and window edges, in incident energy
        edges.update(side - n * hw for side in (seen.levels[0], seen.levels[-1]))
        edges.add(E0 + (n + 0.5) * hw)
    ks = {math.sqrt((e - level) / c) for e in edges if e > level}
    cuts = sorted({lo, hi} | {k for k in ks if lo < k < hi})
    orders = tuple(int(n) for n in orders)

    def sums(count):
        x, w = np.polynomial.legendre.leggauss(count)
        a, b = np.array(cuts[:-1]), np.array(cuts[1:])
        k = (0.5 * (b - a)[:, None] * x + 0.5 * (a + b)[:, None]).ravel()
        wk = (0.5 * (b - a)[:, None] * w).ravel() * np.exp(-0.5 * ((k - k0) / sk) ** 2)
        E = level + c * k ** 2
        sc = floquet_scatter(seen, E, hbar=hbar, mass=mass)
        shift = np.rint((E - E0) / hw).astype(int)        # outgoing n' lands in n' + shift
        Z = float(np.sum(wk))
        out = {}
        for channel in ("reflection", "transmission"):
            P = sc.T if channel == "transmission" else sc.R
            for n in orders:
                out[("stationary", channel, n)] = float(np.sum(wk * sc.order(n, channel))) / Z
                src = n - shift + sc.sidebands            # column of the sideband landing in n
                ok = (src >= 0) & (src < P.shape[1])
                vals = np.where(ok, P[np.arange(len(E)), np.clip(src, 0, P.shape[1] - 1)], 0.0)
                out[("windowed", channel, n)] = float(np.sum(wk * vals)) / Z
        return out

    count = nodes
    prev = sums(count)
    while count < 16 * nodes:
        count *= 2
        cur = sums(count)
        if max(abs(cur[key] - prev[key]) for key in cur) <= tol:
            break
        prev = cur
    pick = {kind: {ch: {n: cur[(kind, ch, n)] for n in orders}
                   for ch in ("reflection", "transmission")}
            for kind in ("stationary", "windowed")}
    return PacketSidebands(orders, {n: E0 + n * hw for n in orders}, pick["stationary"],
                           pick["windowed"], layers.omega)
