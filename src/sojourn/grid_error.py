"""What the grid's rendering of V costs, judged before a run: stationary theory
on the grid's staircase beside the exact V (R, T and the flux-weighted delays),
and the dwell time's allowance for an evanescent tail the cells resolve
coarsely; both as findings for `guards.guard`."""
from __future__ import annotations

import math
from typing import Optional

import numpy as np

from .errors import SojournError
from .findings import Finding
from .model.potentials import Potential
from .model.terms import Step
from .theory.scattering import scatter

RENDERING_WARN = 1e-3     # the relative change of R, T or a delay a resolved run aims at
RENDERING_WARN_LEVEL = 1e-2  # ... and the one that calls for a warning
MAX_RENDERED_CELLS = 20000  # larger supports are not re-solved cell by cell
# the dwell time's relative grid error is about DWELL_GRID_ERROR·(κΔx)² per place where
# V crosses E (an edge of the forbidden zone), κ the decay rate of the evanescent tail at
# the band's lower edge. Measured (converging as Δx²): 0.16 per edge on a unit barrier at
# κΔx = 0.26 and 0.51; 0.11 on a lab-units step at κΔx = 0.11–0.45 (ψ interpolated exactly)
DWELL_GRID_ERROR = 0.16
DWELL_WARN = 3e-2         # an expected dwell error that calls for a warning


def rendered_potential(x: np.ndarray, V: np.ndarray, dx: float, support, mass: float):
    """The potential as the grid holds it: a staircase of the grid values, one
    constant per cell, over the support and two cells either side (outside it
    V is at its levels). Returns (Potential, left level), or None if too long."""
    a, b = support
    inside = np.nonzero((x > a - 2.5 * dx) & (x < b + 2.5 * dx))[0]
    if inside.size == 0 or inside.size > MAX_RENDERED_CELLS:
        return None
    values = V[inside]
    left = float(V[max(inside[0] - 1, 0)])
    edges = x[inside] - dx / 2
    jumps = np.diff(np.concatenate(([left], values)))
    steps = [Step(at=float(e), height=float(h)) for e, h in zip(edges, jumps) if h != 0.0]
    return Potential(steps, mass=mass), left


def rendering_error(s) -> Optional[dict]:
    """`grid_rendering_error` of a Setup."""
    return grid_rendering_error(s.potential, s.packet, s.grid.x, s.V, s.grid.dx, s.hbar, s.mass,
                                s.reference)


def grid_rendering_error(potential, info, x, V, dx, hbar, mass, reference) -> Optional[dict]:
    """How much the packet's R, T and flux-weighted delays ⟨τ_R⟩, ⟨τ_T⟩ change
    when the stationary theory is solved on the grid's rendering of V instead
    of the exact V: an estimate of the part of a run's error that comes from
    the potential's discretisation (it falls as Δx² at jumps; the spectral
    grid's own error at a jump is not in it). Relative changes (delays
    relative to |τ| + 1 % of a passage time). None where it cannot be estimated
    (a trap, no support, a support of too many cells, a delta term)."""
    support = potential.support()
    if potential.confining or support is None or potential.deltas():
        return None
    V = np.asarray(V)
    V = V if V.ndim == 1 else V.mean(axis=0)   # a spinor's components: V ± ħω_L/2
    rendered = rendered_potential(x, V, dx, support, mass)
    if rendered is None:
        return None
    staircase, left = rendered
    direction = "right" if info.k0 >= 0 else "left"
    # the band k₀ ± 6σ_k with Gaussian weights (Gauss–Legendre nodes)
    nodes, weights = np.polynomial.legendre.leggauss(64)
    k0 = abs(info.k0)
    k = k0 + 6 * info.sigma_k * nodes
    w = weights * np.exp(-0.5 * ((k - k0) / info.sigma_k) ** 2)
    keep = k > 0.05 * k0
    energies = info.level + (hbar * k[keep]) ** 2 / (2 * mass)
    w = w[keep]
    inc = potential.levels()[0 if direction == "right" else 1]
    above = energies > inc
    energies, w = energies[above], w[above]
    if energies.size < 4:
        return None
    try:
        exact = scatter(potential, energies, hbar=hbar, x_r=reference, direction=direction,
                        dwell=False)
        grid = scatter(staircase, energies - left, hbar=hbar, x_r=reference,
                       x_t=exact.x_t, direction=direction, dwell=False)
    except (SojournError, ValueError, FloatingPointError):
        return None
    scale = info.width / max(abs(info.group_velocity), 1e-300)   # a passage time
    out = {}
    with np.errstate(divide="ignore", invalid="ignore"):
        for name, p_e, p_g, t_e, t_g in (
                ("R", exact.R, grid.R, exact.delay_reflection, grid.delay_reflection),
                ("T", exact.T, grid.T, exact.delay_transmission, grid.delay_transmission)):
            P_e, P_g = float(np.sum(w * p_e)), float(np.sum(w * p_g))
            if P_e <= 1e-3 * float(np.sum(w)):
                continue
            out[name] = abs(P_g - P_e) / P_e
            ok = np.isfinite(t_e) & np.isfinite(t_g)
            if np.all(ok):
                tau_e = float(np.sum(w * p_e * t_e)) / P_e
                tau_g = float(np.sum(w * p_g * t_g)) / max(P_g, 1e-300)
                out["tau_" + name] = abs(tau_g - tau_e) / (abs(tau_e) + 0.01 * scale)
    return out or None


