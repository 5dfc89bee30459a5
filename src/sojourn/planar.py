"""The plane: what build needs to make a scenario on a two-dimensional grid
concrete (V, W and the guards' findings), as pure functions.

Conventions: arrays on a `PlaneGrid` have shape (Ny, Nx). A term of x alone
acts along x with its exact cell averages (a jump keeps its position, as on a
line) broadcast over y (with `axis: y`, along y broadcast over x); a shape of the plane holds each cell's covered
fraction; a formula in y is sampled at the grid points. The absorbing layers
line all four sides (each side the line's quadratic ramp; in a corner the two
add). Build assembles the Setup; the engine runs it unchanged (its kick and
drift act on any grid shape, its FFTs run over all grid axes).
"""
from __future__ import annotations

import math

import numpy as np

from .guards import RESOLUTION_MARGIN, Finding, resource_findings
from .model.absorber import absorber_profile
from .model.shapes import SUBSAMPLES

ROWS = 64   # grid rows evaluated at a time (a formula's intermediates stay small)


def plane_point(terms, x: float, y: float, mass: float) -> float:
    """V at one point of the plane (exact values)."""
    total = 0.0
    for term in terms:
        if getattr(term, "planar", False):
            total += float(np.asarray(term.plane(np.array([x]), np.array([y]), mass))[0])
        else:
            at = y if getattr(term, "axis", "x") == "y" else x
            total += float(np.asarray(term.point(np.array([at]), mass))[0])
    return total


def _covered(term, x: np.ndarray, y: np.ndarray, dx: float, dy: float, mass: float):
    """A sharp shape's cell averages: its mean over SUBSAMPLES² points per cell."""
    offsets = (np.arange(SUBSAMPLES) + 0.5) / SUBSAMPLES - 0.5
    total = np.zeros((len(y), len(x)))
    for oy in offsets:
        for ox in offsets:
            total += term.plane((x + ox * dx)[None, :], (y + oy * dy)[:, None], mass)
    return total / SUBSAMPLES ** 2


def plane_values(terms, grid, mass: float) -> np.ndarray:
    """V on the grid (Ny, Nx): the sum of the terms (see the module note)."""
    V = np.zeros(grid.shape)
    for axis, coordinate, spacing, expand in (("x", grid.x, grid.dx, np.s_[None, :]),
                                              ("y", grid.y, grid.dy, np.s_[:, None])):
        along = [t for t in terms if not getattr(t, "planar", False)
                 and getattr(t, "axis", "x") == axis]
        if along:
            V += sum(np.asarray(t.cell(coordinate, spacing, mass), float) for t in along)[expand]
    for term in (t for t in terms if getattr(t, "planar", False)):
        for start in range(0, grid.ny, ROWS):
            rows = slice(start, min(start + ROWS, grid.ny))
            if hasattr(term, "inside"):
                V[rows] += _covered(term, grid.x, grid.y[rows], grid.dx, grid.dy, mass)
            else:
                V[rows] += term.plane(grid.x[None, :], grid.y[rows, None], mass)
    return V


def plane_absorber(grid, width: float, strength: float) -> np.ndarray:
    """W(x, y) ≥ 0: the line's quadratic layer of `width` on each of the four sides."""
    return (absorber_profile(grid.y, grid.bottom, grid.top, width, strength)[:, None]
            + absorber_profile(grid.x, grid.left, grid.right, width, strength)[None, :])


def guard_plane(s, limit: float, absorber_width: float) -> None:
    """The guards of a run in the plane, appended to s.findings: resolution per
    axis, the time step against the grid limit (E_max summed over the axes),
    the packet inside the box, memory, disk and run time."""
    add = s.findings.append
    grid, hbar, mass = s.grid, s.hbar, s.mass
    units = s.scenario.unit_system
    finite_V = not any(f.key == "potential" and f.level == "error" for f in s.findings)
    drop = max(s.packet.level - float(np.min(s.V)), 0.0) if finite_V else 0.0
    for name, info, k_max, size, points in (
            ("x", s.packet, grid.k_max, grid.length, grid.points),
            ("y", s.transverse, grid.ky_max, grid.height, grid.ny)):
        k_local = math.hypot(abs(info.k0) + 6 * info.sigma_k, math.sqrt(2 * mass * drop) / hbar)
        needed = RESOLUTION_MARGIN * k_local
        if k_max < needed:
            wanted = int(2 ** math.ceil(math.log2(size * needed / math.pi)))
            add(Finding("error", "grid.points",
                        f"grid resolution along {name} too coarse: π/d{name} = {k_max:.4g} but "
                        f"the packet needs ≥ {needed:.4g} (2·local k at |k_{name}| + 6σ_k); use "
                        f"N{name} ≥ {wanted}", forceable=True))
    phase = s.grid_phase
    if s.dt_chosen:
        add(Finding("info", "evolve.dt", f"no dt given: using dt = {s.dt:.4g} {units.time} "
                    f"(Δt·(E_max+ΔV)/ħ = {phase:.3g}, E_max summed over x and y, limit 2π)"))
    if phase >= 2 * math.pi:
        add(Finding("error", "evolve.dt",
                    f"dt = {s.dt:g} is past the grid limit Δt·(E_max + V_max − V_min)/ħ < 2π "
                    f"(here {phase:.3g}, E_max summed over x and y); the largest allowed is "
                    f"{limit:.4g} {units.time}", forceable=True))
    elif phase > math.pi:
        add(Finding("warning", "evolve.dt",
                    f"Δt·(E_max + ΔV)/ħ = {phase:.3g} is above π: dt ≤ {limit / 2:.4g} is safe"))
    for name, info, low, high in (("x", s.packet, grid.left, grid.right),
                                  ("y", s.transverse, grid.bottom, grid.top)):
        if not low <= info.center < high:
            add(Finding("error", "packet.center",
                        f"packet centre {name} = {info.center:g} is outside the box "
                        f"[{low:g}, {high:g})"))
        elif not low + absorber_width + 5 * info.width <= info.center \
                <= high - absorber_width - 5 * info.width:
            add(Finding("warning", "packet.center",
                        f"the packet (centre {name} = {info.center:g}, width {info.width:g}) is "
                        f"within 5 widths of the box edge or the absorber"))
    resource_findings(s, add)
