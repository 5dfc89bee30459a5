"""Stationary scattering theory for 1D potentials: r(E), t(E), phase delays,
dwell times, packet-averaged predictions and exact time-dependent synthesis.

Conventions (PHYSICS §4–5). Incidence from the left (a packet with
``direction: left`` is handled by mirroring the potential). With reference
points x_r (default: ``measure.reference``, else the left edge of the
potential's support) and x_t (the right edge of the support),

    ψ = e^{ik(x−x_r)} + r e^{−ik(x−x_r)}   left of the potential,
    ψ = t e^{ik'(x−x_t)}                  right of it,

k = √(2m(E−V_left))/ħ, k' = √(2m(E−V_right))/ħ (imaginary, k' = iκ', when the
right channel is closed). R = |r|², T = (k'/k)|t|². Phase delays τ_R = ħ dφ_r/dE
and τ_T = ħ d(arg t)/dE; with these reference points τ_T is the entry-to-exit
time with no free-flight term. Büttiker's dwell time is ∫|ψ|² dx over the
region (default: the support) divided by the incident flux ħk/m. Energies are
total energies, in the scenario's units.

Method. A potential is a sequence of constant layers (exact for piecewise
constant potentials, with delta terms as jumps of ψ' at an interface;
midpoint slicing with Romberg extrapolation in h² for smooth ones). The solver
recurs the local reflection ratio ρ from the right to the left: through an
evanescent layer ρ is multiplied by e^{−2κd}, so the recursion never grows and
opaque barriers stay exact (this is the S-matrix composition written for one
incident side). Transmission amplitudes are accumulated as sums of logarithms.
Energy derivatives are propagated alongside analytically (forward-mode
differentiation of the matching conditions), not by finite differences.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Optional, Sequence

import numpy as np

from ..model.grid import Grid
from ..model.potentials import Potential
from ..errors import TheoryError

__all__ = [
    "TheoryError", "Layers", "Scattering", "ChannelPrediction", "PacketPrediction",
    "layers_from_potential", "scatter", "scatter_scenario", "stationary_state",
    "packet_prediction", "packet_kinematics", "synthesize", "default_energies", "parse_energies", "theory_table", "format_table", "table_csv", "plot_theory",
]

DEFAULT_TOL = 1e-10        # relative tolerance of the slicing refinement
MAX_CELLS = 1 << 16        # finest slicing tried for smooth potentials
K_SPAN_AVERAGES = 8.0      # packet averages: k0 ± 8 σ_k (|ψ̃|² falls to 1e-14)
K_SPAN_SYNTHESIS = 12.0    # synthesis: k0 ± 12 σ_k (ψ̃ itself falls to 2e-16)




# ----------------------------------------------------------------------------------------
# Layered representation


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


def _check_scattering(potential: Potential) -> None:
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


def layers_from_potential(potential: Potential, hbar: float, cells: Optional[int] = None) -> Layers:
    """Constant layers for `potential` (mass taken from it).

    Piecewise-constant potentials give their exact layers (``cells`` ignored).
    Otherwise the support is cut at the breakpoints and each piece is sliced
    into cells (about ``cells`` in total, at least one per piece, distributed by
    length) valued at their midpoints: an O(h²) approximation.
    """
    _check_scattering(potential)
    left, right = potential.levels()
    edges = _intervals(potential)
    g_of = {}
    for pos, alpha in potential.deltas():
        g_of[pos] = g_of.get(pos, 0.0) + 2 * potential.mass * alpha / hbar ** 2
    if not edges:
        return Layers(np.zeros(0), np.array([left]), np.zeros(0))
    if potential.piecewise_constant or cells is None:
        bounds = np.array(edges, dtype=float)
    else:
        lengths = np.diff(edges)
        total = float(np.sum(lengths))
        pieces = []
        for (a, b), length in zip(zip(edges[:-1], edges[1:]), lengths):
            n = max(1, int(round(cells * length / total))) if total > 0 else 1
            pieces.append(np.linspace(a, b, n + 1)[:-1])
        bounds = np.concatenate(pieces + [np.array([edges[-1]])])
    mids = 0.5 * (bounds[1:] + bounds[:-1])
    inner = np.asarray(potential(mids), dtype=float) if mids.size else np.zeros(0)
    levels = np.concatenate([[left], inner, [right]])
    couplings = np.array([g_of.get(float(p), 0.0) for p in bounds])
    return Layers(bounds, levels, couplings)


def _piece_counts(potential: Potential, cells: int) -> list[int]:
    edges = _intervals(potential)
    lengths = np.diff(edges)
    total = float(np.sum(lengths))
    return [max(1, int(round(cells * L / total))) if total > 0 else 1 for L in lengths]


def _sliced(potential: Potential, hbar: float, counts: Sequence[int]) -> Layers:
    """Layers with exactly counts[i] midpoint cells on the i-th piece."""
    left, right = potential.levels()
    edges = _intervals(potential)
    g_of = {}
    for pos, alpha in potential.deltas():
        g_of[pos] = g_of.get(pos, 0.0) + 2 * potential.mass * alpha / hbar ** 2
    pieces = [np.linspace(a, b, n + 1)[:-1] for a, b, n in zip(edges[:-1], edges[1:], counts)]
    bounds = np.concatenate(pieces + [np.array([edges[-1]])])
    mids = 0.5 * (bounds[1:] + bounds[:-1])
    levels = np.concatenate([[left], np.asarray(potential(mids), dtype=float), [right]])
    couplings = np.array([g_of.get(float(p), 0.0) for p in bounds])
    return Layers(bounds, levels, couplings)


# ----------------------------------------------------------------------------------------
# The layer solver


def _wavenumbers(E: np.ndarray, V: np.ndarray, hbar: float, mass: float):
    """k (R, nE) on the decaying branch (k = iκ, κ > 0 where E < V) and dk/dE."""
    diff = E[None, :] - V[:, None]
    mag = np.sqrt(2 * mass * np.abs(diff)) / hbar
    k = np.where(diff >= 0, mag + 0j, 1j * mag)
    with np.errstate(divide="ignore", invalid="ignore"):
        dk = mass / (hbar ** 2 * k)
    return k, dk


@dataclass
class _Solution:
    r: np.ndarray
    t: np.ndarray
    dr: np.ndarray
    dt: np.ndarray
    k: np.ndarray          # (M+1, nE)
    A: np.ndarray          # forward amplitude at each region's left reference
    B: np.ndarray          # backward amplitude at each region's right reference
    left_ref: np.ndarray   # (M+1,)
    right_ref: np.ndarray  # (M+1,)


def _solve_layers(layers: Layers, E: np.ndarray, hbar: float, mass: float,
                  x_r: float, x_t: float, amplitudes: bool = False) -> _Solution:
    """r, t, dr/dE, dt/dE for constant layers at energies E (all above the left level)."""
    b, g = layers.boundaries, layers.couplings
    M, nE = len(b), len(E)
    K, DK = _wavenumbers(E, layers.levels, hbar, mass)
    if M == 0:
        k0, dk0 = K[0], DK[0]
        t = np.exp(1j * k0 * (x_t - x_r))
        sol = _Solution(np.zeros(nE, complex), t, np.zeros(nE, complex),
                        t * 1j * dk0 * (x_t - x_r), K, None, None, np.array([x_r]), np.array([x_r]))
        if amplitudes:
            sol.A = np.exp(1j * k0 * (x_r - x_r))[None, :] * np.ones((1, nE))
            sol.B = np.zeros((1, nE), complex)
        return sol
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
            ddsig = dsigma
            dnum = 1j * dk * ops + (1j * k + 1j * q + gi) * ddsig - 1j * dq * oms
            dden = 1j * dk * ops + (1j * k - 1j * q - gi) * ddsig + 1j * dq * oms
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
        inner_k, inner_dk = K[1:M], DK[1:M]
        logt = (1j * k0 * (b[0] - x_r) + logf.sum(axis=0)
                + 1j * (inner_k * widths[:, None]).sum(axis=0) + 1j * kM * (x_t - b[-1]))
        dlogt = (1j * dk0 * (b[0] - x_r) + dlogf.sum(axis=0)
                 + 1j * (inner_dk * widths[:, None]).sum(axis=0) + 1j * dkM * (x_t - b[-1]))
        t = np.exp(logt)
        dt = t * dlogt
    sol = _Solution(r, t, dr, dt, K, None, None,
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


def _dwell(sol: _Solution, layers: Layers, region: tuple[float, float], hbar, mass):
    """Büttiker dwell time: ∫_region |ψ|² dx / (ħk/m), region by region in closed
    form (each term bounded by its value at its own reference edge: no overflow)."""
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


# ----------------------------------------------------------------------------------------
# Public result


@dataclass(frozen=True)
class Scattering:
    """Stationary scattering at an array of energies.

    Arrays are indexed like ``energy``. Undefined values are NaN in these raw
    arrays (closed right channel: ``delay_transmission``; r = 0:
    ``delay_reflection``; exactly at the right level: both); the tables built
    from them (`theory_table`) carry None instead. Phases are unwrapped along
    increasing energy with the help of the analytic derivatives.
    """

    energy: np.ndarray
    r: np.ndarray
    t: np.ndarray
    dr_dE: np.ndarray
    dt_dE: np.ndarray
    k_in: np.ndarray
    k_out: np.ndarray       # complex: iκ' where the right channel is closed
    x_r: float
    x_t: float
    hbar: float
    mass: float
    direction: str = "right"
    dwell: Optional[np.ndarray] = None
    dwell_region: Optional[tuple[float, float]] = None
    error_estimate: float = 0.0
    cells: Optional[int] = None

    @property
    def R(self) -> np.ndarray:
        return np.abs(self.r) ** 2

    @property
    def T(self) -> np.ndarray:
        out = np.where(self.open, self.k_out.real / self.k_in * np.abs(self.t) ** 2, 0.0)
        return out

    @property
    def open(self) -> np.ndarray:
        """Where the transmitted channel carries flux (E above the far level)."""
        return (self.k_out.real > 0) & (np.abs(self.k_out.imag) == 0)

    @property
    def phase_reflection(self) -> np.ndarray:
        return _unwrap(self.energy, np.angle(self.r), _im_ratio(self.dr_dE, self.r))

    @property
    def phase_transmission(self) -> np.ndarray:
        return _unwrap(self.energy, np.angle(self.t), _im_ratio(self.dt_dE, self.t))

    @property
    def delay_reflection(self) -> np.ndarray:
        """τ_R = ħ d(arg r)/dE (NaN where r = 0 or at the right threshold)."""
        out = self.hbar * _im_ratio(self.dr_dE, self.r)
        return np.where(np.abs(self.r) > 0, out, np.nan)

    @property
    def delay_transmission(self) -> np.ndarray:
        """τ_T = ħ d(arg t)/dE, entry-to-exit (NaN where the channel is closed)."""
        out = self.hbar * _im_ratio(self.dt_dE, self.t)
        return np.where(self.open, out, np.nan)


def _im_ratio(num, den):
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.imag(num / den)


def _unwrap(E, principal, derivative):
    """Unwrap a principal phase along increasing E, choosing each 2π branch
    closest to the trapezoid integral of the analytic derivative."""
    E = np.asarray(E)
    order = np.argsort(E, kind="stable")
    p = principal[order].astype(float)
    d = derivative[order]
    out = p.copy()
    for i in range(1, len(p)):
        step = 0.5 * (d[i] + d[i - 1]) * (E[order][i] - E[order][i - 1])
        if not np.isfinite(step):
            step = 0.0
        guess = out[i - 1] + step
        out[i] = p[i] + 2 * np.pi * np.round((guess - p[i]) / (2 * np.pi))
    result = np.empty_like(out)
    result[order] = out
    return result


def _prepare_energies(E, left: float) -> np.ndarray:
    E = np.atleast_1d(np.asarray(E, dtype=float))
    if E.ndim != 1:
        raise TheoryError("energies must be a number or a one-dimensional array")
    if not np.all(np.isfinite(E)):
        raise TheoryError("energies must be finite numbers")
    bad = E <= left
    if np.any(bad):
        raise TheoryError(f"energy {E[bad][0]:g} is not above the level {left:g} on the incidence "
                          f"side: there is no incident wave (give energies > {left:g})")
    return E


def _regular_solve(layers, E, hbar, mass, x_r, x_t, amplitudes):
    """_solve_layers, with energies that sit exactly at an inner layer's level
    (where e^{±ikx} degenerate) replaced by the mean of E ± δ (error O(δ²))."""
    inner = layers.levels[1:-1]
    if inner.size:
        scale = max(float(np.max(np.abs(layers.levels - layers.levels[0]))), 1e-300)
        hit = np.any(np.abs(E[None, :] - inner[:, None]) <= 1e-13 * np.maximum(scale, np.abs(E)),
                     axis=0)
    else:
        hit = np.zeros(E.shape, bool)
    sol = _solve_layers(layers, E, hbar, mass, x_r, x_t, amplitudes)
    if np.any(hit):
        delta = 1e-7 * max(scale, float(np.max(np.abs(E[hit]))))
        lo = _solve_layers(layers, E[hit] - delta, hbar, mass, x_r, x_t, amplitudes)
        hi = _solve_layers(layers, E[hit] + delta, hbar, mass, x_r, x_t, amplitudes)
        for name in ("r", "t", "dr", "dt"):
            getattr(sol, name)[hit] = 0.5 * (getattr(lo, name) + getattr(hi, name))
        if amplitudes:
            sol.A[:, hit] = 0.5 * (lo.A + hi.A)
            sol.B[:, hit] = 0.5 * (lo.B + hi.B)
    return sol


def _references(potential: Potential, x_r, x_t, direction):
    support = potential.support()
    if support is None:
        base = 0.0 if x_r is None else x_r
        return base, (base if x_t is None else x_t)
    a, b = support
    if direction == "right":
        return (a if x_r is None else x_r), (b if x_t is None else x_t)
    return (b if x_r is None else x_r), (a if x_t is None else x_t)


def scatter(potential: Potential, energies, *, hbar: float, x_r: Optional[float] = None,
            x_t: Optional[float] = None, direction: str = "right", tol: float = DEFAULT_TOL,
            cells: Optional[int] = None, dwell: bool = True,
            dwell_region: Optional[tuple[float, float]] = None) -> Scattering:
    """r, t and their energy derivatives for `potential` at total `energies`.

    Parameters
    ----------
    potential : the scenario's Potential (its mass is used).
    energies : total energies (scalar or 1D array), above the incidence-side level.
    hbar : ħ in the scenario's units.
    x_r, x_t : reference points of r and t (defaults: the support's edges;
        for ``direction='left'`` x_r is the right edge and x_t the left one).
    direction : 'right' (incident from the left) or 'left' (from the right;
        the mirrored problem, with ψ = e^{−ik(x−x_r)} + r e^{ik(x−x_r)}).
    tol : relative tolerance of the slicing refinement (smooth potentials).
    cells : fix the slicing instead of refining (for studies of the slicing itself).
    dwell, dwell_region : compute Büttiker's dwell time over the region
        (default: the support).

    Piecewise-constant potentials are exact. Smooth ones are sliced into
    midpoint cells; the cell count doubles, and successive Richardson
    extrapolants (h² error removed) are compared until they agree to `tol`.
    """
    if direction not in ("right", "left"):
        raise TheoryError(f"direction must be 'right' or 'left' (got {direction!r})")
    _check_scattering(potential)
    mass = potential.mass
    x_r, x_t = _references(potential, x_r, x_t, direction)
    levels = potential.levels()
    inc_level = levels[0] if direction == "right" else levels[1]
    E = _prepare_energies(energies, inc_level)
    support = potential.support()
    if dwell_region is None and support is not None:
        dwell_region = (support[0], support[1])
    sign = 1.0 if direction == "right" else -1.0

    def run(layers):
        if direction == "left":
            layers = layers.mirrored()
        sol = _regular_solve(layers, E, hbar, mass, sign * x_r, sign * x_t, amplitudes=dwell)
        dw = None
        if dwell and dwell_region is not None:
            reg = tuple(sorted((sign * dwell_region[0], sign * dwell_region[1])))
            dw = _dwell(sol, layers, reg, hbar, mass)
        elif dwell:
            dw = np.zeros(len(E))
        return sol, dw

    exact = potential.piecewise_constant or support is None
    if exact:
        layers = layers_from_potential(potential, hbar)
        sol, dw = run(layers)
        vals = [sol.r, sol.t, sol.dr, sol.dt] + ([dw] if dw is not None else [])
        err, used = 0.0, None
    else:
        vals, err, used, sol = _refine(potential, hbar, run, E, tol, cells)
        dw = vals[4] if dwell else None
    return Scattering(energy=E, r=vals[0], t=vals[1], dr_dE=vals[2], dt_dE=vals[3],
                      k_in=sol.k[0].real, k_out=sol.k[-1], x_r=x_r, x_t=x_t, hbar=hbar,
                      mass=mass, direction=direction, dwell=dw,
                      dwell_region=dwell_region if dwell else None, error_estimate=err,
                      cells=used)


def _refine(potential, hbar, run, E, tol, cells):
    """Slicing refinement with Richardson extrapolation (see `scatter`)."""
    support = potential.support()
    left, right = potential.levels()
    length = support[1] - support[0]
    vmax = float(np.max(np.abs(potential(np.linspace(support[0], support[1], 2001)) - E.min())))
    kmax = math.sqrt(2 * potential.mass * max(vmax, float(np.max(np.abs(E))))) / hbar
    if cells is not None:
        counts = _piece_counts(potential, cells)
        layers = _sliced(potential, hbar, counts)
        sol, dw = run(layers)
        vals = [sol.r, sol.t, sol.dr, sol.dt] + ([dw] if dw is not None else [])
        return vals, float("nan"), int(sum(counts)), sol
    start = int(min(max(64, kmax * length), MAX_CELLS // 16))
    counts = np.array(_piece_counts(potential, start))

    def level(cnt):
        sol, dw = run(_sliced(potential, hbar, cnt))
        return [sol.r, sol.t, sol.dr, sol.dt] + ([dw] if dw is not None else []), sol

    # Romberg table on h²: column j removes the h^(2j) term (j ≤ 2)
    table = []
    scale_E = np.maximum(np.abs(E - left), 1e-300)
    last = math.inf
    while True:
        raw, sol = level(counts)
        row = [raw]
        for j in range(1, min(len(table), 2) + 1):
            factor = 4.0 ** j
            row.append([(factor * a - b) / (factor - 1) for a, b in zip(row[j - 1], table[-1][j - 1])])
        table.append(row)
        if len(table) >= 3:
            best, prev = table[-1][-1], table[-2][-1]
            err = _relative_change(best, prev, scale_E)
            if err <= tol or (err > 0.5 * last and err <= 100 * tol):
                # converged, or no longer falling (round-off, not slicing, limits it)
                return best, err, int(counts.sum()), sol
            last = err
            if counts.sum() * 2 > MAX_CELLS:
                raise TheoryError(
                    f"slicing the smooth potential did not reach the tolerance {tol:g} with "
                    f"{int(counts.sum())} cells (relative change {err:.2g}); loosen `tol` or "
                    f"check that the potential is smooth and bounded on its support")
        counts = counts * 2


def _relative_change(new, old, scale_E):
    r, t, dr, dt = new[:4]
    r0, t0, dr0, dt0 = old[:4]
    with np.errstate(divide="ignore", invalid="ignore"):
        amp = np.maximum(np.abs(r), 1e-2)
        tamp = np.where(np.abs(t) > 0, np.abs(t), 1.0)
        errs = [np.abs(r - r0) / amp, np.abs(t - t0) / tamp,
                np.abs(dr - dr0) * scale_E / np.maximum(np.abs(dr) * scale_E,
                                                        np.maximum(np.abs(r), 1e-2)),
                np.abs(dt - dt0) * scale_E / np.maximum(np.abs(dt) * scale_E, tamp)]
        if len(new) > 4:
            errs.append(np.abs(new[4] - old[4]) / np.maximum(np.abs(new[4]), 1e-300))
    worst = 0.0
    for e in errs:
        e = e[np.isfinite(e)]
        if e.size:
            worst = max(worst, float(np.max(e)))
    return worst


def scatter_scenario(scenario, energies, **kwargs) -> Scattering:
    """`scatter` with ħ, the mass, the reference point (``measure.reference``),
    the packet's direction and the dwell region (``measure.region``) of a scenario."""
    potential = scenario.build_potential()
    kwargs.setdefault("x_r", scenario.measure.reference)
    kwargs.setdefault("direction", scenario.packet.direction)
    if scenario.measure.region is not None:
        kwargs.setdefault("dwell_region", tuple(scenario.measure.region))
    return scatter(potential, energies, hbar=scenario.hbar, **kwargs)