def dwell_grid_error(V, dx: float, energy: float, hbar: float, mass: float) -> Optional[float]:
    """The relative error the grid allows the dwell time: DWELL_GRID_ERROR·(κΔx)² per
    edge of the forbidden zone (where V crosses E), with κ = √(2m(V_max − E))/ħ the
    fastest evanescent decay at total energy E (V: the potential on the grid outside
    any absorber); None when nothing is forbidden at E."""
    V = np.asarray(V, dtype=float)
    top = float(np.max(V)) if V.size else -math.inf
    if not top > energy:
        return None
    edges = max(int(np.count_nonzero(np.diff(np.sign(V - energy)))), 1)
    kappa = math.sqrt(2 * mass * (top - energy)) / hbar
    return DWELL_GRID_ERROR * edges * (kappa * dx) ** 2


def band_floor(info, hbar: float, mass: float) -> float:
    """The total energy of the band's lower edge |k₀| − 2σ_k (the slowest
    components that matter, whose evanescent tails are the shortest)."""
    k = max(abs(info.k0) - 2 * info.sigma_k, 0.0)
    return info.level + (hbar * k) ** 2 / (2 * mass)


def _dwell_resolution(s, add) -> None:
    if s.region is None or s.potential.confining:
        return
    V = s.V if s.V.ndim == 1 else s.V.mean(axis=0)   # a spinor's components: V ± ħω_L/2
    inside = V if s.W is None else V[s.W == 0]
    error = dwell_grid_error(inside, s.grid.dx, band_floor(s.packet, s.hbar, s.mass),
                             s.hbar, s.mass)
    if error is None or error < RENDERING_WARN:
        return
    points = int(2 ** math.ceil(math.log2(s.grid.points * math.sqrt(error / RENDERING_WARN))))
    text = (f"the grid resolves the evanescent tail under the potential coarsely: the dwell "
            f"time may be off by about {error:.1%} (≈ {DWELL_GRID_ERROR:g}(κΔx)² per edge of the "
            f"forbidden zone); points ≥ {points} bring it near {RENDERING_WARN:g}")
    # a warning only where the scenario asks for the dwell time (its own measure.region)
    asked = s.scenario.measure.region is not None
    add(Finding("warning" if error > DWELL_WARN and asked else "info", "grid.points", text))


def _potential_features(s, add) -> None:
    """The potential's thinnest feature and the error its grid rendering causes."""
    thin = s.potential.thinnest_feature()
    if thin is not None and thin < 2 * s.grid.dx:
        add(Finding("warning", "grid.points",
                    f"the potential has a feature {thin:.3g} wide, less than two grid cells "
                    f"(dx = {s.grid.dx:.3g}): the grid blurs it"))
    estimate = rendering_error(s)
    if not estimate:
        return
    worst = max(estimate, key=estimate.get)
    text = ", ".join(f"{name} {value:.1e}" for name, value in estimate.items())
    if estimate[worst] > RENDERING_WARN_LEVEL:
        factor = math.sqrt(estimate[worst] / RENDERING_WARN)   # the change falls as Δx²
        points = int(2 ** math.ceil(math.log2(s.grid.points * factor)))
        add(Finding("warning", "grid.points",
                    f"the grid renders the potential coarsely: stationary theory on the grid's V "
                    f"differs from the exact V by {text} (relative, packet-averaged): the run's "
                    f"numbers may be off by as much; points ≥ {points} bring it near {RENDERING_WARN:g}"))
    else:
        add(Finding("info", "grid.points",
                    f"the grid's rendering of V changes the packet's {text} (relative)"))


def grid_findings(s, add) -> None:
    """The rendering's and the dwell time's findings on a Setup."""
    _potential_features(s, add)
    _dwell_resolution(s, add)
