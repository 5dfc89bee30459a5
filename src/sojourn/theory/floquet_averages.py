"""Packet averages of Floquet sidebands (PHYSICS §Driven potentials): what a
run's outgoing packets carry in each sideband, for the run's own PacketInfo.

Two numbers per channel and order n. ``stationary``: ∫|ψ̃₀(k)|² P_n(k) dk /
∫|ψ̃₀|² dk, the probability the packet scatters into sideband n. ``windowed``:
the probability the outgoing spectrum holds at energies E₀ + nħω ± ħω/2 (the
window a measurement integrates over). Where the packet's band is not narrow
against ħω the tails of neighbouring sidebands reach into a window and
interfere there: the outgoing momentum amplitude is the coherent sum

    C(q) = Σ_n ψ̃₀(k_n) e^{ik_n x_r} t_n(k_n) e^{−iq x_t} q/k_n   (transmission; k_n the
    incident k with E(k) + nħω = E(q); reflection: r_n, e^{ik_n x_r}, e^{−iq x_r}... see
    PHYSICS §Driven potentials)

and ``windowed`` integrates |C(q)|² over the window (the drive's phase at t = 0
and the packet's start enter through t_n and ψ̃₀).
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


WINDOW_NODES = 32      # Gauss–Legendre nodes per piece of a window (the band's images cut it)


def _incident(k, k0, width, center):
    """ψ̃₀(k) of the Gaussian of PHYSICS §2 (forward frame)."""
    return ((2 * math.pi * width ** 2) ** -0.25 * width * math.sqrt(2)
            * np.exp(-(width * (k - k0)) ** 2 - 1j * (k - k0) * center))


def coherent_windows(seen: DrivenLayers, k0: float, width: float, center: float, level: float,
                     energy0: float, orders, hbar: float, mass: float, sidebands: int,
                     band: tuple) -> dict:
    """{(channel, n): ∫|C(q)|² dq over E₀ + nħω ± ħω/2} for incidence from the
    left on `seen` (the forward frame), C the coherent sum of the module note;
    incident wavenumbers outside `band` (k_lo, k_hi) carry no weight.

    An outgoing energy is u + nħω with u in the central window: the incident
    energies feeding it, u + jħω, serve every window at once, so one Floquet
    solve on the nodes u (cut where the band's images start and end) and the
    j that reach the band gives all windows."""
    c = hbar ** 2 / (2 * mass)
    hw = hbar * seen.omega
    x_r, x_t = (float(seen.boundaries[0]), float(seen.boundaries[-1])) if seen.boundaries.size \
        else (0.0, 0.0)
    e_lo, e_hi = max(level + c * band[0] ** 2, seen.levels[0]), level + c * band[1] ** 2
    u_lo, u_hi = energy0 - hw / 2, energy0 + hw / 2
    js = np.arange(int(math.floor((e_lo - u_hi) / hw)), int(math.ceil((e_hi - u_lo) / hw)) + 1)
    cuts = sorted({u_lo, u_hi} | {e - j * hw for j in js for e in (e_lo, e_hi)
                                  if u_lo < e - j * hw < u_hi})
    nodes, weights = np.polynomial.legendre.leggauss(WINDOW_NODES)
    u = np.concatenate([0.5 * (b - a) * nodes + 0.5 * (a + b) for a, b in zip(cuts[:-1], cuts[1:])])
    wu = np.concatenate([0.5 * (b - a) * weights for a, b in zip(cuts[:-1], cuts[1:])])
    E_in = u[:, None] + js[None, :] * hw                      # (nodes, j)
    ok = (E_in > e_lo) & (E_in < e_hi)
    out = {(ch, n): 0.0 for ch in ("reflection", "transmission") for n in orders}
    if not ok.any():
        return out
    sc = floquet_scatter(seen, E_in[ok], hbar=hbar, mass=mass, sidebands=sidebands)
    node, which = np.nonzero(ok)
    k = np.sqrt((E_in[ok] - level) / c)
    feed = _incident(k, k0, width, center) * np.exp(1j * k * x_r)
    rows = np.arange(k.size)
    for channel, side, amp in (("reflection", seen.levels[0], sc.r),
                               ("transmission", seen.levels[-1], sc.t)):
        for n in orders:
            kinetic = u + n * hw - side
            open_ = kinetic > 0
            q = np.sqrt(np.where(open_, kinetic, 0.0) / c)
            col = n - js[which] + sc.sidebands            # the sideband n − j lands in window n
            inside = (col >= 0) & (col < sc.orders.size) & open_[node]
            a = np.where(inside, amp[rows, np.clip(col, 0, sc.orders.size - 1)], 0.0)
            qn = q[node]
            phase = np.exp(-1j * qn * x_t) if channel == "transmission" else np.exp(1j * qn * x_r)
            C = np.zeros(u.size, complex)
            np.add.at(C, node, feed * phase * a * qn / k)
            dq_dE = np.where(open_, 1.0 / (2 * c * np.where(open_, q, 1.0)), 0.0)
            out[(channel, n)] = float(np.sum(wu * dq_dE * np.abs(C) ** 2))
    return out


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
        sc = floquet_scatter(seen, E, hbar=hbar, mass=mass, sidebands=N)
        Z = float(np.sum(wk))
        return {("stationary", channel, n): float(np.sum(wk * sc.order(n, channel))) / Z
                for channel in ("reflection", "transmission") for n in orders}

    # the sidebands the band needs: converged at its centre and edges, two more kept
    probe = level + c * np.array([lo, k0, hi]) ** 2
    N = floquet_scatter(seen, probe, hbar=hbar, mass=mass).sidebands + 2
    count = nodes
    prev = sums(count)
    while count < 16 * nodes:
        count *= 2
        cur = sums(count)
        if max(abs(cur[key] - prev[key]) for key in cur) <= tol:
            break
        prev = cur
    # the packet's own normalisation: ∫|ψ̃₀|² dk over the band (1 up to its excluded tails)
    center = packet.center if direction == "right" else -packet.center
    win = coherent_windows(seen, k0, packet.width, center, level, E0, orders, hbar, mass, N,
                           (lo, hi))
    pick = {ch: {n: cur[("stationary", ch, n)] for n in orders}
            for ch in ("reflection", "transmission")}
    windowed = {ch: {n: win[(ch, n)] for n in orders} for ch in ("reflection", "transmission")}
    return PacketSidebands(orders, {n: E0 + n * hw for n in orders}, pick, windowed,
                           layers.omega)