# ----------------------------------------------------------------------------------------
# Stationary states


def stationary_state(potential: Potential, energies, x, *, hbar: float,
                     x_r: Optional[float] = None, x_t: Optional[float] = None,
                     direction: str = "right", cells: Optional[int] = None) -> np.ndarray:
    """Scattering states ψ_E(x) (shape (nE, len(x))) normalised to the incident
    wave e^{±ik(x−x_r)}, with the same conventions as `scatter`.

    Exact for piecewise-constant potentials; smooth ones are sliced (``cells``,
    default 4096 midpoint cells: O(h²) error inside the potential).
    """
    _check_scattering(potential)
    x_r, x_t = _references(potential, x_r, x_t, direction)
    levels = potential.levels()
    E = _prepare_energies(energies, levels[0] if direction == "right" else levels[1])
    if potential.piecewise_constant or potential.support() is None:
        layers = layers_from_potential(potential, hbar)
    else:
        layers = _sliced(potential, hbar, _piece_counts(potential, cells or 4096))
    sign = 1.0
    if direction == "left":
        layers, sign = layers.mirrored(), -1.0
    sol = _regular_solve(layers, E, hbar, potential.mass, sign * x_r, sign * x_t, amplitudes=True)
    return _evaluate_state(sol, layers, sign * np.asarray(x, dtype=float))


