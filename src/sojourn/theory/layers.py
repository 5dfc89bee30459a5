"""A potential as constant layers, and the layer solver (PHYSICS §4).

A potential is a sequence of constant layers: exact for piecewise-constant
potentials (delta terms become jumps of ψ' at an interface), midpoint slices
for smooth ones. The solver recurs the local reflection ratio ρ from the right
to the left: through an evanescent layer ρ is multiplied by e^{−2κd}, so the
recursion never grows and opaque barriers stay exact (the S-matrix
composition written for one incident side). Transmission amplitudes are sums
of logarithms. Energy derivatives are propagated alongside analytically
(forward-mode differentiation of the matching conditions).
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Optional, Sequence

import numpy as np

from ..errors import TheoryError
from ..model.potentials import Potential

# an energy is "at" an inner level when k·(layer width) falls below this; the
# state is then the mean of the states at E ± δ, where k·width ≥ this on both
# sides (the state is analytic in E: error ~ (kw)⁴ ≈ 1e-12, round-off ~ 1e-13)
AT_LEVEL_KW = 1e-3


@dataclass(frozen=True)
class Layers:
    """A potential as constant layers: interfaces at ``boundaries`` (M,),
    values ``levels`` (M+1,) left of the first, between, and right of the last
    interface, and delta couplings ``couplings`` (M,) = 2mα/ħ² at each
    interface (ψ' jumps by coupling·ψ)."""

    boundaries: np.ndarray
    levels: np.ndarray
    couplings: np.ndarray

    def mirrored(self) -> "Layers":
        """The same potential under x → −x (for incidence from the right)."""
        return Layers(-self.boundaries[::-1].copy(), self.levels[::-1].copy(),
                      self.couplings[::-1].copy())

    @property
    def size(self) -> int:
        return len(self.boundaries)


def check_scattering(potential: Potential) -> None:
    """Refuse potentials without constant finite levels far left and far right."""
    if potential.confining:
        raise TheoryError("not a scattering potential: it confines the particle (a harmonic "
                          "term); stationary scattering theory needs constant levels far left "
                          "and far right")
    left, right = potential.levels()
    if not (math.isfinite(left) and math.isfinite(right)):
        raise TheoryError("not a scattering potential: its levels far left/right are not finite")


def _intervals(potential: Potential) -> list[float]:
    """Sorted distinct edges: support ends, breakpoints and delta positions inside it."""
    support = potential.support()
    if support is None:
        return []
    a, b = support
    points = {a, b}
    points.update(p for p in potential.breakpoints() if a <= p <= b)
    points.update(p for p, _ in potential.deltas())
    return sorted(points)


def _couplings(potential: Potential, hbar: float) -> dict:
    out: dict = {}
    for pos, alpha in potential.deltas():
        out[pos] = out.get(pos, 0.0) + 2 * potential.mass * alpha / hbar ** 2
    return out


def piece_counts(potential: Potential, cells: int) -> list[int]:
    """About `cells` slices in total, distributed over the pieces by length (≥ 1 each)."""
    lengths = np.diff(_intervals(potential))
    total = float(np.sum(lengths))
    return [max(1, int(round(cells * L / total))) if total > 0 else 1 for L in lengths]


def _from_bounds(potential: Potential, hbar: float, bounds: np.ndarray) -> Layers:
    left, right = potential.levels()
    mids = 0.5 * (bounds[1:] + bounds[:-1])
    inner = np.asarray(potential(mids), dtype=float) if mids.size else np.zeros(0)
    g_of = _couplings(potential, hbar)
    couplings = np.array([g_of.get(float(p), 0.0) for p in bounds])
    return Layers(bounds, np.concatenate([[left], inner, [right]]), couplings)


def sliced_layers(potential: Potential, hbar: float, counts: Sequence[int]) -> Layers:
    """Layers with exactly counts[i] midpoint cells on the i-th piece (O(h²))."""
    edges = _intervals(potential)
    pieces = [np.linspace(a, b, n + 1)[:-1] for a, b, n in zip(edges[:-1], edges[1:], counts)]
    return _from_bounds(potential, hbar, np.concatenate(pieces + [np.array([edges[-1]])]))


def layers_from_potential(potential: Potential, hbar: float, cells: Optional[int] = None) -> Layers:
    """Constant layers for `potential` (mass taken from it).

    Piecewise-constant potentials give their exact layers (``cells`` ignored).
    Otherwise the support is cut at the breakpoints and each piece is sliced
    into cells (about ``cells`` in total) valued at their midpoints.
    """
    check_scattering(potential)
    edges = _intervals(potential)
    if not edges:
        return Layers(np.zeros(0), np.array([potential.levels()[0]]), np.zeros(0))
    if potential.piecewise_constant or cells is None:
        return _from_bounds(potential, hbar, np.array(edges, dtype=float))
    return sliced_layers(potential, hbar, piece_counts(potential, cells))


def _wavenumbers(E: np.ndarray, V: np.ndarray, hbar: float, mass: float):
    """k (R, nE) on the decaying branch (k = iκ, κ > 0 where E < V) and dk/dE."""
    diff = E[None, :] - V[:, None]
    mag = np.sqrt(2 * mass * np.abs(diff)) / hbar
    k = np.where(diff >= 0, mag + 0j, 1j * mag)
    with np.errstate(divide="ignore", invalid="ignore"):
        dk = mass / (hbar ** 2 * k)
    return k, dk


@dataclass
class Solution:
    """Amplitudes at energies E. ``shifted`` = (mask, below, above): energies
    at an inner level, whose states are the mean of those two solutions."""

    r: np.ndarray
    t: np.ndarray
    dr: np.ndarray
    dt: np.ndarray
    k: np.ndarray          # (M+1, nE)
    A: Optional[np.ndarray]   # forward amplitude at each region's left reference
    B: Optional[np.ndarray]   # backward amplitude at each region's right reference
    left_ref: np.ndarray   # (M+1,)
    right_ref: np.ndarray  # (M+1,)
    shifted: Optional[tuple] = None


def _solve(layers: Layers, E: np.ndarray, hbar: float, mass: float,
           x_r: float, x_t: float, amplitudes: bool, level_weights=None) -> Solution:
    """r, t, dr/dE, dt/dE for constant layers at energies E (all above the left level).

    With ``level_weights`` w (M+1,) the returned derivatives are
    Σ_i w_i ∂/∂(E − V_i) (each dk_i/dE scaled by w_i): all 1 is d/dE; −1 on a
    subset of layers and 0 elsewhere is ∂/∂V for a uniform shift V of those
    layers' levels (the Larmor clock's derivative)."""
    b, g = layers.boundaries, layers.couplings
    M, nE = len(b), len(E)
    K, DK = _wavenumbers(E, layers.levels, hbar, mass)
    if level_weights is not None:
        DK = DK * np.asarray(level_weights, dtype=float)[:, None]
    if M == 0:
        t = np.exp(1j * K[0] * (x_t - x_r))
        return Solution(np.zeros(nE, complex), t, np.zeros(nE, complex),
                        t * 1j * DK[0] * (x_t - x_r), K, np.ones((1, nE), complex),
                        np.zeros((1, nE), complex), np.array([x_r]), np.array([x_r]))
    rho = np.empty((M, nE), complex)
    logf = np.empty((M, nE), complex)
    dlogf = np.empty((M, nE), complex)
    sigma = np.zeros(nE, complex)
    dsigma = np.zeros(nE, complex)
    drho0 = None
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        for i in range(M - 1, -1, -1):
            k, q, dk, dq, gi = K[i], K[i + 1], DK[i], DK[i + 1], g[i]
            ops, oms = 1 + sigma, 1 - sigma
            num = 1j * k * ops - 1j * q * oms + gi * ops
            den = 1j * k * ops + 1j * q * oms - gi * ops
            dnum = 1j * dk * ops + (1j * k + 1j * q + gi) * dsigma - 1j * dq * oms
            dden = 1j * dk * ops + (1j * k - 1j * q - gi) * dsigma + 1j * dq * oms
            rh = num / den
            drh = (dnum - rh * dden) / den
            rho[i] = rh
            logf[i] = np.log(2j * k / den)
            dlogf[i] = dk / k - dden / den
            if i > 0:
                d = b[i] - b[i - 1]
                ph = np.exp(2j * k * d)
                sigma = rh * ph
                dsigma = (drh + rh * 2j * dk * d) * ph
            else:
                drho0 = drh
        k0, dk0, kM, dkM = K[0], DK[0], K[M], DK[M]
        ph0 = np.exp(2j * k0 * (b[0] - x_r))
        r = rho[0] * ph0
        dr = (drho0 + rho[0] * 2j * dk0 * (b[0] - x_r)) * ph0
        widths = np.diff(b)
        logt = (1j * k0 * (b[0] - x_r) + logf.sum(axis=0)
                + 1j * (K[1:M] * widths[:, None]).sum(axis=0) + 1j * kM * (x_t - b[-1]))
        dlogt = (1j * dk0 * (b[0] - x_r) + dlogf.sum(axis=0)
                 + 1j * (DK[1:M] * widths[:, None]).sum(axis=0) + 1j * dkM * (x_t - b[-1]))
        t = np.exp(logt)
        dt = t * dlogt
    sol = Solution(r, t, dr, dt, K, None, None,
                   np.concatenate([[b[0]], b]), np.concatenate([b, [b[-1]]]))
    if amplitudes:
        # forward amplitudes by cumulative sums of logarithms (no loop over layers)
        steps = np.empty((M + 1, nE), complex)
        steps[0] = 1j * k0 * (b[0] - x_r)                     # region 0, referenced at b[0]
        steps[1:] = logf
        steps[2:] += 1j * K[1:M] * widths[:, None]            # across each inner layer
        with np.errstate(over="ignore", under="ignore", invalid="ignore"):
            logA = np.cumsum(steps, axis=0)                   # at each region's left reference
            A = np.exp(logA)
            B = np.zeros((M + 1, nE), complex)
            B[0] = A[0] * rho[0]
            if M > 1:
                B[1:M] = np.exp(logA[1:M] + 1j * K[1:M] * widths[:, None]) * rho[1:M]
        sol.A, sol.B = A, B
    return sol


def _level_shifts(layers: Layers, E: np.ndarray, hbar: float, mass: float) -> np.ndarray:
    """δ > 0 where E sits at an inner layer's level, else 0. The window keeps
    k·width ≥ AT_LEVEL_KW at E ± δ, capped at 5e-8 of the energy scale so that a
    thin slice never shifts the energy of the whole solution noticeably."""
    inner = layers.levels[1:-1]
    if not inner.size:
        return np.zeros(E.shape)
    widths = np.diff(layers.boundaries)
    scale = np.maximum(float(np.max(np.abs(layers.levels - layers.levels[0]))), np.abs(E))
    near = np.minimum((hbar ** 2 * (AT_LEVEL_KW / widths) ** 2 / (2 * mass))[:, None],
                      5e-8 * scale[None, :])                             # (M−1, nE)
    hit = np.abs(E[None, :] - inner[:, None]) < near
    return np.max(np.where(hit, 2 * near, 0.0), axis=0)


def solve_layers(layers: Layers, E: np.ndarray, hbar: float, mass: float,
                 x_r: float, x_t: float, amplitudes: bool = False,
                 level_weights=None) -> Solution:
    """`_solve`, regular at an inner layer's level (where e^{±ikx} degenerate):
    there r, t and their derivatives are the mean over E ± δ, and the states and
    dwell times are the mean of the states at E ± δ (all analytic in E).
    ``level_weights``: see `_solve` (derivatives along a subset of levels)."""
    delta = _level_shifts(layers, E, hbar, mass)
    sol = _solve(layers, E, hbar, mass, x_r, x_t, amplitudes, level_weights)
    hit = delta > 0
    if np.any(hit):
        lo = _solve(layers, E[hit] - delta[hit], hbar, mass, x_r, x_t, amplitudes,
                    level_weights)
        hi = _solve(layers, E[hit] + delta[hit], hbar, mass, x_r, x_t, amplitudes,
                    level_weights)
        for name in ("r", "t", "dr", "dt"):
            getattr(sol, name)[hit] = 0.5 * (getattr(lo, name) + getattr(hi, name))
        sol.shifted = (hit, lo, hi)
    return sol


def _dwell_plain(sol: Solution, layers: Layers, region, hbar, mass):
    a, c = region
    edges = np.concatenate([[-np.inf], layers.boundaries, [np.inf]])
    p = np.maximum(a, edges[:-1])[:, None]
    q = np.minimum(c, edges[1:])[:, None]
    L = np.maximum(q - p, 0.0)
    live = (L[:, 0] > 0)
    if not np.any(live):
        return np.zeros(sol.k.shape[1])
    k, A, B = sol.k[live], sol.A[live], sol.B[live]
    p, L = p[live], L[live]
    lref, rref = sol.left_ref[live][:, None], sol.right_ref[live][:, None]
    q = p + L
    ki, kr = k.imag, k.real
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        G = np.where(np.abs(2 * ki * L) < 1e-12, L, -np.expm1(-2 * ki * L) / (2 * ki))
        fwd = np.abs(A) ** 2 * np.exp(-2 * ki * (p - lref)) * G
        bwd = np.abs(B) ** 2 * np.exp(2 * ki * (q - rref)) * G
        phase = np.exp(-1j * k * lref - 1j * np.conj(k) * rref + 2j * kr * p)
        osc = np.where(np.abs(kr * L) < 1e-12, L + 0j, np.expm1(2j * kr * L) / (2j * kr))
        cross = 2 * np.real(A * np.conj(B) * phase * osc)
    bwd = np.where(B == 0, 0.0, bwd)
    cross = np.where(B == 0, 0.0, cross)
    total = np.sum(fwd + bwd + cross, axis=0)
    return total / (hbar * sol.k[0].real / mass)


def dwell_time(sol: Solution, layers: Layers, region: tuple[float, float], hbar, mass):
    """Büttiker dwell time: ∫_region |ψ|² dx / (ħk/m), region by region in closed
    form (each term bounded by its value at its own reference edge: no overflow)."""
    out = _dwell_plain(sol, layers, region, hbar, mass)
    if sol.shifted is not None:
        hit, lo, hi = sol.shifted
        out[hit] = 0.5 * (_dwell_plain(lo, layers, region, hbar, mass)
                          + _dwell_plain(hi, layers, region, hbar, mass))
    return out


def _state_plain(sol: Solution, layers: Layers, x: np.ndarray) -> np.ndarray:
    region = np.searchsorted(layers.boundaries, x, side="right")
    k = sol.k[region]                       # (N, nE)
    A, B = sol.A[region], sol.B[region]
    lref, rref = sol.left_ref[region][:, None], sol.right_ref[region][:, None]
    xx = x[:, None]
    with np.errstate(over="ignore", invalid="ignore"):
        psi = A * np.exp(1j * k * (xx - lref))
        back = B * np.exp(-1j * k * (xx - rref))
    psi = psi + np.where(B == 0, 0.0, back)
    return psi.T


def evaluate_state(sol: Solution, layers: Layers, x: np.ndarray) -> np.ndarray:
    """ψ_E(x) (shape (nE, len(x))) from a solution computed with amplitudes."""
    out = _state_plain(sol, layers, x)
    if sol.shifted is not None:
        hit, lo, hi = sol.shifted
        out[hit] = 0.5 * (_state_plain(lo, layers, x) + _state_plain(hi, layers, x))
    return out
