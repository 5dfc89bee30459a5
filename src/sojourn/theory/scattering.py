"""Stationary scattering at an array of energies: r(E), t(E), their energy
derivatives, phase delays and Büttiker dwell times (PHYSICS §4–5).

Conventions. Incidence from the left (``direction='left'`` mirrors the
potential). With reference points x_r (default: the left edge of the
potential's support) and x_t (the right edge),

    ψ = e^{ik(x−x_r)} + r e^{−ik(x−x_r)}   left of the potential,
    ψ = t e^{ik'(x−x_t)}                  right of it,

k = √(2m(E−V_left))/ħ, k' = √(2m(E−V_right))/ħ (imaginary, k' = iκ', when the
right channel is closed). R = |r|², T = (k'/k)|t|². Phase delays τ_R = ħ dφ_r/dE
and τ_T = ħ d(arg t)/dE; with these reference points τ_T is the entry-to-exit
time with no free-flight term. Büttiker's dwell time is ∫|ψ|² dx over the
region divided by the incident flux ħk/m. Energies are total energies, in the
caller's units. Piecewise-constant potentials are exact; smooth ones are sliced
(`layers`) with Romberg extrapolation in h².
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Optional

import numpy as np

from ..errors import TheoryError
from ..model.potentials import Potential
from .layers import (check_scattering, dwell_time, layers_from_potential, piece_counts,
                     sliced_layers, solve_layers)

DEFAULT_TOL = 1e-10        # relative tolerance of the slicing refinement
MAX_CELLS = 1 << 16        # finest slicing tried for smooth potentials


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


def prepare_energies(E, left: float) -> np.ndarray:
    """Energies as a 1D float array, all above the incidence-side level `left`."""
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


def check_positive(**values) -> None:
    """Refuse any value that is not a finite positive number (ħ, masses, widths)."""
    for name, value in values.items():
        if not (isinstance(value, (int, float, np.floating)) and math.isfinite(value) and value > 0):
            raise TheoryError(f"{name} must be a finite positive number (got {value!r})")


def check_region(region) -> tuple[float, float]:
    """A dwell region as (a, b) with finite a ≤ b (a point gives dwell 0)."""
    try:
        a, b = (float(v) for v in region)
    except (TypeError, ValueError):
        raise TheoryError(f"a region must be two numbers (got {region!r})") from None
    if not (math.isfinite(a) and math.isfinite(b) and a <= b):
        raise TheoryError(f"a region must be two finite numbers a <= b (got {region!r})")
    return a, b


def reference_points(potential: Potential, x_r, x_t, direction):
    """(x_r, x_t): the given ones, else the support's edges on the incidence and far side."""
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
    check_positive(hbar=hbar)
    if dwell_region is not None:
        dwell_region = check_region(dwell_region)
    check_scattering(potential)
    mass = potential.mass
    x_r, x_t = reference_points(potential, x_r, x_t, direction)
    levels = potential.levels()
    inc_level = levels[0] if direction == "right" else levels[1]
    E = prepare_energies(energies, inc_level)
    support = potential.support()
    if dwell_region is None and support is not None:
        dwell_region = (support[0], support[1])
    sign = 1.0 if direction == "right" else -1.0

    def run(layers):
        if direction == "left":
            layers = layers.mirrored()
        sol = solve_layers(layers, E, hbar, mass, sign * x_r, sign * x_t, amplitudes=dwell)
        dw = None
        if dwell and dwell_region is not None:
            reg = tuple(sorted((sign * dwell_region[0], sign * dwell_region[1])))
            dw = dwell_time(sol, layers, reg, hbar, mass)
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
        counts = piece_counts(potential, cells)
        layers = sliced_layers(potential, hbar, counts)
        sol, dw = run(layers)
        vals = [sol.r, sol.t, sol.dr, sol.dt] + ([dw] if dw is not None else [])
        return vals, float("nan"), int(sum(counts)), sol
    start = int(min(max(64, kmax * length), MAX_CELLS // 16))
    counts = np.array(piece_counts(potential, start))

    def level(cnt):
        sol, dw = run(sliced_layers(potential, hbar, cnt))
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