def _evaluate_state(sol: _Solution, layers: Layers, x: np.ndarray) -> np.ndarray:
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


# ----------------------------------------------------------------------------------------
# Packet-averaged predictions


@dataclass(frozen=True)
class ChannelPrediction:
    """What each measuring method should find for one outgoing channel
    (times in the scenario's time unit, lengths in its length unit).

    probability : packet R or T, ∫ w dk over ∫ |ψ̃₀|² dk.
    centroid_shift : ⟨dφ/dk'⟩_w, the lag of the outgoing centroid behind the
        free evolution of the filtered spectrum (length).
    centroid_delay : centroid_shift / v₀' (v₀' the outgoing group velocity at k₀).
    flux_delay : ⟨τ⟩_w = ⟨ħ dφ/dE⟩_w, the mean flux-arrival delay.
    spectral_delay : mean of τ(E) over the incident spectrum |ψ̃₀(k)|² dk.
    wigner_delay : τ at the central energy E₀ (None if undefined there).
    """

    channel: str
    probability: float
    centroid_shift: Optional[float]
    centroid_delay: Optional[float]
    flux_delay: Optional[float]
    spectral_delay: Optional[float]
    wigner_delay: Optional[float]

    def as_dict(self) -> dict:
        return dict(self.__dict__)


