"""Observables of a state on the grid: norm, moments, energy, region
probabilities and the probability current at detectors.

Reductions run over all axes of the state, and positions index its last axis,
so a leading axis (e.g. spinor components) is summed over."""
from __future__ import annotations

import copy
import math
from dataclasses import dataclass
from typing import Optional

import numpy as np
from scipy import fft as sfft

STENCIL_HALF_WIDTH = 8  # 16-point stencils: error ~ (kΔx)^16, negligible for resolved packets


def fornberg_weights(z: float, nodes: np.ndarray, order: int) -> np.ndarray:
    """Finite-difference weights at point z on arbitrary nodes, for derivatives
    0..order (B. Fornberg, Math. Comp. 51, 699 (1988)). Returns (order+1, len(nodes))."""
    n = len(nodes)
    c = np.zeros((order + 1, n))
    c1, c4 = 1.0, nodes[0] - z
    c[0, 0] = 1.0
    for i in range(1, n):
        mn = min(i, order)
        c2, c5, c4 = 1.0, c4, nodes[i] - z
        for j in range(i):
            c3 = nodes[i] - nodes[j]
            c2 *= c3
            if j == i - 1:
                for k in range(mn, 0, -1):
                    c[k, i] = c1 * (k * c[k - 1, i - 1] - c5 * c[k, i - 1]) / c2
                c[0, i] = -c1 * c5 * c[0, i - 1] / c2
            for k in range(mn, 0, -1):
                c[k, j] = (c4 * c[k, j] - k * c[k - 1, j]) / c3
            c[0, j] = c4 * c[0, j] / c3
        c1 = c2
    return c


BAND_EDGE = 6.0   # transition half-widths between the pass band's top and the window's
                  # middle: the window is 1 − 1e-9 at the top and 1e-9 at the stop edge
KERNEL_REACH = 8.6  # the filter kernel's e^(−δk²x²/2) is below 1e-16 beyond 8.6/δk


def band_kernel(offsets: np.ndarray, k_pass: float, k_stop: float) -> tuple:
    """Value and slope weights g(z − x_j), g′(z − x_j) of the smooth low-pass
    filter whose window in k is ½erfc((|k| − k_m)/(√2 δk)), k_m midway between
    k_pass and k_stop, δk = (k_stop − k_pass)/(2·BAND_EDGE): the box of half-width
    k_m convolved with a normal of width δk, so g(u) = sin(k_m u)/(πu)·e^(−δk²u²/2).
    `offsets` are u = z − x_j."""
    k_m, dk = 0.5 * (k_pass + k_stop), (k_stop - k_pass) / (2 * BAND_EDGE)
    u = np.asarray(offsets, dtype=float)
    gauss = np.exp(-0.5 * (dk * u) ** 2)
    small = np.abs(u) < 1e-8 / max(k_m, 1e-300)
    safe = np.where(small, 1.0, u)
    sinc = np.where(small, k_m / math.pi, np.sin(k_m * safe) / (math.pi * safe))
    dsinc = np.where(small, 0.0, (k_m * np.cos(k_m * safe) - np.sin(k_m * safe) / safe)
                     / (math.pi * safe))
    return sinc * gauss, (dsinc - dk ** 2 * u * sinc) * gauss


