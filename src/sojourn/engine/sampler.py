"""What a run observes between and at its recordings: detector flux, region
probability, norm and absorption (sampled), and the moments (recorded)."""
from __future__ import annotations

from typing import TYPE_CHECKING, Optional

import numpy as np

from . import observables as obs
from .fft import FFTPair

if TYPE_CHECKING:
    from ..build import Setup


def _runs(indices: np.ndarray) -> list:
    """Contiguous runs of sorted indices as slices."""
    if indices.size == 0:
        return []
    cuts = np.nonzero(np.diff(indices) > 1)[0] + 1
    return [slice(int(run[0]), int(run[-1]) + 1) for run in np.split(indices, cuts)]


def layer_blocks(W: np.ndarray, columns: slice) -> list:
    """The absorbing cells of W (Ny, Nx) in a range of columns as rectangles
    (…, row slice, column slice): the full-height strips of the x layers, and the
    y layers' rows over the remaining columns — a quarter of the array, not
    all of it, for each sample."""
    free_row = int(np.argmin(W.sum(axis=1)))      # a row outside the y layers
    cols = np.arange(W.shape[1])[columns]
    strip = cols[W[free_row, cols] > 0]
    rest = cols[W[free_row, cols] == 0]
    out = [(Ellipsis, slice(None), c) for c in _runs(strip)]
    if rest.size:
        rows = np.nonzero(W[:, rest].max(axis=1) > 0)[0]
        out += [(Ellipsis, r, c) for r in _runs(rows) for c in _runs(rest)]
    return out


class Sampler:
    """Collects detector flux, region probability, norm and absorption between
    recordings; called by the propagator every `sample_steps` steps.

    `closing` is the propagator's closing kick (`Propagator.closing_kick`): the
    buffer it samples is that factor short of ψ(t). |ψ|² outside the absorber
    does not see it, but the current does — on a slope, by −(cΔt/m)V′|ψ|²
    (c the closing kick's weight) — so the flux is taken on closing·ψ at the
    detectors' stencil nodes (folded into their weights: no extra work)."""

    def __init__(self, setup: Setup, raw_absorbed=(0.0, 0.0),
                 closing: Optional[np.ndarray] = None):
        g = setup.grid
        self.dt, self.every = setup.dt, setup.sample_steps
        self.dx = g.cell   # the cell volume: dx on a line, dx·dy in the plane
        self.detectors = obs.Detectors(g, setup.detectors, setup.hbar, setup.mass,
                                       setup.flux_band)
        self._buffer_detectors = self.detectors if closing is None \
            else self.detectors.with_factor(closing)
        self.region = obs.window(g, *setup.region) if setup.region else None
        # with the flux, the region's probability is that of the band-filtered state
        self._region_filter = obs.BandFilter(g, self.region, setup.flux_band) \
            if self.region is not None and setup.flux_band is not None else None
        self._closing = closing
        self.left = obs.window(g, g.left - g.dx, setup.reference)
        self.right = obs.window(g, setup.reference, g.right + g.dx)
        self.layers = []   # per side (x below / above the middle): [(index, √(2W/ħ))]
        if setup.W is not None:
            half = g.points // 2
            for sl in (slice(0, half), slice(half, g.points)):   # the halves along x
                if np.ndim(setup.W) == 1:
                    nz = np.nonzero(setup.W[sl])[0]
                    if nz.size:
                        sl = slice(sl.start + nz[0], sl.start + nz[-1] + 1)
                    blocks = [((Ellipsis, sl), np.sqrt(2 * setup.W[sl] / setup.hbar))]
                else:
                    blocks = [(index, np.sqrt(2 * setup.W[index] / setup.hbar))
                              for index in layer_blocks(setup.W, sl)]
                self.layers.append(blocks)
        self.raw_absorbed = list(raw_absorbed)
        shape = setup.state_shape         # a planned transform for ⟨p⟩ and ⟨H⟩ over the grid's
        self._spectrum = FFTPair(shape, axes=range(len(shape) - len(g.shape), len(shape)))  # axes
        self.reset()

    def _transform(self, psi: np.ndarray) -> np.ndarray:
        self._spectrum.buffer[:] = psi
        self._spectrum.forward()
        return self._spectrum.buffer

    def reset(self) -> None:
        self.t, self.flux, self.p_region, self.norm = [], [], [], []
        self.absorbed = ([], [])

    def take(self, psi: np.ndarray, t: float, buffer: bool = False) -> None:
        """Sample ψ(t) (or, with `buffer`, the propagator's buffer: `closing` short of it)."""
        self.t.append(t)
        detectors = self._buffer_detectors if buffer else self.detectors
        self.flux.append(detectors.flux(psi) if len(detectors) else [0.0])
        if self._region_filter is None:
            self.p_region.append(obs.probability(psi, self.dx, self.region))
        else:
            self.p_region.append(self._region_filter.probability(
                psi, self.dx, self._closing if buffer else None))
        total = obs.norm(psi, self.dx)
        self.norm.append(total)
        for side, blocks in enumerate(self.layers):  # ∫ 2W|ψ|²/ħ dx, sampled
            self.raw_absorbed[side] += sum(obs.sum_abs2(root_rate * psi[index])
                                           for index, root_rate in blocks) * self.dx * self.dt \
                * self.every
        for side, value in enumerate(self.split_absorbed(total)):
            self.absorbed[side].append(value)

    def split_absorbed(self, norm: float) -> tuple[float, float]:
        """Absorbed probability per side: the exact total 1 - norm, shared as the
        sampled integrals ∫2W|ψ|²/ħ dt of each layer."""
        raw = sum(self.raw_absorbed)
        if raw <= 0:
            return 0.0, 0.0
        lost = max(1.0 - norm, 0.0)
        return lost * self.raw_absorbed[0] / raw, lost * self.raw_absorbed[1] / raw

    def __call__(self, buffer: np.ndarray, step: int) -> None:
        """The propagator's callback: the buffer after step `step` (counted from t = 0)."""
        self.take(buffer, step * self.dt, buffer=True)

    def batch(self) -> dict:
        out = {"t": np.array(self.t), "flux": np.array(self.flux, dtype=float).reshape(len(self.t), max(len(self.detectors), 1)),
               "P_region": np.array(self.p_region), "norm": np.array(self.norm),
               "absorbed_left": np.array(self.absorbed[0]),
               "absorbed_right": np.array(self.absorbed[1])}
        self.reset()
        return out

    def recording(self, psi, setup: Setup) -> dict:
        values = obs.moments(psi, setup.grid, setup.V, setup.hbar, setup.mass, self._transform)
        values["P_left"] = obs.probability(psi, self.dx, self.left)
        values["P_right"] = obs.probability(psi, self.dx, self.right)
        values["P_region"] = obs.probability(psi, self.dx, self.region)
        a_left, a_right = self.split_absorbed(values["norm"])
        values["absorbed_left"], values["absorbed_right"] = a_left, a_right
        return values