@dataclass(frozen=True)
class PacketPrediction:
    """Packet-averaged stationary-theory predictions (PHYSICS §5).

    Weights in dk over the incident k (from the incidence side): |ψ̃₀(k)|²
    (Gaussian, centre k₀, rms σ_k = 1/(2σ)), times R(k) for the reflected and
    T(k) = (k'/k)|t|² for the transmitted channel. The transmitted weight is
    the outgoing |ψ̃_T(k')|² dk' rewritten in dk (k dk = k' dk'). Delays refer to
    the free evolution of the filtered spectrum ψ̃₀·|r| (or ψ̃₀·|t|), which is
    what a measurement should use as its reference. The k-integrals run over
    [max(k₀ − 8σ_k, k₀/100), k₀ + 8σ_k]; the incident weight outside it
    (including k ≤ 0, which never reaches the potential) is ``excluded_weight``
    and is left out of every average.
    """

    k0: float
    sigma_k: float
    energy0: float
    mean_energy: float
    reflection: Optional[ChannelPrediction]
    transmission: Optional[ChannelPrediction]
    dwell: Optional[float]
    share_above_top: float
    barrier_top: float
    excluded_weight: float
    k_range: tuple[float, float]
    reference_points: dict
    warnings: tuple[str, ...] = field(default=())

    def as_dict(self) -> dict:
        out = dict(self.__dict__)
        out["reflection"] = self.reflection.as_dict() if self.reflection else None
        out["transmission"] = self.transmission.as_dict() if self.transmission else None
        out["k_range"] = list(self.k_range)
        out["warnings"] = list(self.warnings)
        return out