class Detectors:
    """Probability current J = (ħ/m) Im(ψ* ∂ψ/∂x) at fixed positions, from
    local 16-point interpolation stencils (no FFT, O(1) per detector). In the
    plane a detector is the line x = const and its flux is J_x summed over
    the line (times dy: the grid's cell over dx).

    With `band = (k_pass, k_stop)` the current is that of the state filtered to
    the populated band: ψ and ∂ψ/∂x at the detector are read through the smooth
    low-pass kernel of `band_kernel` (1 up to k_pass, 0 from k_stop ≤ π/dx on),
    so components a large time step feeds far above the band (PHYSICS §3) do not
    reach the flux; still O(kernel length) per detector, no FFT.

    ``nodes`` are the grid indices the stencils read (sorted, unique): a state
    known only there gives the same flux as the full state."""

    def __init__(self, grid, positions, hbar: float, mass: float,
                 band: Optional[tuple[float, float]] = None):
        self.positions = np.asarray(list(positions), dtype=float)
        self.factor = hbar / mass * (getattr(grid, "cell", grid.dx) / grid.dx)   # 1 on a line
        m = STENCIL_HALF_WIDTH
        if band is not None:
            k_pass, k_stop = map(float, band)
            if not 0 < k_pass < k_stop <= grid.k_max * (1 + 1e-12):
                raise ValueError(f"band needs 0 < k_pass < k_stop ≤ π/dx = {grid.k_max:g} "
                                 f"(got {k_pass:g}, {k_stop:g})")
            reach = KERNEL_REACH * 2 * BAND_EDGE / (k_stop - k_pass)
            m = max(m, min(int(math.ceil(reach / grid.dx)) + 1, grid.points // 2))
        self.band = band
        starts, value_w, slope_w = [], [], []
        for z in self.positions:
            centre = int(math.floor((z - grid.left) / grid.dx))
            start = min(max(centre - m + 1, 0), grid.points - 2 * m)
            nodes = grid.left + grid.dx * np.arange(start, start + 2 * m)
            if band is None:
                w = fornberg_weights(z, nodes, 1)
            else:
                w = [g * grid.dx for g in band_kernel(z - nodes, *band)]
            starts.append(start)
            value_w.append(w[0])
            slope_w.append(w[1])
        self._slices = [slice(s, s + 2 * m) for s in starts]
        self._value = [np.asarray(w) for w in value_w]
        self._slope = [np.asarray(w) for w in slope_w]
        self.nodes = np.unique(np.concatenate(
            [np.arange(s, s + 2 * m) for s in starts] or [np.zeros(0, int)])).astype(int)

    def __len__(self) -> int:
        return len(self.positions)

    def with_factor(self, factor: np.ndarray) -> "Detectors":
        """The same detectors reading factor·ψ instead of ψ (`factor` on the grid):
        the factor is folded into the stencil weights, so the flux costs the same.
        (How the sampler reads a state half a kick short of a full step.)"""
        other = copy.copy(self)
        other._value = [w * factor[..., sl] for w, sl in zip(self._value, self._slices)]
        other._slope = [w * factor[..., sl] for w, sl in zip(self._slope, self._slices)]
        return other

    def flux(self, psi: np.ndarray) -> np.ndarray:
        """The current at each detector."""
        out = np.empty(len(self.positions))
        one_axis = psi.ndim == 1
        for i, (sl, wv, ws) in enumerate(zip(self._slices, self._value, self._slope)):
            local = psi[sl] if one_axis else psi[..., sl]
            if wv.ndim == 1:
                current = (np.dot(local, wv).conjugate() * np.dot(local, ws)).imag
            else:   # weights folded with a factor on ψ's leading axes too (the plane)
                current = (np.sum(local * wv, axis=-1).conjugate()
                           * np.sum(local * ws, axis=-1)).imag
            out[i] = self.factor * (current if one_axis else current.sum())
        return out


class BandFilter:
    """The state filtered to the populated band (the window of `band_kernel`)
    on one window's cells: the convolution with the kernel sampled on the grid
    (exact for the band, like the detectors' filter), done by FFT over the
    window and the kernel's reach with the kernel's transform kept (five times
    faster than the direct sum at the sizes a run samples)."""

    def __init__(self, grid, where: Window, band: tuple[float, float]):
        k_pass, k_stop = map(float, band)
        reach = KERNEL_REACH * 2 * BAND_EDGE / (k_stop - k_pass)
        m = min(int(math.ceil(reach / grid.dx)) + 1, grid.points // 4)
        self.kernel = band_kernel(grid.dx * np.arange(-m, m + 1), k_pass, k_stop)[0] * grid.dx
        self.m, self.points = m, grid.points
        self.where = where
        cells = where.cells
        self.indices = np.arange(cells.start - m, cells.stop + m) % grid.points  # periodic
        self.local = Window(slice(0, cells.stop - cells.start), where.first, where.last)
        self._length = sfft.next_fast_len(len(self.indices) + 2 * m)   # no wrap-around
        self._kernel_k = sfft.fft(self.kernel, self._length)

    def probability(self, psi: np.ndarray, dx: float, factor=None) -> float:
        """∫|ψ_band|² dx over the window (of factor·ψ when a factor is given)."""
        part = psi[..., self.indices]
        if factor is not None:
            part = part * factor[..., self.indices]
        full = sfft.ifft(sfft.fft(part, self._length, axis=-1) * self._kernel_k, axis=-1,
                         overwrite_x=True)
        return probability(full[..., 2 * self.m:len(self.indices)], dx, self.local)


def sum_abs2(values: np.ndarray) -> float:
    """Σ|ψ|² (np.vecdot: a complex one goes to BLAS like np.vdot, whose threads
    on a busy machine made this reduction a thousand times slower; the run loop
    holds BLAS to the FFT's threads)."""
    if values.ndim != 1:
        values = values.reshape(-1)
    return float(np.vecdot(values, values).real)


def norm(psi, dx) -> float:
    return sum_abs2(psi) * dx


@dataclass(frozen=True)
class Window:
    """The grid cells an interval [a, b] touches (cell i is [x_i − dx/2, x_i + dx/2])
    and the fractions of the first and last cell inside it, so that a boundary
    on a grid point counts half that point (midpoint rule, error O(Δx²))."""

    cells: slice
    first: float
    last: float


def window(grid, a: float, b: float) -> Optional[Window]:
    """Window of [a, b] on the grid, or None if it holds no cell."""
    lo = min(max((a - grid.left) / grid.dx + 0.5, 0.0), grid.points)
    hi = min(max((b - grid.left) / grid.dx + 0.5, 0.0), grid.points)
    if hi <= lo:
        return None
    i0, i1 = int(math.floor(lo)), int(math.ceil(hi)) - 1
    if i0 == i1:
        return Window(slice(i0, i0 + 1), hi - lo, hi - lo)
    return Window(slice(i0, i1 + 1), i0 + 1 - lo, hi - i1)


def probability(psi, dx, where: Optional[Window]) -> float:
    """∫|ψ|² dx over a window's interval."""
    if where is None:
        return 0.0
    if psi.ndim == 1:   # one axis: the hot path
        part = psi[where.cells]
        ends = abs(part[0]) ** 2, abs(part[-1]) ** 2
    else:
        part = psi[..., where.cells]
        ends = sum_abs2(part[..., 0]), sum_abs2(part[..., -1])
    total = sum_abs2(part)
    if part.shape[-1] == 1:
        return float(where.first * ends[0] * dx)
    return float((total - (1 - where.first) * ends[0] - (1 - where.last) * ends[1]) * dx)


def _total(weights: np.ndarray, values: np.ndarray) -> float:
    """Σ weights·values over all axes (values broadcast along the last ones)."""
    return float(np.sum(np.vecdot(weights, values)))


def moments(psi: np.ndarray, grid, V: np.ndarray, hbar: float, mass: float,
            fft=np.fft.fft) -> dict:
    """norm, ⟨x⟩, ⟨p⟩ and ⟨H⟩ (kinetic spectrally, potential on the grid),
    the expectation values normalised by the norm. `fft` may be a faster
    (planned) transform with numpy's convention."""
    cell = getattr(grid, "cell", grid.dx)   # dx on a line, dx·dy in the plane
    density = psi.real ** 2 + psi.imag ** 2
    total = float(density.sum() * cell)
    if not total > 0:  # zero, or not finite
        return {"norm": total, "x_mean": 0.0, "p_mean": 0.0, "energy": 0.0}
    amplitude = fft(psi)
    weights = amplitude.real ** 2 + amplitude.imag ** 2
    weights_total = float(weights.sum())
    return {
        "norm": total,
        "x_mean": _total(density, grid.x) * cell / total,
        "p_mean": hbar * _total(weights, grid.k) / weights_total,
        "energy": hbar ** 2 * _total(weights, grid.k_squared) / (2 * mass * weights_total)
        + _total(density, V) * cell / total,
    }
