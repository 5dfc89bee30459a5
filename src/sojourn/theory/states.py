"""Stationary scattering states and the exact time-dependent synthesis
ψ(x, t) = ∫ dk φ̃₀(k) ψ_k(x) e^{−iE(k)t/ħ} built from them (PHYSICS §5)."""
from __future__ import annotations

import math
from typing import Optional

import numpy as np

from ..model.packets import PacketInfo
from ..model.potentials import Potential
from ..errors import TheoryError
from .layers import check_scattering, evaluate_state, layers_from_potential, piece_counts, \
    sliced_layers, solve_layers
from .scattering import check_positive, prepare_energies, reference_points

K_SPAN_SYNTHESIS = 12.0    # synthesis: k0 ± 12 σ_k (ψ̃ itself falls to 2e-16)


def stationary_state(potential: Potential, energies, x, *, hbar: float,
                     x_r: Optional[float] = None, x_t: Optional[float] = None,
                     direction: str = "right", cells: Optional[int] = None) -> np.ndarray:
    """Scattering states ψ_E(x) (shape (nE, len(x))) normalised to the incident
    wave e^{±ik(x−x_r)}, with the same conventions as `scatter`.

    Exact for piecewise-constant potentials; smooth ones are sliced (``cells``,
    default 4096 midpoint cells: O(h²) error inside the potential).
    """
    if direction not in ("right", "left"):
        raise TheoryError(f"direction must be 'right' or 'left' (got {direction!r})")
    check_positive(hbar=hbar)
    check_scattering(potential)
    x_r, x_t = reference_points(potential, x_r, x_t, direction)
    levels = potential.levels()
    E = prepare_energies(energies, levels[0] if direction == "right" else levels[1])
    if potential.piecewise_constant or potential.support() is None:
        layers = layers_from_potential(potential, hbar)
    else:
        layers = sliced_layers(potential, hbar, piece_counts(potential, cells or 4096))
    sign = 1.0
    if direction == "left":
        layers, sign = layers.mirrored(), -1.0
    sol = solve_layers(layers, E, hbar, potential.mass, sign * x_r, sign * x_t, amplitudes=True)
    return evaluate_state(sol, layers, sign * np.asarray(x, dtype=float))


def synthesize(potential: Potential, packet: PacketInfo, times, x, *, hbar: float,
               mass: float, reference: Optional[float] = None, nodes: Optional[int] = None,
               cells: Optional[int] = None, chunk: int = 256) -> np.ndarray:
    """Exact ψ(x, t) (complex, shape (len(times), len(x))) of the packet's
    Gaussian (centre, width, k₀; direction from the sign of k₀) scattered by
    `potential`, r referenced at `reference` (default: the support's edge).

    φ̃₀ is the Fourier amplitude of the Gaussian of `packets.gaussian` written
    in the incident waves e^{ik(x−x_r)} of the incidence-side region, so
    E(k) = V_incidence + ħ²k²/2m and ψ(x, 0) reproduces ψ₀ there (up to its own
    reflected and transmitted tails, negligible when the packet starts far
    from the potential; exact only where V is at that level). The k-integral
    is the trapezoid rule on k₀ ± 12σ_k (k ≤ 0 dropped: weight
    ~exp(−(k₀/σ_k)²/2)); its node spacing puts the aliased copies of the packet
    (period 2π/Δk in x) beyond 4× the region it explores during `times`.
    Exact for piecewise-constant potentials; smooth ones are sliced (``cells``).
    """
    if not isinstance(packet, PacketInfo):
        raise TheoryError(f"packet must be a PacketInfo (got {type(packet).__name__})")
    check_positive(hbar=hbar, mass=mass, width=packet.width)
    if not (math.isfinite(packet.k0) and packet.k0 != 0):
        raise TheoryError(f"the packet's wavenumber must be finite and nonzero (got {packet.k0!r})")
    if chunk < 1:
        raise TheoryError(f"chunk must be at least 1 (got {chunk!r})")
    check_scattering(potential)
    direction = "right" if packet.k0 > 0 else "left"
    left, right = potential.levels()
    level = left if direction == "right" else right
    k0, sk = abs(packet.k0), 1.0 / (2 * packet.width)
    times = np.atleast_1d(np.asarray(times, dtype=float))
    x = np.asarray(x, dtype=float)
    k_lo = max(k0 - K_SPAN_SYNTHESIS * sk, 1e-3 * k0)
    k_hi = k0 + K_SPAN_SYNTHESIS * sk
    if nodes is None:
        support = potential.support() or (packet.center, packet.center)
        lo = min(float(x.min()), support[0], packet.center)
        hi = max(float(x.max()), support[1], packet.center)
        vmax = hbar * k_hi / mass
        reach = (hi - lo) + vmax * float(np.max(np.abs(times))) + 10 * packet.width
        dk = 2 * np.pi / (4 * reach)
        nodes = int(math.ceil((k_hi - k_lo) / dk)) + 1
    k = np.linspace(k_lo, k_hi, nodes)
    wk = np.full(nodes, (k_hi - k_lo) / (nodes - 1))
    wk[0] = wk[-1] = wk[0] / 2
    x_r, x_t = reference_points(potential, reference, None, direction)
    sign = 1.0 if direction == "right" else -1.0
    # φ̃₀(k) for ψ₀ = ∫ dk φ̃₀(k) e^{i s k (x − x_r)}, s = ±1 the direction
    s = packet.width
    x0 = sign * packet.center
    xr = sign * x_r
    phi = ((2 * np.pi * s ** 2) ** -0.25 * (2 * s * math.sqrt(np.pi)) / (2 * np.pi)
           * np.exp(-s ** 2 * (k - k0) ** 2 + 1j * k0 * x0 - 1j * k * (x0 - xr)))
    E = level + (hbar * k) ** 2 / (2 * mass)
    out = np.zeros((len(times), len(x)), complex)
    for start in range(0, nodes, chunk):
        sl = slice(start, start + chunk)
        states = stationary_state(potential, E[sl], x, hbar=hbar, x_r=x_r, x_t=x_t,
                                  direction=direction, cells=cells)
        coeff = (wk[sl] * phi[sl])[None, :] * np.exp(-1j * np.outer(times, E[sl]) / hbar)
        out += coeff @ states
    return out