def _tanh_sinh(a: float, b: float, level: int):
    """Nodes and weights of tanh-sinh quadrature on [a, b] (endpoint singularities allowed)."""
    h = 2.0 ** (-level)
    t = np.arange(-int(3.2 / h), int(3.2 / h) + 1) * h
    u = 0.5 * np.pi * np.sinh(t)
    w = 0.5 * np.pi * np.cosh(t) / np.cosh(u) ** 2
    # distance from the nearer end, computed without cancellation
    gap = np.exp(-np.abs(u)) / np.cosh(u)          # = 1 − |tanh u|
    half = 0.5 * (b - a)
    x = np.where(t < 0, a + half * gap, b - half * gap)
    keep = (gap > 0) & (x > a) & (x < b)
    return x[keep], (w * h * half)[keep]


def packet_kinematics(scenario):
    """(k₀, σ_k, incidence level, E₀) of the scenario's packet: k₀ from the
    wavenumber or from E₀ = ħ²k₀²/2m + V on the incidence side."""
    pk = scenario.packet
    potential = scenario.build_potential()
    _check_scattering(potential)
    left, right = potential.levels()
    level = left if pk.direction == "right" else right
    m, hbar = scenario.particle_mass, scenario.hbar
    if pk.wavenumber is not None:
        k0 = abs(float(pk.wavenumber))
    else:
        if pk.energy <= level:
            raise TheoryError(f"packet.energy {pk.energy:g} is not above the level {level:g} on "
                              f"the incidence side: the packet has no kinetic energy there")
        k0 = math.sqrt(2 * m * (pk.energy - level)) / hbar
    if k0 <= 0:
        raise TheoryError("the packet's wavenumber must be nonzero")
    E0 = level + (hbar * k0) ** 2 / (2 * m)
    return k0, 1.0 / (2 * pk.width), level, E0


