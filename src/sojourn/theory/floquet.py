"""Floquet scattering by driven piecewise-constant potentials (PHYSICS §Driven
potentials): sideband amplitudes r_n, t_n and probabilities R_n, T_n, the
weak-drive closed form for a rectangular barrier and the Büttiker–Landauer
time (packet averages: `floquet_averages`).

A layer j carries a static level V_j and a drive V1_j·cos(ωt + φ_j), one ω
for all. Inside it ψ = e^{−iβ_j sin(ωt+φ_j)} χ with β_j = V1_j/ħω and χ a
static-layer Floquet state Σ_n (a_n e^{ik_n x} + b_n e^{−ik_n x}) e^{−i(E+nħω)t/ħ},
k_n = √(2m(E + nħω − V_j))/ħ (iκ where closed). At an interface χ and χ'
are carried across by the Toeplitz matrix P_nm = J_{m−n}(γ) e^{i(m−n)δ}, with
γe^{iδ} = β_{j+1}e^{iφ_{j+1}} − β_j e^{iφ_j} (Jacobi–Anger). Sidebands −N…N;
the matching is solved from the right as a reflection matrix (every layer's
amplitudes referenced at the edge an evanescent wave decays from, so opaque
layers stay exact) and N is raised until R_n, T_n settle.

Conventions as `theory.scattering`: incidence from the left in sideband 0,
ψ = e^{ik(x−x_r)} + Σ r_n e^{−ik_n(x−x_r)} e^{−inωt} left, Σ t_n e^{ik_n(x−x_t)} e^{−inωt}
right (x_r, x_t the first and last interface); R_n = (Re k_n/k_0)|r_n|²,
T_n likewise with the far side's k_n.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Optional, Sequence

import numpy as np
from scipy.special import jv

from ..errors import TheoryError
from ..model.potentials import Potential
from .layers import check_scattering, layers_from_potential

MAX_SIDEBANDS = 60        # the largest N tried
SIDEBAND_TOL = 1e-10      # N is raised until no R_n, T_n changes by more than this


@dataclass(frozen=True)
class DrivenLayers:
    """Constant layers with drives: interfaces ``boundaries`` (M,), static
    ``levels`` (M+1,), complex drive amplitudes ``drives`` (M+1,) = V1·e^{iφ},
    delta ``couplings`` (M,) = 2mα/ħ² (static), one angular frequency ``omega``."""

    boundaries: np.ndarray
    levels: np.ndarray
    drives: np.ndarray
    couplings: np.ndarray
    omega: float

    def mirrored(self) -> "DrivenLayers":
        """The same potential under x → −x (incidence from the right)."""
        return DrivenLayers(-self.boundaries[::-1].copy(), self.levels[::-1].copy(),
                            self.drives[::-1].copy(), self.couplings[::-1].copy(), self.omega)

    def with_omega(self, omega: float) -> "DrivenLayers":
        return replace(self, omega=float(omega))


def driven_layers(potential: Potential, hbar: float) -> DrivenLayers:
    """The potential's exact layers with each layer's summed drive (a layer is
    driven by every term whose drive interval holds its midpoint). Refuses
    what Floquet theory with one frequency cannot treat."""
    check_scattering(potential)
    if potential.time_formulas():
        raise TheoryError("a formula in t has no Floquet prediction (only `drive` "
                          "oscillations V1·cos(ωt + φ) on piecewise-constant terms have one)")
    if not potential.piecewise_constant:
        raise TheoryError("Floquet theory here needs a piecewise-constant potential "
                          "(steps, barriers, wells)")
    drives = potential.drives()
    omegas = {d.angular_frequency for d, _ in drives}
    if len(omegas) > 1:
        raise TheoryError(f"the drives have different angular frequencies "
                          f"({', '.join(f'{w:g}' for w in sorted(omegas))}): one is needed")
    static = layers_from_potential(potential, hbar)
    b = static.boundaries
    mids = np.concatenate(([b[0] - 1.0] if b.size else [0.0], 0.5 * (b[1:] + b[:-1]),
                           [b[-1] + 1.0] if b.size else []))
    z = np.zeros(len(static.levels), complex)
    for drive, (lo, hi) in drives:
        inside = (mids > lo) & (mids < hi)
        z[inside] += drive.amplitude * np.exp(1j * drive.phase)
    omega = omegas.pop() if omegas else 1.0
    return DrivenLayers(b, static.levels, z, static.couplings, float(omega))


def _mixing(c: complex, orders: np.ndarray) -> np.ndarray:
    """P_nm = J_{m−n}(|c|) e^{i(m−n) arg c}: χ carried across an interface."""
    if c == 0:
        return np.eye(len(orders), dtype=complex)
    lag = orders[None, :] - orders[:, None]
    return jv(lag, abs(c)) * np.exp(1j * lag * np.angle(c))


def _wavenumbers(E: np.ndarray, shifts: np.ndarray, levels: np.ndarray, hbar, mass):
    """k (M+1, nE, S) on the decaying branch (iκ where closed). Exactly at a
    level the two waves of a layer coincide: there E − V is moved off zero by
    1e-12 of the energy scale (the amplitudes are analytic in k² inside)."""
    diff = E[None, :, None] + shifts[None, None, :] - levels[:, None, None]
    scale = 1e-12 * max(float(np.max(np.abs(diff))), 1e-300)
    diff = np.where(np.abs(diff) < scale, scale, diff)
    mag = np.sqrt(2 * mass * np.abs(diff)) / hbar
    return np.where(diff >= 0, mag + 0j, 1j * mag)


def solve_driven(layers: DrivenLayers, energies, hbar: float, mass: float, N: int):
    """(orders, r, t, k_left, k_right) with sidebands −N…N: r, t (nE, 2N+1) for
    incidence in sideband 0 from the left at each energy."""
    E = np.atleast_1d(np.asarray(energies, dtype=float))
    orders = np.arange(-N, N + 1)
    S = orders.size
    hw = hbar * layers.omega
    k = _wavenumbers(E, orders * hw, layers.levels, hbar, mass)
    M = layers.boundaries.size
    e0 = np.zeros((E.size, S), complex)
    e0[:, N] = 1.0
    if M == 0:
        return orders, np.zeros_like(e0), e0, k[0], k[-1]
    beta = layers.drives / hw
    eye = np.eye(S)
    G = np.zeros((E.size, S, S), complex)
    taus = [None] * M
    for i in reversed(range(M)):
        P = _mixing(complex(beta[i + 1] - beta[i]), orders)
        PK = 1j * P[None, :, :] * k[i][:, None, :]
        A = np.block([[np.broadcast_to(-P, G.shape), eye + G],
                      [PK, 1j * k[i + 1][:, :, None] * (eye - G)
                       - layers.couplings[i] * (eye + G)]])
        rhs = np.concatenate([np.broadcast_to(P, G.shape), PK], axis=1)
        X = np.linalg.solve(A, rhs)
        gamma, taus[i] = X[:, :S, :], X[:, S:, :]
        if i > 0:
            D = np.exp(1j * k[i] * (layers.boundaries[i] - layers.boundaries[i - 1]))
            G = D[:, :, None] * gamma * D[:, None, :]
    r = gamma[:, :, N]
    u = e0
    for i in range(M):
        a = np.einsum("eij,ej->ei", taus[i], u)
        if i + 1 < M:
            u = np.exp(1j * k[i + 1] * (layers.boundaries[i + 1] - layers.boundaries[i])) * a
    return orders, r, a, k[0], k[-1]


@dataclass(frozen=True)
class FloquetScattering:
    """Sideband amplitudes and probabilities at an array of energies (rows)
    for orders −N…N (columns; ``orders``); energies of sideband n: E + nħω."""

    energy: np.ndarray
    orders: np.ndarray
    r: np.ndarray
    t: np.ndarray
    k_in: np.ndarray        # (nE, S) on the incidence side
    k_out: np.ndarray       # (nE, S) on the far side
    omega: float
    hbar: float
    sidebands: int          # the N used

    @property
    def R(self) -> np.ndarray:
        return self.k_in.real / self.k_in[:, [self.sidebands]].real * np.abs(self.r) ** 2

    @property
    def T(self) -> np.ndarray:
        return self.k_out.real / self.k_in[:, [self.sidebands]].real * np.abs(self.t) ** 2

    def order(self, n: int, channel: str = "transmission") -> np.ndarray:
        """R_n or T_n at every energy (0 beyond the sidebands kept)."""
        P = self.T if channel == "transmission" else self.R
        if abs(n) > self.sidebands:
            return np.zeros(len(self.energy))
        return P[:, n + self.sidebands]


def floquet_scatter(potential, energies, *, hbar: float, mass: Optional[float] = None,
                    direction: str = "right", sidebands: Optional[int] = None,
                    tol: float = SIDEBAND_TOL) -> FloquetScattering:
    """Floquet scattering of a driven potential (a `Potential` or `DrivenLayers`)
    at total energies above the incidence-side level. Without `sidebands` N is
    raised from a start set by the drive strength until no R_n, T_n changes by
    more than `tol`."""
    if hbar <= 0 or not math.isfinite(hbar):
        raise TheoryError(f"hbar must be finite and > 0 (got {hbar!r})")
    if direction not in ("right", "left"):
        raise TheoryError(f"direction must be 'right' or 'left' (got {direction!r})")
    if isinstance(potential, Potential):
        layers, mass = driven_layers(potential, hbar), potential.mass if mass is None else mass
    elif isinstance(potential, DrivenLayers):
        layers = potential
    else:
        raise TheoryError(f"expected a Potential or DrivenLayers, not {type(potential).__name__}")
    if mass is None or not mass > 0:
        raise TheoryError("the mass must be given and > 0")
    if direction == "left":
        layers = layers.mirrored()
    E = np.atleast_1d(np.asarray(energies, dtype=float))
    if E.size == 0 or not np.all(np.isfinite(E)) or np.any(E <= layers.levels[0]):
        raise TheoryError("energies must be finite and above the incidence-side level "
                          f"{layers.levels[0]:g}")

    def run(n):
        orders, r, t, kl, kr = solve_driven(layers, E, hbar, mass, n)
        return FloquetScattering(E, orders, r, t, kl, kr, layers.omega, hbar, n)

    if sidebands is not None:
        return run(int(sidebands))
    jumps = np.abs(np.diff(layers.drives)) / (hbar * layers.omega)
    n = int(math.ceil(2 * float(np.max(jumps, initial=0.0)))) + 4
    prev = run(n)
    while n < MAX_SIDEBANDS:
        n = min(n + 4, MAX_SIDEBANDS)
        cur = run(n)
        s = slice(n - prev.sidebands, n + prev.sidebands + 1)
        change = max(float(np.max(np.abs(cur.R[:, s] - prev.R))),
                     float(np.max(np.abs(cur.T[:, s] - prev.T))))
        if change <= tol:
            return cur
        prev = cur
    return prev


def weak_drive_sidebands(height: float, width: float, amplitude: float, omega: float,
                         energy: float, *, hbar: float = 1.0, mass: float = 1.0,
                         phase: float = 0.0) -> dict:
    """First-order sidebands of a rectangular barrier (height V0 on [0, a],
    zero outside) driven uniformly by V1·cos(ωt + φ): {±1: (R_{±1}, T_{±1})}.

    t_{±1} = (m/(iħ²k')) (V1/2) e^{∓iφ} ∫₀ᵃ ψ_L'(x) ψ(x) dx and r_{±1} the same
    with ψ_R' (PHYSICS §Driven potentials): ψ the static state at E from the
    left, ψ_R' and ψ_L' the static states at E' = E ± ħω from the left and
    from the right (unit incident amplitude, as in `theory.scattering`)."""

    def inside(E):
        """(A, B, q) of ψ = A e^{iqx} + B e^{−iqx} in the barrier, from the left."""
        kk = np.sqrt(2 * mass * E + 0j) / hbar
        q = np.sqrt(2 * mass * (E - height) + 0j) / hbar
        if q == 0:
            q = 1e-12 + 0j
        ea, eb = np.exp(-1j * q * width), np.exp(1j * q * width)
        t = 2 / (ea * (1 + kk / q) * (1 + q / kk) / 2 + eb * (1 - kk / q) * (1 - q / kk) / 2)
        return t * ea * (1 + kk / q) / 2, t * eb * (1 - kk / q) / 2, q, kk

    def integral(terms):
        """∫₀ᵃ Σ c e^{iαx} dx for (c, α) pairs."""
        total = 0j
        for c, a in terms:
            total += c * (width if abs(a) * width < 1e-12 else
                          (np.exp(1j * a * width) - 1) / (1j * a))
        return total

    A, B, q, k = inside(energy)
    out = {}
    for n in (1, -1):
        E2 = energy + n * hbar * omega
        if E2 <= 0:
            out[n] = (0.0, 0.0)
            continue
        A2, B2, q2, k2 = inside(E2)
        # ψ_R'·ψ and ψ_L'(x) = ψ_R'(a − x)·ψ (the barrier is symmetric about a/2)
        right = integral([(A2 * A, q2 + q), (A2 * B, q2 - q), (B2 * A, q - q2),
                          (B2 * B, -q2 - q)])
        left = integral([(A2 * np.exp(1j * q2 * width) * A, q - q2),
                         (A2 * np.exp(1j * q2 * width) * B, -q - q2),
                         (B2 * np.exp(-1j * q2 * width) * A, q2 + q),
                         (B2 * np.exp(-1j * q2 * width) * B, q2 - q)])
        factor = mass / (1j * hbar ** 2 * k2) * 0.5 * amplitude * np.exp(-1j * n * phase)
        ratio = float((k2 / k).real)
        out[n] = (ratio * abs(factor * right) ** 2, ratio * abs(factor * left) ** 2)
    return out


def buttiker_landauer_time(potential: Potential, energy: float, *, hbar: float,
                           cells: int = 200000) -> float:
    """τ_BL = ∫ m dx/(ħκ(x)) over the classically forbidden region V(x) > E
    (Büttiker & Landauer, Phys. Rev. Lett. 49, 1739 (1982)): exact for
    piecewise-constant potentials, a midpoint sum over `cells` otherwise."""
    check_scattering(potential)
    support = potential.support()
    if support is None or support[1] <= support[0]:
        return 0.0
    m = potential.mass
    if potential.piecewise_constant:
        lay = layers_from_potential(potential, hbar)
        d, V = np.diff(lay.boundaries), lay.levels[1:-1]
    else:
        edges = np.linspace(support[0], support[1], cells + 1)
        d, V = np.diff(edges), potential(0.5 * (edges[1:] + edges[:-1]))
    over = V > energy
    kappa = np.sqrt(2 * m * (V[over] - energy)) / hbar
    return float(np.sum(m * d[over] / (hbar * kappa)))


def sideband_asymmetry(layers: DrivenLayers, energy: float, omegas: Sequence[float], *,
                       hbar: float, mass: float) -> np.ndarray:
    """T_{+1}/T_{−1} against ω at one energy (NaN where the −1 channel is closed):
    near 1 for ω·τ_BL ≪ 1, growing past ω·τ_BL ≈ 1 (Büttiker & Landauer 1982)."""
    out = []
    for w in omegas:
        sc = floquet_scatter(layers.with_omega(w), [energy], hbar=hbar, mass=mass)
        lower = float(sc.order(-1)[0])
        out.append(float(sc.order(1)[0]) / lower if lower > 0 else math.nan)
    return np.array(out)