def packet_prediction(scenario, *, tol: float = 1e-9) -> PacketPrediction:
    """Packet-averaged predictions for a scenario: one per measuring method.

    Centroid: ⟨dφ/dk⟩_w / v₀; flux arrival: ⟨τ⟩_w = ⟨(dφ/dk)/v(k)⟩_w; spectral:
    the mean of τ(E) with incident dk weights; plus packet R and T, the packet
    dwell time ⟨τ_D⟩ (= ∫P_region dt per unit incident probability), the share
    of |ψ̃₀|² above the barrier top (max V) and the Wigner delays at E₀. See
    `PacketPrediction` for the weights and the k-range. Integrals use tanh-sinh
    quadrature split at the channel threshold and refined until the averages
    change by less than `tol` (relative).
    """
    potential = scenario.build_potential()
    k0, sk, level, E0 = packet_kinematics(scenario)
    m, hbar = scenario.particle_mass, scenario.hbar
    left, right = potential.levels()
    far = right if scenario.packet.direction == "right" else left
    k_lo = max(k0 - K_SPAN_AVERAGES * sk, k0 / 100)
    k_hi = k0 + K_SPAN_AVERAGES * sk
    cuts = [k_lo, k_hi]
    if far > level:
        k_th = math.sqrt(2 * m * (far - level)) / hbar
        if k_lo < k_th < k_hi:
            cuts.insert(1, k_th)

    def energy(k):
        return level + (hbar * k) ** 2 / (2 * m)

    def density(k):
        return np.exp(-0.5 * ((k - k0) / sk) ** 2) / (math.sqrt(2 * math.pi) * sk)

    def averages(lev):
        nodes, weights = [], []
        for a, b in zip(cuts[:-1], cuts[1:]):
            x, w = _tanh_sinh(a, b, lev)
            nodes.append(x)
            weights.append(w)
        k = np.concatenate(nodes)
        w = np.concatenate(weights) * density(k)
        sc = scatter_scenario(scenario, energy(k), tol=max(tol * 0.1, DEFAULT_TOL))
        kp = sc.k_out
        opn = sc.open
        with np.errstate(divide="ignore", invalid="ignore"):
            flux_r = hbar * np.imag(np.conj(sc.r) * sc.dr_dE)             # R·τ_R
            flux_t = np.where(opn, kp.real / k * hbar * np.imag(np.conj(sc.t) * sc.dt_dE), 0.0)
            tau_r = np.where(np.abs(sc.r) > 0, hbar * np.imag(sc.dr_dE / sc.r), 0.0)
            tau_t = np.where(opn, hbar * np.imag(sc.dt_dE / sc.t), 0.0)
        vk = hbar * k / m
        vkp = np.where(opn, hbar * kp.real / m, 0.0)
        sums = dict(
            Z=np.sum(w), R=np.sum(w * sc.R), T=np.sum(w * sc.T),
            shift_r=np.sum(w * flux_r * vk), flux_r=np.sum(w * flux_r),
            shift_t=np.sum(w * flux_t * vkp), flux_t=np.sum(w * flux_t),
            spec_r=np.sum(w * tau_r), spec_t=np.sum(w * tau_t), Zt=np.sum(w * opn),
            dwell=np.sum(w * sc.dwell),
        )
        return {key: float(v) for key, v in sums.items()}

    lev = 3
    prev = averages(lev)
    while True:
        lev += 1
        cur = averages(lev)
        change = max(abs(cur[key] - prev[key]) / max(abs(cur[key]), 1e-300)
                     for key in cur if abs(cur[key]) > 1e-14 * max(cur["Z"], 1e-300))
        if change <= tol or lev >= 9:
            break
        prev = cur
    s = cur
    Z = s["Z"]
    E_tab = scatter_scenario(scenario, [E0])
    v0 = hbar * k0 / m
    warnings = []
    refl = trans = None
    if s["R"] > 1e-14 * Z:
        wig = float(E_tab.delay_reflection[0])
        refl = ChannelPrediction(
            "reflection", s["R"] / Z, s["shift_r"] / s["R"], s["shift_r"] / s["R"] / v0,
            s["flux_r"] / s["R"], s["spec_r"] / Z, wig if math.isfinite(wig) else None)
    if s["T"] > 1e-300:
        kp0 = E_tab.k_out[0]
        open0 = bool(E_tab.open[0])
        shift = s["shift_t"] / s["T"]
        wig = float(E_tab.delay_transmission[0])
        trans = ChannelPrediction(
            "transmission", s["T"] / Z, shift,
            shift / (hbar * kp0.real / m) if open0 else None,
            s["flux_t"] / s["T"], s["spec_t"] / s["Zt"] if s["Zt"] > 0 else None,
            wig if (open0 and math.isfinite(wig)) else None)
    # share above the barrier top
    support = potential.support()
    if support is not None:
        xs = np.linspace(support[0], support[1], 20001)
        top = float(max(np.max(potential(xs)), left, right))
        if potential.piecewise_constant:
            top = float(max(np.max(layers_from_potential(potential, hbar).levels), top))
    else:
        top = float(level)
    if top > level:
        k_top = math.sqrt(2 * m * (top - level)) / hbar
        share = 0.5 * math.erfc((k_top - k0) / (math.sqrt(2) * sk))
    else:
        share = 1.0
    from scipy.special import ndtr
    excluded = float(ndtr((k_lo - k0) / sk) + ndtr(-(k_hi - k0) / sk))
    if k0 / sk < 6:
        warnings.append(f"k0/sigma_k = {k0 / sk:.3g} < 6: the packet has content near k = 0, "
                        f"where the delays diverge; averages drop k < {k_lo:.3g}")
    if 1e-3 < share < 1 and potential.deltas() == [] and top > level:
        warnings.append(f"{share:.3g} of the packet lies above the barrier top V = {top:g}: "
                        f"compare with the filtered reference (ψ̃₀·|r| or ψ̃₀·|t|)")
    return PacketPrediction(
        k0=k0, sigma_k=sk, energy0=E0, mean_energy=E0 + (hbar * sk) ** 2 / (2 * m),
        reflection=refl, transmission=trans, dwell=s["dwell"] / Z, share_above_top=share,
        barrier_top=top, excluded_weight=excluded, k_range=(k_lo, k_hi),
        reference_points={"x_r": E_tab.x_r, "x_t": E_tab.x_t}, warnings=tuple(warnings))


# ----------------------------------------------------------------------------------------
# Exact synthesis


def synthesize(scenario, times, x=None, *, nodes: Optional[int] = None,
               cells: Optional[int] = None, chunk: int = 256) -> np.ndarray:
    """Exact ψ(x, t) = ∫ dk φ̃₀(k) ψ_k(x) e^{−iE(k)t/ħ} from the stationary states.

    Returns a complex array (len(times), len(x)); x defaults to the scenario's
    grid. φ̃₀ is the Fourier amplitude of the free Gaussian ψ₀ of
    `packets.gaussian`, so ψ(x, 0) reproduces ψ₀ left of the potential (up to
    its own reflected and transmitted tails, which are negligible when the
    packet starts far from the potential). The k-integral is the trapezoid
    rule on k₀ ± 12σ_k (components with k ≤ 0 are dropped: their weight is
    ~exp(−(k₀/σ_k)²/2)); its node spacing is chosen so that the aliased copies
    of the packet (period 2π/Δk in x) lie beyond 4× the region the packet
    explores during `times`. Exact for piecewise-constant potentials; smooth
    ones are sliced (``cells``).
    """
    potential = scenario.build_potential()
    _check_scattering(potential)
    k0, sk, level, _ = packet_kinematics(scenario)
    m, hbar = scenario.particle_mass, scenario.hbar
    pk = scenario.packet
    times = np.atleast_1d(np.asarray(times, dtype=float))
    x = Grid.from_spec(scenario.grid).x if x is None else np.asarray(x, dtype=float)
    k_lo = max(k0 - K_SPAN_SYNTHESIS * sk, 1e-3 * k0)
    k_hi = k0 + K_SPAN_SYNTHESIS * sk
    if nodes is None:
        support = potential.support() or (pk.center, pk.center)
        lo = min(float(x.min()), support[0], pk.center)
        hi = max(float(x.max()), support[1], pk.center)
        vmax = hbar * k_hi / m
        reach = (hi - lo) + vmax * float(np.max(np.abs(times))) + 10 * pk.width
        dk = 2 * np.pi / (4 * reach)
        nodes = int(math.ceil((k_hi - k_lo) / dk)) + 1
    k = np.linspace(k_lo, k_hi, nodes)
    wk = np.full(nodes, (k_hi - k_lo) / (nodes - 1))
    wk[0] = wk[-1] = wk[0] / 2
    support = potential.support()
    x_r, x_t = _references(potential, scenario.measure.reference, None, pk.direction)
    sign = 1.0 if pk.direction == "right" else -1.0
    # φ̃₀(k) for ψ₀ = ∫ dk φ̃₀(k) e^{i s k (x − x_r)}, s = ±1 the direction
    s = pk.width
    x0 = sign * pk.center
    xr = sign * x_r
    phi = ((2 * np.pi * s ** 2) ** -0.25 * (2 * s * math.sqrt(np.pi)) / (2 * np.pi)
           * np.exp(-s ** 2 * (k - k0) ** 2 + 1j * k0 * x0 - 1j * k * (x0 - xr)))
    E = level + (hbar * k) ** 2 / (2 * m)
    out = np.zeros((len(times), len(x)), complex)
    for start in range(0, nodes, chunk):
        sl = slice(start, start + chunk)
        states = stationary_state(potential, E[sl], x, hbar=hbar, x_r=x_r, x_t=x_t,
                                  direction=pk.direction, cells=cells)
        coeff = (wk[sl] * phi[sl])[None, :] * np.exp(-1j * np.outer(times, E[sl]) / hbar)
        out += coeff @ states
    return out


# ----------------------------------------------------------------------------------------
# Tables for the command line


def default_energies(scenario, n: int = 201) -> np.ndarray:
    """Energies E(k) for k in k₀ ± 4σ_k (k kept above k₀/100), i.e. the packet's spectrum."""
    k0, sk, level, _ = packet_kinematics(scenario)
    m, hbar = scenario.particle_mass, scenario.hbar
    k = np.linspace(max(k0 - 4 * sk, k0 / 100), k0 + 4 * sk, n)
    return level + (hbar * k) ** 2 / (2 * m)


def parse_energies(text: str) -> np.ndarray:
    """'A:B:N' → N energies from A to B (inclusive)."""
    parts = str(text).split(":")
    try:
        if len(parts) != 3:
            raise ValueError
        a, b, n = float(parts[0]), float(parts[1]), int(parts[2])
    except ValueError:
        raise TheoryError(f"--energies must look like A:B:N (two numbers and a count), "
                          f"got {text!r}") from None
    if n < 1 or not (math.isfinite(a) and math.isfinite(b)):
        raise TheoryError(f"--energies: need finite A, B and N >= 1 (got {text!r})")
    if n > 1_000_000:
        raise TheoryError(f"--energies: N = {n} is too many points (at most 1000000)")
    return np.linspace(a, b, n) if n > 1 else np.array([a])


def _clean(values) -> list:
    return [None if (v is None or not math.isfinite(float(v))) else float(v) for v in values]


def theory_table(scenario, energies=None, *, packet: bool = True) -> dict:
    """Everything `sojourn theory` reports, JSON-ready (None where undefined).

    Arrays: energy, R, T, phase_reflection, phase_transmission,
    delay_reflection, delay_transmission, dwell; plus units, reference_points,
    levels and (unless ``packet=False``) the packet-averaged predictions.
    """
    E = default_energies(scenario) if energies is None else np.asarray(energies, dtype=float)
    sc = scatter_scenario(scenario, E)
    opn = sc.open
    units = scenario.unit_system
    phase_t = np.where(opn, sc.phase_transmission, np.nan)
    phase_r = np.where(np.abs(sc.r) > 0, sc.phase_reflection, np.nan)
    potential = scenario.build_potential()
    table = {
        "scenario": scenario.title,
        "units": {"length": units.length, "energy": units.energy, "time": units.time,
                  "mass": units.mass, "phase": "rad", "system": units.name},
        "direction": sc.direction,
        "levels": list(potential.levels()),
        "reference_points": {"x_r": sc.x_r, "x_t": sc.x_t},
        "dwell_region": list(sc.dwell_region) if sc.dwell_region else None,
        "energy": _clean(sc.energy),
        "R": _clean(sc.R),
        "T": _clean(sc.T),
        "phase_reflection": _clean(phase_r),
        "phase_transmission": _clean(phase_t),
        "delay_reflection": _clean(sc.delay_reflection),
        "delay_transmission": _clean(sc.delay_transmission),
        "dwell": _clean(sc.dwell),
    }
    if packet:
        pred = packet_prediction(scenario)
        table["packet"] = pred.as_dict()
        k = np.linspace(pred.k_range[0], pred.k_range[1], 201)
        level = potential.levels()[0 if sc.direction == "right" else 1]
        table["packet_spectrum"] = {
            "energy": _clean(level + (scenario.hbar * k) ** 2 / (2 * scenario.particle_mass)),
            "weight_dk": _clean(np.exp(-0.5 * ((k - pred.k0) / pred.sigma_k) ** 2)),
        }
    return table


COLUMNS = ("energy", "R", "T", "phase_reflection", "phase_transmission",
           "delay_reflection", "delay_transmission", "dwell")


def table_csv(table: dict) -> str:
    """The per-energy columns as CSV text (empty fields where undefined)."""
    lines = [",".join(COLUMNS)]
    for row in zip(*(table[c] for c in COLUMNS)):
        lines.append(",".join("" if v is None else repr(v) for v in row))
    return "\n".join(lines) + "\n"


def format_table(table: dict) -> str:
    """A readable plain-text table with the packet summary below it."""
    u = table["units"]
    heads = [f"E [{u['energy']}]", "R", "T", "phi_r [rad]", "phi_t [rad]",
             f"tau_R [{u['time']}]", f"tau_T [{u['time']}]", f"dwell [{u['time']}]"]
    rows = [heads]
    for row in zip(*(table[c] for c in COLUMNS)):
        rows.append(["-" if v is None else f"{v:.6g}" for v in row])
    width = [max(len(r[i]) for r in rows) for i in range(len(heads))]
    text = [f"# {table.get('scenario', '')}",
            f"# r referenced at x_r = {table['reference_points']['x_r']:g} {u['length']}, "
            f"t at x_t = {table['reference_points']['x_t']:g} {u['length']} "
            f"(incident from the {'left' if table['direction'] == 'right' else 'right'})"]
    text += ["  ".join(c.rjust(w) for c, w in zip(r, width)) for r in rows]
    pk = table.get("packet")
    if pk:
        def fmt(v):
            return "-" if v is None else f"{v:.8g}"
        text.append("")
        text.append(f"packet: k0 = {pk['k0']:.6g}, sigma_k = {pk['sigma_k']:.4g}, "
                    f"E0 = {pk['energy0']:.6g}, <E> = {pk['mean_energy']:.6g} {u['energy']}; "
                    f"share above barrier top = {pk['share_above_top']:.3g}")
        for name in ("reflection", "transmission"):
            ch = pk[name]
            if ch:
                text.append(f"  {name:12s} P = {fmt(ch['probability'])}  centroid = "
                            f"{fmt(ch['centroid_delay'])}  flux = {fmt(ch['flux_delay'])}  "
                            f"spectral = {fmt(ch['spectral_delay'])}  Wigner(E0) = "
                            f"{fmt(ch['wigner_delay'])} {u['time']}")
        text.append(f"  dwell (packet) = {fmt(pk['dwell'])} {u['time']}")
        for w in pk["warnings"]:
            text.append(f"  warning: {w}")
    return "\n".join(text) + "\n"


def plot_theory(table: dict, path) -> None:
    """R, T and the delays against energy, with the packet's spectrum shaded."""
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    def arr(key):
        return np.array([np.nan if v is None else v for v in table[key]], dtype=float)

    E = arr("energy")
    u = table["units"]
    fig, (ax1, ax2) = plt.subplots(2, 1, sharex=True, figsize=(7, 6), constrained_layout=True)
    ax1.plot(E, arr("R"), label="R")
    ax1.plot(E, arr("T"), label="T")
    ax1.set_ylabel("probability")
    ax1.set_ylim(-0.02, 1.02)
    ax2.plot(E, arr("delay_reflection"), label=r"$\tau_R$")
    ax2.plot(E, arr("delay_transmission"), label=r"$\tau_T$")
    ax2.plot(E, arr("dwell"), label=r"$\tau_D$", linestyle="--")
    ax2.set_ylabel(f"delay [{u['time']}]")
    ax2.set_xlabel(f"energy [{u['energy']}]")
    spec = table.get("packet_spectrum")
    if spec:
        se = np.array(spec["energy"], dtype=float)
        sw = np.array(spec["weight_dk"], dtype=float)
        for ax in (ax1, ax2):
            lo, hi = ax.get_ylim() if ax is ax2 else (0, 1)
            ax.fill_between(se, lo, lo + (hi - lo) * sw / sw.max(), color="0.85", zorder=0,
                            label="packet |ψ̃(k)|²" if ax is ax1 else None)
    ax1.legend()
    ax2.legend()
    ax1.set_title(table.get("scenario", ""))
    fig.savefig(path, dpi=120)
    plt.close(fig)
